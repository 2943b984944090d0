// Structured log lines on standard error: `ts=2026-12-01T22:50:01.123Z event=tell study=kiln trial=12
// worker=node-3 code=OK`. Keys are stable; values with spaces are quoted. Never log a token.
#ifndef OGIVE_SERVER_SERVICE_LOG_H_
#define OGIVE_SERVER_SERVICE_LOG_H_

#include <initializer_list>
#include <string>
#include <string_view>
#include <utility>

namespace ogive::service {

// Writes one line atomically (lines from different threads never interleave).
void LogLine(std::initializer_list<std::pair<std::string_view, std::string>> fields);

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_LOG_H_
