#include "server/service/validation.h"

#include <cmath>
#include <cstdint>

#include "absl/container/flat_hash_map.h"
#include "absl/strings/ascii.h"
#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "server/base/reason.h"
#include "server/campaign/campaign_options.h"
#include "server/service/page_token.h"

namespace ogive::service {

absl::Status InvalidField(absl::string_view path, absl::string_view rule) {
  return WithReason(absl::InvalidArgumentError(absl::StrCat(path, ": ", rule)),
                    {std::string(reason::kInvalidField), {{"field", std::string(path)}}, std::nullopt});
}

namespace {

using absl::StrCat;

// Integer parameters may have at most this many values (the search core's limit, server/search/space.cc).
constexpr uint64_t kMaxIntegerLevels = uint64_t{1} << 31;
// λ and the expected number of workers: the engine's own ceiling (campaign_options.h).
constexpr int kMaxPopulation = campaign::kMaxPopulationSize;

// Environment variables `ogive work` sets or reads itself, without the OGIVE_ prefix
// (client/cli/candidate_env.cc, client/cli/cli.cc). A parameter must not shadow them.
constexpr const char* kReservedEnvNames[] = {"CAMPAIGN",  "TRIAL",  "CANDIDATE_FILE", "SERVER",  "TOKEN",
                                             "TLS",    "TLS_CA", "TLS_CERT",       "TLS_KEY", "TLS_SERVER_NAME"};

// A value as messages show it: quoted, at most 64 bytes, control characters escaped.
std::string Shown(absl::string_view value) {
  const bool cut = value.size() > 64;
  return StrCat("'", absl::CHexEscape(value.substr(0, 64)), cut ? "...'" : "'");
}

// A count of a repeated field: at least `min`; beyond the server's `max` it is RESOURCE_EXHAUSTED.
absl::Status CheckCount(absl::string_view path, int64_t count, int64_t min, int64_t max, absl::string_view what) {
  if (count < min) return InvalidField(path, StrCat("needs ", min, "..", max, " ", what, ", got ", count));
  if (count > max) {
    return WithReason(
        absl::ResourceExhaustedError(StrCat(path, ": at most ", max, " ", what, " (this server's limit), got ", count)),
        {std::string(reason::kLimitExceeded), {{"field", std::string(path)}}, std::nullopt});
  }
  return absl::OkStatus();
}

// A listing's page_size and page_token (the token's own checks are page_token.h's).
absl::Status CheckPaging(int32_t page_size, const std::string& page_token, const ServiceLimits& limits) {
  if (page_size < 0 || page_size > limits.max_page_size) {
    return InvalidField("page_size", StrCat("must be 0 (", kDefaultPageSize, ") or in 1..", limits.max_page_size,
                                       ", got ", page_size));
  }
  if (page_token.size() > MaxPageTokenBytes(limits.max_name_bytes)) {
    return InvalidField("page_token", "not a token this server issued; pass next_page_token as is");
  }
  return absl::OkStatus();
}

bool IsControl(char c, bool multiline) {
  const auto u = static_cast<unsigned char>(c);
  if (multiline && (c == '\n' || c == '\t' || c == '\r')) return false;
  return u < 0x20 || u == 0x7f;
}

// Free text: at most `max_bytes`, no control characters (newlines and tabs too when `multiline`).
absl::Status CheckText(absl::string_view path, const std::string& value, int max_bytes, bool multiline) {
  if (static_cast<int64_t>(value.size()) > max_bytes) {
    return InvalidField(path, StrCat("at most ", max_bytes, " bytes, got ", value.size()));
  }
  for (char c : value) {
    if (IsControl(c, multiline)) {
      return InvalidField(path, StrCat(Shown(value), " holds a control character; ",
                                  multiline ? "only tab and newline are allowed" : "none are allowed"));
    }
  }
  return absl::OkStatus();
}

// A label (option, grade, worker): 1..max_bytes, no control characters, no blanks at either end.
absl::Status CheckLabel(absl::string_view path, const std::string& value, int max_bytes) {
  if (value.empty()) return InvalidField(path, "must not be empty");
  if (absl::Status s = CheckText(path, value, max_bytes, false); !s.ok()) return s;
  if (absl::ascii_isspace(value.front()) || absl::ascii_isspace(value.back())) {
    return InvalidField(path, StrCat(Shown(value), " must not start or end with a blank"));
  }
  return absl::OkStatus();
}

// A name: 1..max_bytes of letters, digits, '_', '-' (and '.' when `allow_dot`).
absl::Status CheckIdentifier(absl::string_view path, const std::string& value, int max_bytes, bool allow_dot) {
  const char* allowed = allow_dot ? "letters, digits, '_', '-' and '.'" : "letters, digits, '_' and '-'";
  if (value.empty()) return InvalidField(path, StrCat("must not be empty; 1..", max_bytes, " ", allowed));
  if (static_cast<int64_t>(value.size()) > max_bytes) {
    return InvalidField(path, StrCat("at most ", max_bytes, " bytes, got ", value.size()));
  }
  for (char c : value) {
    if (!(absl::ascii_isalnum(c) || c == '_' || c == '-' || (allow_dot && c == '.'))) {
      return InvalidField(path, StrCat(Shown(value), " may hold only ", allowed));
    }
  }
  return absl::OkStatus();
}

// A request id: empty, or up to max_bytes of printable ASCII without blanks.
absl::Status CheckRequestId(absl::string_view path, const std::string& value, const ServiceLimits& limits) {
  if (static_cast<int64_t>(value.size()) > limits.max_request_id_bytes) {
    return InvalidField(path, StrCat("at most ", limits.max_request_id_bytes, " bytes, got ", value.size()));
  }
  for (char c : value) {
    if (c <= ' ' || c > '~') return InvalidField(path, StrCat(Shown(value), " may hold only printable ASCII without blanks"));
  }
  return absl::OkStatus();
}

// Who asks, reports or renews: required, since leases, trial lists and the log name it.
absl::Status CheckWorker(absl::string_view path, const std::string& value, const ServiceLimits& limits) {
  if (value.empty()) {
    return InvalidField(path, "must not be empty: name the worker, e.g. a host and slot such as node-7:2");
  }
  return CheckLabel(path, value, limits.max_name_bytes);
}

absl::Status CheckLease(absl::string_view path, double seconds, const ServiceLimits& limits) {
  if (!std::isfinite(seconds) || seconds < 0 || seconds > limits.max_lease_seconds) {
    return InvalidField(path, StrCat("must be 0 (the default) or in (0, ", limits.max_lease_seconds, "] seconds, got ",
                                seconds));
  }
  return absl::OkStatus();
}

absl::Status CheckFinite(absl::string_view path, double value, absl::string_view context = "") {
  if (std::isfinite(value)) return absl::OkStatus();
  return InvalidField(path, StrCat("must be a finite number, got ", value, context));
}

std::string EnvName(const std::string& parameter) {
  std::string name = absl::AsciiStrToUpper(parameter);
  for (char& c : name) {
    if (c == '-') c = '_';
  }
  return name;
}

absl::Status CheckParameterKind(const std::string& path, const v1::Parameter& p, const ServiceLimits& limits) {
  const std::string of = StrCat(" (parameter '", p.name(), "')");
  switch (p.kind_case()) {
    case v1::Parameter::kReal: {
      const v1::RealRange& r = p.real();
      if (absl::Status s = CheckFinite(path + ".real.low", r.low(), of); !s.ok()) return s;
      if (absl::Status s = CheckFinite(path + ".real.high", r.high(), of); !s.ok()) return s;
      if (!(r.low() < r.high())) {
        return InvalidField(path + ".real.low", StrCat("must be less than real.high (", r.high(), "), got ", r.low(), of));
      }
      if (!std::isfinite(r.high() - r.low())) {
        return InvalidField(path + ".real", StrCat("high - low must be a finite number, got low=", r.low(),
                                              " high=", r.high(), of));
      }
      if (r.log() && !(r.low() > 0)) {
        return InvalidField(path + ".real.low", StrCat("must be > 0 on a log scale (real.log), got ", r.low(), of));
      }
      return absl::OkStatus();
    }
    case v1::Parameter::kInteger: {
      const v1::IntegerRange& r = p.integer();
      if (!(r.low() < r.high())) {
        return InvalidField(path + ".integer.low",
                       StrCat("must be less than integer.high (", r.high(), "), got ", r.low(), of));
      }
      // In unsigned arithmetic high - low cannot overflow.
      if (static_cast<uint64_t>(r.high()) - static_cast<uint64_t>(r.low()) >= kMaxIntegerLevels) {
        return InvalidField(path + ".integer", StrCat("at most ", kMaxIntegerLevels, " values (high - low + 1), got low=",
                                                 r.low(), " high=", r.high(), of));
      }
      return absl::OkStatus();
    }
    case v1::Parameter::kCategorical: {
      const auto& options = p.categorical().options();
      if (absl::Status s =
              CheckCount(path + ".categorical.options", options.size(), 2, limits.max_options, "distinct options");
          !s.ok()) {
        return s;
      }
      absl::flat_hash_map<std::string, int> seen;
      for (int j = 0; j < options.size(); ++j) {
        const std::string option_path = StrCat(path, ".categorical.options[", j, "]");
        if (absl::Status s = CheckLabel(option_path, options[j], limits.max_name_bytes); !s.ok()) return s;
        if (auto [it, inserted] = seen.emplace(options[j], j); !inserted) {
          return InvalidField(option_path, StrCat(Shown(options[j]), " appears twice (also options[", it->second,
                                             "]); options must be distinct"));
        }
      }
      return absl::OkStatus();
    }
    case v1::Parameter::kFlag:
      return absl::OkStatus();
    case v1::Parameter::KIND_NOT_SET:
      break;
  }
  return InvalidField(path, StrCat("set its kind: one of real, integer, categorical, flag", of));
}

absl::Status CheckObjective(const v1::Objective& objective, const ServiceLimits& limits) {
  switch (objective.order_case()) {
    case v1::Objective::kDirection:
      if (objective.direction() == v1::DIRECTION_LOWER_IS_BETTER || objective.direction() == v1::DIRECTION_HIGHER_IS_BETTER) {
        return absl::OkStatus();
      }
      return InvalidField("design.objective.direction",
                     StrCat("must be DIRECTION_LOWER_IS_BETTER or DIRECTION_HIGHER_IS_BETTER, got ", static_cast<int>(objective.direction())));
    case v1::Objective::kGradeScale: {
      const auto& labels = objective.grade_scale().labels();
      if (absl::Status s = CheckCount("design.objective.grade_scale.labels", labels.size(), 2, limits.max_options,
                                      "distinct labels, worst first");
          !s.ok()) {
        return s;
      }
      absl::flat_hash_map<std::string, int> seen;
      for (int j = 0; j < labels.size(); ++j) {
        const std::string path = StrCat("design.objective.grade_scale.labels[", j, "]");
        if (absl::Status s = CheckLabel(path, labels[j], limits.max_name_bytes); !s.ok()) return s;
        if (auto [it, inserted] = seen.emplace(labels[j], j); !inserted) {
          return InvalidField(path, StrCat(Shown(labels[j]), " appears twice (also labels[", it->second,
                                      "]); labels must be distinct"));
        }
      }
      return absl::OkStatus();
    }
    case v1::Objective::ORDER_NOT_SET:
      break;
  }
  return InvalidField("design.objective", "set either direction (DIRECTION_LOWER_IS_BETTER or DIRECTION_HIGHER_IS_BETTER) or grade_scale");
}

// One start value against its parameter's kind and bounds.
absl::Status CheckStartValue(const std::string& path, const v1::Value& value, const v1::Parameter& p) {
  const char* expected = "a value";
  switch (p.kind_case()) {
    case v1::Parameter::kReal:
      expected = "a real value";
      if (value.kind_case() != v1::Value::kReal) break;
      if (!(value.real() >= p.real().low() && value.real() <= p.real().high())) {
        return InvalidField(path + ".real", StrCat("must be in [", p.real().low(), ", ", p.real().high(), "], got ",
                                              value.real()));
      }
      return absl::OkStatus();
    case v1::Parameter::kInteger:
      expected = "an integer value";
      if (value.kind_case() != v1::Value::kInteger) break;
      if (value.integer() < p.integer().low() || value.integer() > p.integer().high()) {
        return InvalidField(path + ".integer", StrCat("must be in [", p.integer().low(), ", ", p.integer().high(),
                                                 "], got ", value.integer()));
      }
      return absl::OkStatus();
    case v1::Parameter::kCategorical:
      expected = "a categorical value";
      if (value.kind_case() != v1::Value::kCategorical) break;
      for (const std::string& option : p.categorical().options()) {
        if (option == value.categorical()) return absl::OkStatus();
      }
      return InvalidField(path + ".categorical", StrCat(Shown(value.categorical()), " is not an option; allowed: ",
                                                   absl::StrJoin(p.categorical().options(), ", ")));
    case v1::Parameter::kFlag:
      expected = "a flag value";
      if (value.kind_case() != v1::Value::kFlag) break;
      return absl::OkStatus();
    case v1::Parameter::KIND_NOT_SET:
      break;
  }
  return InvalidField(path, StrCat("parameter '", p.name(), "' takes ", expected));
}

}  // namespace

absl::Status ValidateCampaignName(absl::string_view field, const std::string& name, const ServiceLimits& limits) {
  return CheckIdentifier(field, name, limits.max_name_bytes, true);
}

absl::Status ValidateDesignShape(const v1::CampaignDesign& design, const ServiceLimits& limits) {
  if (absl::Status s = ValidateCampaignName("design.name", design.name(), limits); !s.ok()) return s;
  if (absl::Status s = CheckCount("design.parameters", design.parameters_size(), 1, limits.max_parameters,
                                  "parameters");
      !s.ok()) {
    return s;
  }
  absl::flat_hash_map<std::string, int> by_name;
  absl::flat_hash_map<std::string, int> by_env;
  for (int i = 0; i < design.parameters_size(); ++i) {
    const v1::Parameter& p = design.parameters(i);
    const std::string path = StrCat("design.parameters[", i, "]");
    if (absl::Status s = CheckIdentifier(path + ".name", p.name(), limits.max_name_bytes, false); !s.ok()) return s;
    if (auto [it, inserted] = by_name.emplace(p.name(), i); !inserted) {
      return InvalidField(path + ".name", StrCat(Shown(p.name()), " appears twice (also parameters[", it->second,
                                            "]); parameter names must be distinct"));
    }
    const std::string env = EnvName(p.name());
    if (auto [it, inserted] = by_env.emplace(env, i); !inserted) {
      return InvalidField(path + ".name",
                     StrCat(Shown(p.name()), " and parameters[", it->second, "].name ",
                            Shown(design.parameters(it->second).name()), " both give OGIVE_", env,
                            " to the programs of 'ogive work'; names must differ in more than case, '-' and '_'"));
    }
    for (const char* reserved : kReservedEnvNames) {
      if (env == reserved) {
        return InvalidField(path + ".name", StrCat(Shown(p.name()), " would shadow OGIVE_", env,
                                              ", which 'ogive work' sets or reads itself; choose another name"));
      }
    }
    if (absl::Status s = CheckText(path + ".unit", p.unit(), limits.max_name_bytes, false); !s.ok()) return s;
    if (absl::Status s = CheckText(path + ".description", p.description(), limits.max_description_bytes, true);
        !s.ok()) {
      return s;
    }
    if (absl::Status s = CheckParameterKind(path, p, limits); !s.ok()) return s;
  }
  if (!design.has_objective()) {
    return InvalidField("design.objective", "required: direction (DIRECTION_LOWER_IS_BETTER or DIRECTION_HIGHER_IS_BETTER) or grade_scale");
  }
  if (absl::Status s = CheckObjective(design.objective(), limits); !s.ok()) return s;
  const bool graded = design.objective().has_grade_scale();

  if (design.population_size() < 0 || design.population_size() == 1 || design.population_size() > kMaxPopulation) {
    return InvalidField("design.population_size", StrCat("must be 0 (the default) or in 2..", kMaxPopulation, ", got ",
                                                    design.population_size()));
  }
  if (design.expected_workers() < 0 || design.expected_workers() > kMaxPopulation) {
    return InvalidField("design.expected_workers", StrCat("must be 0 (meaning 1) or in 1..", kMaxPopulation, ", got ",
                                                     design.expected_workers()));
  }
  if (design.staleness_limit() < 0) {
    return InvalidField("design.staleness_limit", StrCat("must be >= 0 (0 = the default), got ", design.staleness_limit()));
  }
  if (!campaign::ParseNoise(design.noise()).has_value()) {
    return InvalidField("design.noise", campaign::NoiseRule(design.noise()));
  }
  if (!campaign::ParseModel(design.model(), 0, false).has_value()) {
    return InvalidField("design.model", StrCat(campaign::kModelRule, ", got \"", design.model(), "\""));
  }
  if (design.model() == "on") {
    // The model covers the real and integer block only; a design with flags or options runs without it,
    // so "on" there would be a promise the campaign does not keep.
    for (const v1::Parameter& p : design.parameters()) {
      if (p.kind_case() == v1::Parameter::kFlag || p.kind_case() == v1::Parameter::kCategorical) {
        return InvalidField("design.model",
                            StrCat("\"on\" needs every parameter real or integer (the model covers only those); "
                                   "parameter '", p.name(), "' is a ",
                                   p.kind_case() == v1::Parameter::kFlag ? "flag" : "categorical",
                                   ": use \"auto\" or \"off\""));
      }
    }
  }
  if (design.trial_budget() < 0) {
    return InvalidField("design.trial_budget", StrCat("must be >= 0 (0 = no budget), got ", design.trial_budget()));
  }
  if (design.has_target() && design.has_target_grade()) {
    return InvalidField("design.target", "set at most one of target and target_grade");
  }
  if (design.has_target()) {
    if (graded) return InvalidField("design.target", "a graded campaign takes target_grade, not target");
    if (absl::Status s = CheckFinite("design.target", design.target()); !s.ok()) return s;
  }
  if (design.has_target_grade()) {
    if (!graded) return InvalidField("design.target_grade", "a scored campaign takes target, not target_grade");
    if (absl::Status s = CheckLabel("design.target_grade", design.target_grade(), limits.max_name_bytes); !s.ok()) {
      return s;
    }
    bool on_scale = false;
    for (const std::string& label : design.objective().grade_scale().labels()) {
      on_scale = on_scale || label == design.target_grade();
    }
    if (!on_scale) {
      return InvalidField("design.target_grade",
                     StrCat(Shown(design.target_grade()), " is not on the scale; allowed: ",
                            absl::StrJoin(design.objective().grade_scale().labels(), ", ")));
    }
  }
  if (absl::Status s = CheckLease("design.lease_seconds", design.lease_seconds(), limits); !s.ok()) return s;
  if (!std::isfinite(design.initial_spread()) || design.initial_spread() < 0 || design.initial_spread() > 1) {
    return InvalidField("design.initial_spread",
                   StrCat("must be 0 (the default) or in (0, 1], a fraction of each range; got ", design.initial_spread()));
  }
  switch (design.gaussian_model()) {
    case v1::GAUSSIAN_MODEL_UNSPECIFIED:
    case v1::GAUSSIAN_MODEL_FULL:
    case v1::GAUSSIAN_MODEL_DIAGONAL:
      break;
    default:
      return InvalidField("design.gaussian_model",
                     StrCat("must be GAUSSIAN_MODEL_UNSPECIFIED, GAUSSIAN_MODEL_FULL or GAUSSIAN_MODEL_DIAGONAL, got ",
                            static_cast<int>(design.gaussian_model())));
  }
  for (const auto& [name, value] : design.start().values()) {
    const std::string path = StrCat("design.start.values[", Shown(name), "]");
    auto it = by_name.find(name);
    if (it == by_name.end()) return InvalidField(path, "not a parameter of this design");
    if (absl::Status s = CheckStartValue(path, value, design.parameters(it->second)); !s.ok()) return s;
  }
  return absl::OkStatus();
}

absl::Status ValidateCreateCampaign(const v1::CreateCampaignRequest& request, const ServiceLimits& limits) {
  if (absl::Status s = CheckRequestId("request_id", request.request_id(), limits); !s.ok()) return s;
  return ValidateDesignShape(request.design(), limits);
}

absl::Status ValidateGetCampaign(const v1::GetCampaignRequest& request, const ServiceLimits& limits) {
  return ValidateCampaignName("campaign", request.campaign(), limits);
}

absl::Status ValidateAsk(const v1::AskRequest& request, const ServiceLimits& limits) {
  if (absl::Status s = ValidateCampaignName("campaign", request.campaign(), limits); !s.ok()) return s;
  if (absl::Status s = CheckCount("count", request.count(), 1, limits.max_ask_count, "trials"); !s.ok()) return s;
  if (absl::Status s = CheckWorker("worker", request.worker(), limits); !s.ok()) return s;
  if (absl::Status s = CheckLease("lease_seconds", request.lease_seconds(), limits); !s.ok()) return s;
  return CheckRequestId("request_id", request.request_id(), limits);
}

absl::Status ValidateTell(const v1::TellRequest& request, const ServiceLimits& limits) {
  if (absl::Status s = ValidateCampaignName("campaign", request.campaign(), limits); !s.ok()) return s;
  if (absl::Status s = CheckCount("reports", request.reports_size(), 1, limits.max_reports_per_tell, "reports");
      !s.ok()) {
    return s;
  }
  if (absl::Status s = CheckWorker("worker", request.worker(), limits); !s.ok()) return s;
  for (int i = 0; i < request.reports_size(); ++i) {
    const v1::Report& r = request.reports(i);
    const std::string path = StrCat("reports[", i, "]");
    // A trial number that names no trial (0 and negative ones too) is a per-report NOT_FOUND, not a
    // malformed request: the other reports of the call still count.
    const v1::Outcome& o = r.outcome();
    switch (o.kind_case()) {
      case v1::Outcome::kScore:
        if (absl::Status s = CheckFinite(path + ".outcome.score", o.score()); !s.ok()) return s;
        break;
      case v1::Outcome::kGrade:
        if (absl::Status s = CheckLabel(path + ".outcome.grade", o.grade(), limits.max_name_bytes); !s.ok()) return s;
        break;
      case v1::Outcome::kInfeasible:
      case v1::Outcome::kVoid:
        break;
      case v1::Outcome::KIND_NOT_SET:
        return InvalidField(path + ".outcome", "set one of score, grade, infeasible, void");
    }
    // A note is stored and shown exactly as sent (any text, control characters included): only its length
    // is limited.
    if (o.note().size() > static_cast<size_t>(limits.max_note_bytes)) {
      return InvalidField(path + ".outcome.note", StrCat("at most ", limits.max_note_bytes, " bytes, got ", o.note().size()));
    }
  }
  return absl::OkStatus();
}

absl::Status ValidateRenew(const v1::RenewRequest& request, const ServiceLimits& limits) {
  if (absl::Status s = ValidateCampaignName("campaign", request.campaign(), limits); !s.ok()) return s;
  if (absl::Status s = CheckCount("trials", request.trials_size(), 1, limits.max_ask_count, "trial numbers");
      !s.ok()) {
    return s;
  }
  if (absl::Status s = CheckWorker("worker", request.worker(), limits); !s.ok()) return s;
  return CheckLease("lease_seconds", request.lease_seconds(), limits);
}

absl::Status ValidateListTrials(const v1::ListTrialsRequest& request, const ServiceLimits& limits) {
  if (absl::Status s = ValidateCampaignName("campaign", request.campaign(), limits); !s.ok()) return s;
  switch (request.state()) {
    case v1::TRIAL_STATE_UNSPECIFIED:
    case v1::TRIAL_STATE_LEASED:
    case v1::TRIAL_STATE_REPORTED:
    case v1::TRIAL_STATE_LAPSED:
    case v1::TRIAL_STATE_VOIDED:
      break;
    default:
      return InvalidField("state", StrCat("must be TRIAL_STATE_UNSPECIFIED (all), TRIAL_STATE_LEASED, TRIAL_STATE_REPORTED, "
                                     "TRIAL_STATE_LAPSED or TRIAL_STATE_VOIDED, got ",
                                     static_cast<int>(request.state())));
  }
  return CheckPaging(request.page_size(), request.page_token(), limits);
}

absl::Status ValidateListCampaigns(const v1::ListCampaignsRequest& request, const ServiceLimits& limits) {
  return CheckPaging(request.page_size(), request.page_token(), limits);
}

absl::Status ValidateListGenerations(const v1::ListGenerationsRequest& request, const ServiceLimits& limits) {
  if (absl::Status s = ValidateCampaignName("campaign", request.campaign(), limits); !s.ok()) return s;
  return CheckPaging(request.page_size(), request.page_token(), limits);
}

absl::Status ValidateSetPhase(const v1::SetPhaseRequest& request, const ServiceLimits& limits) {
  if (absl::Status s = ValidateCampaignName("campaign", request.campaign(), limits); !s.ok()) return s;
  switch (request.command()) {
    case v1::PHASE_COMMAND_PAUSE:
    case v1::PHASE_COMMAND_RESUME:
    case v1::PHASE_COMMAND_FINISH:
      break;
    default:
      return InvalidField("command", StrCat("must be PHASE_COMMAND_PAUSE, PHASE_COMMAND_RESUME or PHASE_COMMAND_FINISH, got ",
                                       static_cast<int>(request.command())));
  }
  return CheckRequestId("request_id", request.request_id(), limits);
}

absl::Status ValidateWatch(const v1::WatchRequest& request, const ServiceLimits& limits) {
  return ValidateCampaignName("campaign", request.campaign(), limits);
}

}  // namespace ogive::service
