// SqliteStore: the embedded Store, one SQLite file in WAL mode (see schema.h for its tables).
//
// Writes: every write (Commit, CreateCampaign) goes through one writer connection owned by one writer
// thread, the only connection that ever writes or checkpoints the file (the SQLite of Debian 12
// predates the fix for a WAL corruption bug that needs two connections writing or checkpointing at
// once). Group commit: a caller queues its write and blocks; the writer thread takes every queued
// write (at most max_batch_writes), opens BEGIN IMMEDIATE, applies the writes, commits once with
// synchronous=FULL, and then wakes all of them. A write that fails fails alone: the batch is first
// applied whole, and if one of its writes fails in the database it is rolled back and applied again
// with each write inside its own SAVEPOINT, so that only the failing write is undone and only its
// caller sees the error. Under load the writer first lets a batch grow
// for a short window: it expects as many writes as the previous batch held plus those that queued
// while it ran (callers woken by a commit tend to write again at once), and waits until that many
// are queued or the window ends, so that one fsync serves more writes. A lone writer (the previous
// batch one write, nothing queued behind it) is committed at once. Serializing protobuf messages and checking
// numbers happens on the callers' threads, so the writer thread only binds and steps.
//
// Reads: a small pool of read-only connections; each read takes one connection and one short read
// transaction, so it sees a consistent committed state and never waits for the writer.
//
// Thread-safe: any thread may call any method. The destructor drains the queue (writes already
// queued complete and their callers return normally), stops the writer thread and closes the
// connections; no new call may start once destruction has begun.
#ifndef OGIVE_STORAGE_SQLITE_STORE_H_
#define OGIVE_STORAGE_SQLITE_STORE_H_

#include <cstdint>
#include <deque>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <set>
#include <thread>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/functional/function_ref.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "storage/store.h"

namespace ogive::storage {

namespace internal {
class Connection;
}  // namespace internal

// What one write transaction did, for SqliteStoreOptions::on_transaction.
struct SqliteTransactionReport {
  double seconds = 0.0;   // from BEGIN IMMEDIATE until COMMIT returned (the fsync included)
  int64_t writes = 0;     // writes the transaction held
  int64_t committed_writes = 0;  // of them, stored
  bool committed = false;  // false: BEGIN or COMMIT failed and nothing of it was stored
};

// How a SqliteStore opens and runs its database.
struct SqliteStoreOptions {
  // At most this many writes share one transaction (and its fsync). >= 1.
  int max_batch_writes = 256;
  // Group commit window: how long (microseconds) the writer may wait for a batch to grow to the
  // size it expects (see the top of this file) before it begins the transaction. 0 turns the wait
  // off. >= 0.
  int group_commit_window_us = 500;
  // How long a connection waits for a lock held by another process before the call fails with
  // UNAVAILABLE. >= 0.
  int busy_timeout_ms = 5000;
  // Read connections in the pool: at most this many reads run at once. >= 1.
  int reader_connections = 4;
  // Opens the file for reading only (inspection, backups, a file that is not writable): no writer
  // connection and no migration; Commit and CreateCampaign fail with FAILED_PRECONDITION.
  bool read_only = false;
  // The sqlite3 VFS every connection opens the files with, by its registered name; empty for
  // SQLite's default. Tests pass a fault-injecting VFS here (tests/support/fault_vfs.h).
  std::string vfs;
  // Called on the writer thread after every write transaction, outside the store's locks (metrics
  // use it); it delays the next transaction, so keep it short. May be empty.
  std::function<void(const SqliteTransactionReport&)> on_transaction;

  // INVALID_ARGUMENT naming the field, its value and the rule when a value is out of range.
  absl::Status Validate() const;
};

// What the writer has done since Open, for tests and metrics. A "write" is one Commit or
// CreateCampaign.
struct SqliteStoreStats {
  int64_t transactions = 0;         // write transactions committed
  int64_t committed_writes = 0;     // writes stored
  int64_t failed_writes = 0;        // writes refused (validation, NOT_FOUND, ...) or lost with
                                    // their transaction
  int64_t failed_transactions = 0;  // batches whose BEGIN or COMMIT failed (nothing of them stored)
  int64_t largest_batch = 0;        // most writes one transaction held
  int64_t group_commit_waits = 0;   // transactions that waited for their batch to grow
  int64_t isolated_batches = 0;     // batches applied again write by write, each in a savepoint,
                                    // after one of their writes failed in the database
  int64_t queued_writes = 0;        // writes waiting for the writer thread right now
  int64_t active_writes = 0;        // writes in the batch the writer thread is running right now

  // committed_writes / transactions (0 before the first transaction).
  double commits_per_transaction() const;
};

// How one connection is set up, as read back from SQLite (for diagnostics and tests).
struct SqliteConnectionSettings {
  std::string role;           // "writer" or "reader <i>"
  std::string journal_mode;   // PRAGMA journal_mode, "wal" when the store opened
  int64_t synchronous = 0;    // PRAGMA synchronous: 2 (FULL) on every connection
  bool foreign_keys = false;  // PRAGMA foreign_keys
  bool read_only = false;     // sqlite3_db_readonly: true for every reader
};

// The Store on one SQLite file; see the top of this file for how writes and reads run.
class SqliteStore final : public Store {
 public:
  using Options = SqliteStoreOptions;                   // how the store opens and runs
  using Stats = SqliteStoreStats;                       // the writer's counters
  using ConnectionSettings = SqliteConnectionSettings;  // one connection's settings, read back

  // Opens (or creates) the database file at `path` and migrates it to the current schema version.
  // `path` must name a file (WAL mode needs one; ":memory:" is refused). Errors: INVALID_ARGUMENT
  // for bad options or path; FAILED_PRECONDITION when the schema is newer than this build knows
  // (or, read only, older), when the file is not writable (open it with read_only), or when WAL,
  // synchronous=FULL or foreign keys do not read back as set; DATA_LOSS when the file is not a
  // database or is corrupt; UNAVAILABLE when it cannot be opened or is locked.
  static absl::StatusOr<std::unique_ptr<SqliteStore>> Open(const std::string& path,
                                                           Options options = Options());

  // Drains pending writes, stops the writer thread and closes every connection (the writer last, so
  // that its final checkpoint folds the write-ahead log into the database file).
  ~SqliteStore() override;

  SqliteStore(const SqliteStore&) = delete;
  SqliteStore& operator=(const SqliteStore&) = delete;

  // Store. Errors as documented in store.h; besides, FAILED_PRECONDITION for writes on a read-only
  // store, INVALID_ARGUMENT for malformed arguments (an empty name, a trial number < 1, a limit <
  // 1), and NOT_FOUND from the List* calls for an unknown campaign id.
  absl::StatusOr<std::vector<StoredCampaign>> LoadAll() override;
  absl::StatusOr<StoredCampaign> LoadCampaign(int64_t campaign_id) override;  // that campaign's rows alone
  absl::StatusOr<int64_t> CreateCampaign(const std::string& name, const v1::CampaignDesign& design,
                                      const v1::EngineState& engine,
                                      const std::string& request_id) override;
  std::unique_ptr<PendingCommit> CommitAsync(CampaignWrite write) override;
  absl::StatusOr<TrialPage> ListTrials(int64_t campaign_id, std::optional<v1::TrialState> state,
                                       int64_t after_number, int limit) override;
  absl::StatusOr<std::vector<v1::GenerationSummary>> ListGenerations(int64_t campaign_id) override;
  absl::StatusOr<std::vector<v1::GenerationSummary>> ListGenerationsAfter(int64_t campaign_id, int64_t after_generation,
                                                                          int limit) override;
  absl::StatusOr<std::vector<Event>> ListEvents(int64_t campaign_id, int limit) override;
  absl::StatusOr<int64_t> SizeBytes() override;
  absl::Status CreateToken(const StoredToken& token) override;
  absl::StatusOr<bool> RevokeToken(const std::string& label, int64_t at_ns) override;
  absl::StatusOr<std::vector<StoredToken>> ListTokens() override;

  // Runs PRAGMA integrity_check on a read connection: OK when SQLite reports "ok", DATA_LOSS with
  // its first findings otherwise.
  absl::Status CheckIntegrity();

  // Reads back the settings of every connection (the writer's on the writer thread).
  absl::StatusOr<std::vector<ConnectionSettings>> InspectConnections();

  // The writer's counters so far.
  Stats stats() const;

  // The schema version this build writes (PRAGMA user_version of a migrated database).
  static int64_t schema_version();

  // The file this store was opened on.
  const std::string& path() const { return path_; }

 private:
  struct Reader;            // a read connection with its prepared statements
  struct WriterStatements;  // the writer connection's prepared statements
  struct EncodedWrite;      // a Commit or CreateCampaign, serialized and checked, ready to bind
  struct Job;               // one queued unit of work for the writer thread

  SqliteStore(std::string path, Options options);

  class Pending;             // the PendingCommit of a queued Job

  // Queues `job` and blocks until the writer thread has finished it.
  void Submit(Job& job);
  // Queues `job`; false (with job.status set) when the store is closing.
  bool Enqueue(Job& job);
  void WriterLoop();
  void RunBatch(const std::vector<Job*>& batch);
  // Applies every write of `writes` in the open transaction, without a savepoint each, and sets their
  // statuses (writes refused before queuing, or behind a broken chain, are skipped as in RunBatch).
  // When a write fails in the database it rolls the transaction back, leaves every job as it was and
  // returns false. Writer thread only.
  bool ApplyTogether(const std::vector<Job*>& writes);
  static absl::Status BrokenChainError(int64_t campaign_id);
  // `status` with the database file named in its message when it is about the file (UNAVAILABLE,
  // DATA_LOSS, INTERNAL): an operator reading a client's error must know which file failed.
  absl::Status NameTheFile(absl::Status status) const;
  // Whether Apply stores a write's engine state: kStoredByALaterWrite when a later write of the same
  // campaign in the same transaction replaces it anyway (ApplyTogether only, where a failure of that
  // later write fails the whole attempt).
  enum class EngineWrite { kStore, kStoredByALaterWrite };
  // Applies one write inside the open transaction (in a savepoint of its own, or together with the
  // rest of its batch: see ApplyTogether).
  absl::Status Apply(const EncodedWrite& write, int64_t& created_id, EngineWrite engine = EngineWrite::kStore);
  // Applies a token write; sets `revoked` as Job::created_id documents.
  absl::Status ApplyToken(const EncodedWrite& write, int64_t& revoked);

  // Runs `read` on a free read connection inside BEGIN ... COMMIT.
  absl::Status ReadTransaction(absl::FunctionRef<absl::Status(Reader&)> read);
  // Adds a campaign's trials and ask requests (in the order stored) to `campaign`, whose id and name are set.
  static absl::Status LoadTrialsAndAskRequests(Reader& r, StoredCampaign& campaign);

  const std::string path_;
  const Options options_;
  int lock_fd_ = -1;  // holds an exclusive flock on <path>.lock while the store can write

  std::unique_ptr<internal::Connection> writer_;  // used only on writer_thread_; null if read only
  std::unique_ptr<WriterStatements> writer_statements_;
  std::vector<std::unique_ptr<Reader>> readers_;

  absl::Mutex readers_mu_;
  std::vector<Reader*> free_readers_ ABSL_GUARDED_BY(readers_mu_);

  mutable absl::Mutex mu_;
  std::deque<Job*> queue_ ABSL_GUARDED_BY(mu_);
  bool stopping_ ABSL_GUARDED_BY(mu_) = false;
  // The size the writer expects its next batch to reach: the last batch's size plus the writes that
  // queued while it ran, at most max_batch_writes.
  size_t expected_batch_ ABSL_GUARDED_BY(mu_) = 1;
  Stats stats_ ABSL_GUARDED_BY(mu_);

  // (campaign id, chain) of chains in which a write failed; touched by the writer thread only.
  std::set<std::pair<int64_t, int64_t>> broken_chains_;

  std::thread writer_thread_;  // started last in Open, joined first in the destructor
};

}  // namespace ogive::storage

#endif  // OGIVE_STORAGE_SQLITE_STORE_H_
