// Fuzz target: a CampaignDesign from binary protobuf bytes, as CreateCampaign receives it over gRPC, through
// the server's whole validation and, when accepted, a short life of the campaign (design_check.h).
#include <cstddef>
#include <cstdint>

#include "ogive/v1/campaign.pb.h"
#include "tests/fuzz/design_check.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  ogive::v1::CampaignDesign design;
  if (!design.ParseFromArray(data, static_cast<int>(size))) return 0;
  ogive::fuzz::CheckDesign(design);
  return 0;
}
