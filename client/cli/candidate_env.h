// How `ogive work` hands a candidate to the evaluation program: one environment variable per
// parameter (OGIVE_<NAME>=value) and a JSON file holding the candidate as {name: value}.
#ifndef OGIVE_CLIENT_CLI_CANDIDATE_ENV_H_
#define OGIVE_CLIENT_CLI_CANDIDATE_ENV_H_

#include <string>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// Names the worker loop sets besides the parameters'.
inline constexpr absl::string_view kCampaignVariable = "OGIVE_CAMPAIGN";
inline constexpr absl::string_view kTrialVariable = "OGIVE_TRIAL";
inline constexpr absl::string_view kCandidateFileVariable = "OGIVE_CANDIDATE_FILE";

// "OGIVE_" + the parameter name upper-cased, with '-' and '.' replaced by '_':
// "peak-temp" -> "OGIVE_PEAK_TEMP".
std::string EnvName(absl::string_view parameter);

// A value as the program reads it from the environment: reals with %.17g (exact), integers as
// integers, flags 1 or 0, categorical parameters as the option's name.
std::string EnvValue(const v1::Value& value);

// INVALID_ARGUMENT if two parameters of `design` map to the same variable, or one maps to a
// variable the worker loop sets itself; the message names both.
absl::Status CheckEnvNames(const v1::CampaignDesign& design);

// The variables for `candidate`, in the design's parameter order (parameters the candidate lacks
// are left out).
std::vector<std::pair<std::string, std::string>> CandidateEnv(const v1::CampaignDesign& design,
                                                              const v1::Candidate& candidate);

// `candidate` as one JSON object, in the design's parameter order: reals as numbers (exact),
// integers as integers, flags as true/false, categorical parameters as strings. Ends with a
// newline.
std::string CandidateJson(const v1::CampaignDesign& design, const v1::Candidate& candidate);

// `text` as a JSON string literal, quotes included.
std::string JsonString(absl::string_view text);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_CANDIDATE_ENV_H_
