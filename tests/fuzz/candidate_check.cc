#include "tests/fuzz/candidate_check.h"

#include <algorithm>
#include <cmath>

#include "tests/fuzz/require.h"

namespace ogive::fuzz {

void RequireCandidateInDesign(const v1::Candidate& candidate, const v1::CampaignDesign& design) {
  OGIVE_FUZZ_REQUIRE(candidate.values_size() == design.parameters_size(), "candidate has ",
                     candidate.values_size(), " values for ", design.parameters_size(), " parameters: ",
                     candidate.ShortDebugString());
  for (const v1::Parameter& p : design.parameters()) {
    const auto it = candidate.values().find(p.name());
    OGIVE_FUZZ_REQUIRE(it != candidate.values().end(), "no value for parameter '", p.name(), "'");
    const v1::Value& v = it->second;
    const std::string where = absl::StrCat("parameter '", p.name(), "' = ", v.ShortDebugString(), " in ",
                                           p.ShortDebugString());
    switch (p.kind_case()) {
      case v1::Parameter::kReal:
        OGIVE_FUZZ_REQUIRE(v.has_real(), where);
        OGIVE_FUZZ_REQUIRE(std::isfinite(v.real()), where);
        OGIVE_FUZZ_REQUIRE(p.real().low() <= v.real() && v.real() <= p.real().high(), where);
        break;
      case v1::Parameter::kInteger:
        OGIVE_FUZZ_REQUIRE(v.has_integer(), where);
        OGIVE_FUZZ_REQUIRE(p.integer().low() <= v.integer() && v.integer() <= p.integer().high(), where);
        break;
      case v1::Parameter::kCategorical: {
        OGIVE_FUZZ_REQUIRE(v.has_categorical(), where);
        const auto& options = p.categorical().options();
        OGIVE_FUZZ_REQUIRE(std::find(options.begin(), options.end(), v.categorical()) != options.end(), where);
        break;
      }
      case v1::Parameter::kFlag:
        OGIVE_FUZZ_REQUIRE(v.has_flag(), where);
        break;
      case v1::Parameter::KIND_NOT_SET:
        OGIVE_FUZZ_REQUIRE(false, "a campaign was created with a parameter of no kind: ", where);
    }
  }
}

}  // namespace ogive::fuzz
