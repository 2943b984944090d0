// FaultVfs: a sqlite3 VFS for tests that passes every call through to SQLite's default VFS and
// makes chosen calls fail with chosen SQLite result codes, so that a store meets a failing disk
// through SQLite's own error paths: a failed write of the write-ahead log (SQLITE_IOERR_WRITE), a
// failed fsync (SQLITE_IOERR_FSYNC), a full disk (SQLITE_FULL, what the unix VFS returns on
// ENOSPC), a write refused by a file system that turned read-only (SQLITE_IOERR_WRITE, what it
// returns on EROFS).
//
// A FaultVfs is registered under its name for the life of the process (sqlite3 keeps a pointer to
// it); connections opened with that name (SqliteStoreOptions::vfs) go through it. One rule is armed
// at a time; it counts the calls that match it and fails some of them. Thread-safe: the counters
// are atomic and the rule is read under a mutex, so a test thread may arm a rule while the store's
// writer thread runs.
#ifndef OGIVE_TESTS_SUPPORT_FAULT_VFS_H_
#define OGIVE_TESTS_SUPPORT_FAULT_VFS_H_

#include <atomic>
#include <cstdint>
#include <string>

#include "absl/base/thread_annotations.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"

namespace ogive::testing {

// The file calls a rule can fail.
enum class FaultOp { kWrite, kSync, kTruncate };

// Which files a rule applies to, by the role SQLite opened them for.
enum class FaultFile { kAny, kMainDb, kWal };

// Fails calls number after+1 .. after+times among the calls that match `op` and `file` (counted
// from the moment the rule is armed), returning `error` without touching the file; or, with error
// 0, holds each of them for `delay` and then makes it (a slow disk).
struct FaultRule {
  static constexpr int64_t kForever = -1;
  FaultOp op = FaultOp::kWrite;
  FaultFile file = FaultFile::kWal;
  int64_t after = 0;   // matching calls let through before the first failure, >= 0
  int64_t times = 1;   // failures, then the rule lets everything through; kForever: until Clear()
  int error = 0;       // an SQLite result code, e.g. SQLITE_IOERR_WRITE; 0 for a delay
  absl::Duration delay = absl::ZeroDuration();  // when error is 0; > 0
};

class FaultVfs {
 public:
  // The FaultVfs registered under `name`, registered on the first call (not as the default VFS).
  // Never destroyed.
  static FaultVfs& Get(const std::string& name);

  FaultVfs(const FaultVfs&) = delete;
  FaultVfs& operator=(const FaultVfs&) = delete;

  const std::string& name() const { return name_; }

  // Replaces the armed rule (if any) and starts counting its matching calls from zero.
  void Arm(const FaultRule& rule);
  // Disarms: every call goes through.
  void Clear();

  // Calls that matched the armed rule since it was armed (failed ones included).
  int64_t matched() const;
  // Calls the armed rule failed (or held) since it was armed.
  int64_t injected() const;
  // Every call of `op` on `file` made through this VFS since the process started (for sizing a
  // rule: how many log writes one commit makes).
  int64_t calls(FaultOp op, FaultFile file) const;

  // Consulted by the file methods: the result code to return instead of making a call of `op` on
  // a file of role `file` (never kAny), or 0 to make it (after the rule's delay, if any). Counts
  // the call.
  int Decide(FaultOp op, FaultFile file);

 private:
  explicit FaultVfs(std::string name);

  const std::string name_;
  mutable absl::Mutex mu_;
  bool armed_ ABSL_GUARDED_BY(mu_) = false;
  FaultRule rule_ ABSL_GUARDED_BY(mu_);
  int64_t matched_ ABSL_GUARDED_BY(mu_) = 0;
  int64_t injected_ ABSL_GUARDED_BY(mu_) = 0;
  std::atomic<int64_t> calls_[3][3] = {};  // [op][file], file kMainDb or kWal (kAny: other files)
};

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_FAULT_VFS_H_
