#include "client/cli/candidate_env.h"

#include <cmath>
#include <cstdio>
#include <map>

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"
#include "client/cli/format.h"

namespace ogive::cli {

std::string EnvName(absl::string_view parameter) {
  std::string name = absl::StrCat("OGIVE_", parameter);
  for (size_t i = 6; i < name.size(); ++i) {
    if (name[i] == '-' || name[i] == '.') name[i] = '_';
  }
  absl::AsciiStrToUpper(&name);
  return name;
}

std::string EnvValue(const v1::Value& value) {
  switch (value.kind_case()) {
    case v1::Value::kReal: {
      char buffer[64];
      std::snprintf(buffer, sizeof buffer, "%.17g", value.real());
      return buffer;
    }
    case v1::Value::kInteger:
      return absl::StrCat(value.integer());
    case v1::Value::kFlag:
      return value.flag() ? "1" : "0";
    case v1::Value::kCategorical:
      return value.categorical();
    case v1::Value::KIND_NOT_SET:
      break;
  }
  return "";
}

absl::Status CheckEnvNames(const v1::CampaignDesign& design) {
  std::map<std::string, std::string> owner;  // variable -> parameter
  for (absl::string_view reserved : {kCampaignVariable, kTrialVariable, kCandidateFileVariable}) {
    owner[std::string(reserved)] = "";
  }
  for (const v1::Parameter& p : design.parameters()) {
    const std::string name = EnvName(p.name());
    auto [it, inserted] = owner.emplace(name, p.name());
    if (inserted) continue;
    if (it->second.empty()) {
      return absl::InvalidArgumentError(absl::StrCat(
          "parameter '", p.name(), "' maps to ", name,
          ", which the worker loop sets itself; rename the parameter to run it with 'ogive work'"));
    }
    return absl::InvalidArgumentError(absl::StrCat(
        "parameters '", it->second, "' and '", p.name(), "' both map to the environment variable ",
        name, "; rename one to run the campaign with 'ogive work'"));
  }
  return absl::OkStatus();
}

std::vector<std::pair<std::string, std::string>> CandidateEnv(const v1::CampaignDesign& design,
                                                              const v1::Candidate& candidate) {
  std::vector<std::pair<std::string, std::string>> env;
  for (const v1::Parameter& p : design.parameters()) {
    auto it = candidate.values().find(p.name());
    if (it == candidate.values().end()) continue;
    env.emplace_back(EnvName(p.name()), EnvValue(it->second));
  }
  return env;
}

std::string JsonString(absl::string_view text) {
  std::string out = "\"";
  for (char c : text) {
    const unsigned char u = static_cast<unsigned char>(c);
    switch (c) {
      case '"':
        out += "\\\"";
        break;
      case '\\':
        out += "\\\\";
        break;
      case '\n':
        out += "\\n";
        break;
      case '\t':
        out += "\\t";
        break;
      case '\r':
        out += "\\r";
        break;
      default:
        if (u < 0x20) {
          char buffer[8];
          std::snprintf(buffer, sizeof buffer, "\\u%04x", u);
          out += buffer;
        } else {
          out += c;
        }
    }
  }
  out += '"';
  return out;
}

namespace {

std::string JsonValue(const v1::Value& value) {
  switch (value.kind_case()) {
    case v1::Value::kReal: {
      if (!std::isfinite(value.real())) return "null";  // the server never hands these out
      std::string text = FormatExact(value.real());
      // Keep reals recognizably real for typed readers: 5 -> 5.0.
      if (text.find_first_of(".e") == std::string::npos) text += ".0";
      return text;
    }
    case v1::Value::kInteger:
      return absl::StrCat(value.integer());
    case v1::Value::kFlag:
      return value.flag() ? "true" : "false";
    case v1::Value::kCategorical:
      return JsonString(value.categorical());
    case v1::Value::KIND_NOT_SET:
      break;
  }
  return "null";
}

}  // namespace

std::string CandidateJson(const v1::CampaignDesign& design, const v1::Candidate& candidate) {
  std::string out = "{";
  bool first = true;
  for (const v1::Parameter& p : design.parameters()) {
    auto it = candidate.values().find(p.name());
    if (it == candidate.values().end()) continue;
    absl::StrAppend(&out, first ? "" : ", ", JsonString(p.name()), ": ", JsonValue(it->second));
    first = false;
  }
  out += "}\n";
  return out;
}

}  // namespace ogive::cli
