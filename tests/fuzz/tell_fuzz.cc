// Fuzz target: the life of one campaign served in-process, driven by the input as a sequence of asks,
// tells (with any outcome), renewals, sweeps, phase changes, listings and restarts; every answer is
// predicted and the campaign's bookkeeping checked after each step (tell_driver.h).
#include <cstddef>
#include <cstdint>

#include "tests/fuzz/byte_reader.h"
#include "tests/fuzz/tell_driver.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  ogive::fuzz::ByteReader input(data, size);
  ogive::fuzz::TellDriver driver(input);
  driver.Run();
  return 0;
}
