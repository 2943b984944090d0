#include "client/cli/trial_export.h"

#include <cstdio>

#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "client/cli/format.h"

namespace ogive::cli {
namespace {

using absl::StrAppend;
using absl::StrCat;

// RFC 4180, section 2: records are separated by CRLF.
constexpr char kCrlf[] = "\r\n";

std::string CsvRecord(const std::vector<std::string>& fields) {
  std::string out;
  for (size_t i = 0; i < fields.size(); ++i) StrAppend(&out, i == 0 ? "" : ",", CsvField(fields[i]));
  out += kCrlf;
  return out;
}

std::string JsonValue(const v1::Value& value) {
  switch (value.kind_case()) {
    case v1::Value::kReal:
      return FormatExact(value.real());  // finite: the server refuses NaN and infinities
    case v1::Value::kInteger:
      return StrCat(value.integer());
    case v1::Value::kCategorical:
      return JsonString(value.categorical());
    case v1::Value::kFlag:
      return value.flag() ? "true" : "false";
    default:
      return "null";
  }
}

bool Consumed(const v1::Trial& t) { return t.use() == v1::OUTCOME_USE_CONSUMED && t.consumed_by() >= 1; }

}  // namespace

std::string IsoUtcMillis(int64_t unix_ms) {
  if (unix_ms == 0) return "";
  return absl::FormatTime("%Y-%m-%dT%H:%M:%E3SZ", absl::FromUnixMillis(unix_ms), absl::UTCTimeZone());
}

std::string JsonString(const std::string& text) {
  std::string out = "\"";
  for (char c : text) {
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
      case '\r':
        out += "\\r";
        break;
      case '\t':
        out += "\\t";
        break;
      default:
        if (static_cast<unsigned char>(c) < 0x20) {
          char buffer[8];
          std::snprintf(buffer, sizeof buffer, "\\u%04x", static_cast<unsigned>(static_cast<unsigned char>(c)));
          out += buffer;
        } else {
          out += c;  // UTF-8 passes through: proto3 strings are valid UTF-8
        }
    }
  }
  out += "\"";
  return out;
}

std::string ExportColumnName(const v1::Parameter& parameter) {
  return parameter.unit().empty() ? parameter.name() : StrCat(parameter.name(), " (", parameter.unit(), ")");
}

std::vector<std::string> ExportHeader(const v1::CampaignDesign& design) {
  std::vector<std::string> header = {"trial", "state", "outcome", "score", "grade", "note"};
  for (const v1::Parameter& p : design.parameters()) header.push_back(ExportColumnName(p));
  for (const char* column : {"generation", "consumed_by", "use", "late", "worker", "reported_by", "reported_at",
                             "lease_deadline", "replicate_of"}) {
    header.emplace_back(column);
  }
  return header;
}

std::string TrialsExportCsv(const v1::CampaignDesign& design, const std::vector<v1::Trial>& trials) {
  std::string out = CsvRecord(ExportHeader(design));
  for (const v1::Trial& t : trials) {
    const v1::Outcome& o = t.outcome();
    std::vector<std::string> row = {StrCat(t.number()),
                                    std::string(TrialStateName(t.state())),
                                    std::string(OutcomeKindName(o)),
                                    o.has_score() ? FormatExact(o.score()) : "",
                                    o.has_grade() ? o.grade() : "",
                                    o.note()};
    for (const v1::Parameter& p : design.parameters()) {
      auto it = t.candidate().values().find(p.name());
      row.push_back(it == t.candidate().values().end() ? "" : ValueData(it->second));
    }
    row.push_back(StrCat(t.generation()));
    row.push_back(Consumed(t) ? StrCat(t.consumed_by()) : "");
    row.emplace_back(OutcomeUseName(t.use()));
    row.emplace_back(t.late() ? "true" : "false");
    row.push_back(t.worker());
    row.push_back(t.reported_by());
    row.push_back(IsoUtcMillis(t.reported_at_unix_ms()));
    row.push_back(IsoUtcMillis(t.lease_deadline_unix_ms()));
    row.push_back(t.replicate_of() > 0 ? StrCat(t.replicate_of()) : "");
    out += CsvRecord(row);
  }
  return out;
}

std::string TrialsExportJson(const v1::CampaignDesign& design, const std::vector<v1::Trial>& trials) {
  const auto or_null = [](const std::string& text) { return text.empty() ? std::string("null") : JsonString(text); };
  std::string out = "[";
  for (size_t i = 0; i < trials.size(); ++i) {
    const v1::Trial& t = trials[i];
    const v1::Outcome& o = t.outcome();
    StrAppend(&out, i == 0 ? "\n" : ",\n", "{\"trial\":", t.number(),
              ",\"state\":", JsonString(std::string(TrialStateName(t.state()))),
              ",\"outcome\":", or_null(std::string(OutcomeKindName(o))),
              ",\"score\":", o.has_score() ? FormatExact(o.score()) : "null",
              ",\"grade\":", o.has_grade() ? JsonString(o.grade()) : "null", ",\"note\":", JsonString(o.note()),
              ",\"values\":{");
    bool first = true;
    for (const v1::Parameter& p : design.parameters()) {
      auto it = t.candidate().values().find(p.name());
      if (it == t.candidate().values().end()) continue;
      StrAppend(&out, first ? "" : ",", JsonString(p.name()), ":", JsonValue(it->second));
      first = false;
    }
    StrAppend(&out, "},\"generation\":", t.generation(),
              ",\"consumed_by\":", Consumed(t) ? StrCat(t.consumed_by()) : "null",
              ",\"use\":", or_null(std::string(OutcomeUseName(t.use()))), ",\"late\":", t.late() ? "true" : "false",
              ",\"worker\":", JsonString(t.worker()), ",\"reported_by\":", JsonString(t.reported_by()),
              ",\"reported_at\":", or_null(IsoUtcMillis(t.reported_at_unix_ms())),
              ",\"lease_deadline\":", or_null(IsoUtcMillis(t.lease_deadline_unix_ms())),
              ",\"replicate_of\":", t.replicate_of() > 0 ? StrCat(t.replicate_of()) : "null", "}");
  }
  out += trials.empty() ? "]\n" : "\n]\n";
  return out;
}

}  // namespace ogive::cli
