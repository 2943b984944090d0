// Fuzz target: a design file as `ogive campaign create` reads it, protobuf text format or (when the
// input starts with '{') JSON, parsed by the CLI's reader (client/cli/design_file.h), then the
// server's checks (design_check.h). A design the reader accepts must survive the wire (serialized
// and parsed as gRPC does) and being written back in its format and read again, unchanged.
#include <cstddef>
#include <cstdint>
#include <string>

#include "absl/strings/string_view.h"
#include "client/cli/design_file.h"
#include "google/protobuf/text_format.h"
#include "google/protobuf/util/field_comparator.h"
#include "google/protobuf/util/json_util.h"
#include "google/protobuf/util/message_differencer.h"
#include "ogive/v1/campaign.pb.h"
#include "tests/fuzz/design_check.h"
#include "tests/fuzz/require.h"

namespace {

bool SameDesign(const ogive::v1::CampaignDesign& a, const ogive::v1::CampaignDesign& b) {
  google::protobuf::util::DefaultFieldComparator comparator;
  comparator.set_treat_nan_as_equal(true);  // a NaN read back is the same NaN
  google::protobuf::util::MessageDifferencer differencer;
  differencer.set_field_comparator(&comparator);
  return differencer.Compare(a, b);
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const absl::string_view contents(reinterpret_cast<const char*>(data), size);
  const size_t first = contents.find_first_not_of(" \t\r\n");
  const bool json = first != absl::string_view::npos && contents[first] == '{';
  const char* file_name = json ? "design.json" : "design.txtpb";
  absl::StatusOr<ogive::v1::CampaignDesign> design = ogive::cli::ParseDesign(file_name, contents);
  if (!design.ok()) {
    OGIVE_FUZZ_REQUIRE(design.status().code() == absl::StatusCode::kInvalidArgument, design.status().ToString());
    return 0;
  }

  // What the CLI sends must reach the server as it is: the server's parse of the request is the
  // wire's check (strings must be UTF-8, for one).
  std::string wire;
  OGIVE_FUZZ_REQUIRE(design->SerializeToString(&wire), "the design does not serialize");
  ogive::v1::CampaignDesign received;
  OGIVE_FUZZ_REQUIRE(received.ParseFromString(wire) && SameDesign(*design, received),
                     "a design the reader accepted does not survive the wire: ", design->ShortDebugString());

  std::string written;
  if (json) {
    OGIVE_FUZZ_REQUIRE(google::protobuf::util::MessageToJsonString(*design, &written).ok(), "JSON print failed");
  } else {
    OGIVE_FUZZ_REQUIRE(google::protobuf::TextFormat::PrintToString(*design, &written), "text print failed");
  }
  absl::StatusOr<ogive::v1::CampaignDesign> again = ogive::cli::ParseDesign(file_name, written);
  OGIVE_FUZZ_REQUIRE(again.ok(), "a design written back does not read again: ", again.status().ToString(), "\n",
                     written);
  OGIVE_FUZZ_REQUIRE(SameDesign(*design, *again), "a design written back reads differently:\n", written);

  ogive::fuzz::CheckDesign(*design);
  return 0;
}
