// `ogive campaign export`: every trial of a campaign as data for spreadsheets and scripts, in CSV
// (RFC 4180) or JSON. One record per trial, in trial-number order: its number, state, outcome (kind,
// score, grade label), note, the candidate (one column per parameter, the unit in the header), the
// generation it was sampled from and the one that consumed it, what the search made of it, whether it
// was late, the worker that held it, who reported it (the label of the token, empty on a server
// without tokens), when it was reported and its lease deadline (ISO 8601, UTC, milliseconds).
// Pure functions of the protos.
#ifndef OGIVE_CLIENT_CLI_TRIAL_EXPORT_H_
#define OGIVE_CLIENT_CLI_TRIAL_EXPORT_H_

#include <cstdint>
#include <string>
#include <vector>

#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// The CSV header, in column order: trial, state, outcome, score, grade, note, one column per
// parameter ("peak_temp (degC)", or the bare name without a unit), generation, consumed_by, use,
// late, worker, reported_by, reported_at, lease_deadline.
std::vector<std::string> ExportHeader(const v1::CampaignDesign& design);

// A parameter's column: "peak_temp (degC)", or the bare name without a unit.
std::string ExportColumnName(const v1::Parameter& parameter);

// RFC 4180: a header row, then one record per trial; records end in CRLF; fields holding a comma, a
// double quote, CR or LF are quoted with inner quotes doubled. Empty fields for what a trial does not
// have (a score of a graded trial, consumed_by of an unconsumed one, reported_at before a report).
// Reals are written exactly (shortest round trip); flags as true/false; options by name.
std::string TrialsExportCsv(const v1::CampaignDesign& design, const std::vector<v1::Trial>& trials);

// A JSON array with one object per trial: "trial", "state", "outcome", "score" and "grade" (null
// when absent), "note", "values" (an object: parameter name -> number, string or boolean),
// "generation", "consumed_by" (null if none), "use", "late", "worker", "reported_by", "reported_at"
// (null before a report) and "lease_deadline". Ends with a newline.
std::string TrialsExportJson(const v1::CampaignDesign& design, const std::vector<v1::Trial>& trials);

// "2026-03-01T14:03:07.250Z"; "" for 0 (no such time).
std::string IsoUtcMillis(int64_t unix_ms);

// `text` as a JSON string literal, quotes included: '"', '\\' and control characters escaped.
std::string JsonString(const std::string& text);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_TRIAL_EXPORT_H_
