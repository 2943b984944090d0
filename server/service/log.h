// Structured log lines on standard error: `ts=2026-12-01T22:50:01.123Z event=tell campaign=kiln trial=12
// worker=node-3 code=OK`. Keys are stable; values with blanks, quotes, '=' or control characters are
// quoted with those escaped (\", \\, \n, \t, \r, \xHH), and each value is cut at kMaxLogValueBytes, so
// that what a client sends can neither forge a line nor grow one without bound. Never log a token.
//
// A request never waits for standard error: LogLine formats the line and queues it, and one thread
// of the log's own writes what is queued, many lines per write(2). If standard error stops taking
// lines (a full pipe nobody reads), the queue keeps at most kMaxQueuedLogBytes and the lines beyond
// are counted and reported by a later `event=log_dropped lines=N` line. Queued lines are written
// before the process exits normally (std::exit or a return from main); FlushLog writes them earlier.
#ifndef OGIVE_SERVER_SERVICE_LOG_H_
#define OGIVE_SERVER_SERVICE_LOG_H_

#include <cstddef>
#include <initializer_list>
#include <string>
#include <string_view>
#include <utility>

namespace ogive::service {

inline constexpr size_t kMaxQueuedLogBytes = 8 << 20;
// Longest value written for one field; a longer one is cut and ends in "...[<length> bytes]".
inline constexpr size_t kMaxLogValueBytes = 256;

// Queues one line; lines from different threads never interleave and keep the order of the calls.
void LogLine(std::initializer_list<std::pair<std::string_view, std::string>> fields);

// Returns once every line queued before the call is written (or after 2 s if standard error does
// not take them).
void FlushLog();

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_LOG_H_
