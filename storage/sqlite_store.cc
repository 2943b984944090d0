#include "storage/sqlite_store.h"

#include <pthread.h>
#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include <sqlite3.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <limits>
#include <system_error>
#include <utility>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "server/base/check.h"
#include "server/base/reason.h"
#include "storage/schema.h"
#include "storage/sqlite_connection.h"

namespace ogive::storage {

using internal::Connection;
using internal::ResetOnExit;
using internal::Statement;

namespace {

// Steps a statement that returns no rows to its end and resets it.
absl::Status RunOnce(Statement& statement) {
  ResetOnExit reset(statement);
  return statement.Run();
}

// Serialized with deterministic map order, so that equal messages are stored as equal bytes. Sized
// first and written into `out` in one piece (a growing string stream costs several times more on
// the request path, where every ask and tell serializes its records).
bool Serialize(const google::protobuf::MessageLite& message, std::string& out) {
  const size_t size = message.ByteSizeLong();
  if (size > static_cast<size_t>(std::numeric_limits<int>::max())) return false;
  out.resize(size);
  google::protobuf::io::ArrayOutputStream array(out.data(), static_cast<int>(size));
  google::protobuf::io::CodedOutputStream coded(&array);
  coded.SetSerializationDeterministic(true);
  message.SerializeWithCachedSizes(&coded);
  return !coded.HadError() && static_cast<size_t>(coded.ByteCount()) == size;
}

bool Parse(absl::string_view bytes, google::protobuf::MessageLite& message) {
  return message.ParseFromArray(bytes.data(), static_cast<int>(bytes.size()));
}

absl::Status ReadOnlyError(const std::string& path) {
  return WithReason(absl::FailedPreconditionError(
                        absl::StrCat("database '", path, "' is open read-only; it takes no writes")),
                    {std::string(reason::kReadOnly), {}, std::nullopt});
}

// Sets up one connection and reads every setting back: a setting SQLite silently ignored would
// void the durability contract.
absl::Status Configure(Connection& connection, bool writer, bool read_only_store) {
  if (writer) {
    absl::StatusOr<std::string> mode =
        connection.QueryText("PRAGMA journal_mode = WAL", "set journal_mode");
    if (!mode.ok()) return mode.status();
    if (absl::AsciiStrToLower(*mode) != "wal") {
      return absl::FailedPreconditionError(
          absl::StrCat("journal_mode: asked for wal, the database reports '", *mode, "'"));
    }
  } else if (!read_only_store) {
    absl::StatusOr<std::string> mode = connection.QueryText("PRAGMA journal_mode", "journal_mode");
    if (!mode.ok()) return mode.status();
    if (absl::AsciiStrToLower(*mode) != "wal") {
      return absl::FailedPreconditionError(
          absl::StrCat("journal_mode: a reader sees '", *mode, "', expected wal"));
    }
  }
  if (writer) {
    // The savepoint of each write keeps its undo pages in a sub-journal: in memory, not in a temporary
    // file that a large write would spill to (a write() per page, for data that is never kept).
    OGIVE_STORAGE_RETURN_IF_ERROR(connection.Execute("PRAGMA temp_store = MEMORY", "set temp_store"));
    absl::StatusOr<int64_t> temp_store = connection.QueryInt64("PRAGMA temp_store", "read temp_store");
    if (!temp_store.ok()) return temp_store.status();
    if (*temp_store != 2) {
      return absl::FailedPreconditionError(
          absl::StrCat("temp_store: set to MEMORY (2), but the connection reports ", *temp_store));
    }
  }
  OGIVE_STORAGE_RETURN_IF_ERROR(connection.Execute("PRAGMA synchronous = FULL", "set synchronous"));
  absl::StatusOr<int64_t> synchronous =
      connection.QueryInt64("PRAGMA synchronous", "read synchronous");
  if (!synchronous.ok()) return synchronous.status();
  if (*synchronous != 2) {
    return absl::FailedPreconditionError(
        absl::StrCat("synchronous: set to FULL (2), but the connection reports ", *synchronous));
  }
  OGIVE_STORAGE_RETURN_IF_ERROR(connection.Execute("PRAGMA foreign_keys = ON", "set foreign_keys"));
  absl::StatusOr<int64_t> foreign_keys =
      connection.QueryInt64("PRAGMA foreign_keys", "read foreign_keys");
  if (!foreign_keys.ok()) return foreign_keys.status();
  if (*foreign_keys != 1) {
    return absl::FailedPreconditionError(
        absl::StrCat("foreign_keys: set ON, but the connection reports ", *foreign_keys));
  }
  return absl::OkStatus();
}

absl::StatusOr<SqliteConnectionSettings> ReadSettings(Connection& connection, std::string role) {
  SqliteConnectionSettings settings;
  settings.role = std::move(role);
  absl::StatusOr<std::string> mode = connection.QueryText("PRAGMA journal_mode", "journal_mode");
  if (!mode.ok()) return mode.status();
  settings.journal_mode = absl::AsciiStrToLower(*mode);
  absl::StatusOr<int64_t> synchronous = connection.QueryInt64("PRAGMA synchronous", "synchronous");
  if (!synchronous.ok()) return synchronous.status();
  settings.synchronous = *synchronous;
  absl::StatusOr<int64_t> foreign_keys =
      connection.QueryInt64("PRAGMA foreign_keys", "foreign_keys");
  if (!foreign_keys.ok()) return foreign_keys.status();
  settings.foreign_keys = *foreign_keys == 1;
  settings.read_only = connection.ReadOnly();
  return settings;
}

// Prepares `sql` on `connection` into `*slot`.
absl::Status PrepareInto(Connection& connection, const char* name, absl::string_view sql,
                         Statement** slot) {
  absl::StatusOr<Statement*> statement = connection.Prepare(name, sql);
  if (!statement.ok()) return statement.status();
  *slot = *statement;
  return absl::OkStatus();
}

}  // namespace

// ---- Options and statistics ----

absl::Status SqliteStoreOptions::Validate() const {
  if (max_batch_writes < 1) {
    return absl::InvalidArgumentError(
        absl::StrCat("max_batch_writes: must be >= 1, got ", max_batch_writes));
  }
  if (busy_timeout_ms < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("busy_timeout_ms: must be >= 0, got ", busy_timeout_ms));
  }
  if (group_commit_window_us < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("group_commit_window_us: must be >= 0, got ", group_commit_window_us));
  }
  if (reader_connections < 1) {
    return absl::InvalidArgumentError(
        absl::StrCat("reader_connections: must be >= 1, got ", reader_connections));
  }
  if (!vfs.empty() && sqlite3_vfs_find(vfs.c_str()) == nullptr) {
    return absl::InvalidArgumentError(
        absl::StrCat("vfs: no sqlite3 VFS is registered as '", vfs, "'"));
  }
  return absl::OkStatus();
}

double SqliteStoreStats::commits_per_transaction() const {
  if (transactions == 0) return 0.0;
  return static_cast<double>(committed_writes) / static_cast<double>(transactions);
}

// ---- Internal types ----

struct SqliteStore::WriterStatements {
  Statement* begin = nullptr;
  Statement* commit = nullptr;
  Statement* rollback = nullptr;
  Statement* savepoint = nullptr;
  Statement* release = nullptr;
  Statement* rollback_to = nullptr;
  Statement* campaign_exists = nullptr;
  Statement* campaign_by_name = nullptr;
  Statement* insert_campaign = nullptr;
  Statement* upsert_trial = nullptr;
  Statement* insert_engine = nullptr;
  Statement* update_engine = nullptr;
  Statement* update_distribution = nullptr;
  Statement* insert_generation = nullptr;
  Statement* insert_ask_request = nullptr;
  Statement* insert_event = nullptr;
  Statement* token_exists = nullptr;
  Statement* insert_token = nullptr;
  Statement* revoke_token = nullptr;

  absl::Status Prepare(Connection& c) {
    const std::pair<const char*, std::pair<const char*, Statement**>> all[] = {
        {"begin", {"BEGIN IMMEDIATE", &begin}},
        {"commit", {"COMMIT", &commit}},
        {"rollback", {"ROLLBACK", &rollback}},
        {"savepoint", {"SAVEPOINT write", &savepoint}},
        {"release savepoint", {"RELEASE write", &release}},
        {"roll back to savepoint", {"ROLLBACK TO write", &rollback_to}},
        {"find campaign", {"SELECT 1 FROM campaigns WHERE id = ?1", &campaign_exists}},
        {"find campaign name", {"SELECT id FROM campaigns WHERE name = ?1", &campaign_by_name}},
        {"insert campaign",
         {"INSERT INTO campaigns (name, design, create_request_id, created_at_ns) VALUES (?1, ?2, ?3, ?4)",
          &insert_campaign}},
        {"insert engine", {"INSERT INTO campaign_engines (campaign_id, engine) VALUES (?1, ?2)", &insert_engine}},
        {"store trial",
         {"INSERT INTO trials (campaign_id, number, state, worker, reported_at_ns, score, record) "
          "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7) ON CONFLICT (campaign_id, number) DO UPDATE SET "
          "state = excluded.state, worker = excluded.worker, "
          "reported_at_ns = excluded.reported_at_ns, score = excluded.score, "
          "record = excluded.record",
          &upsert_trial}},
        {"store engine", {"UPDATE campaign_engines SET engine = ?2 WHERE campaign_id = ?1", &update_engine}},
        {"store distribution",
         {"INSERT INTO campaign_distributions (campaign_id, distribution) VALUES (?1, ?2) "
          "ON CONFLICT (campaign_id) DO UPDATE SET distribution = excluded.distribution",
          &update_distribution}},
        {"insert generation",
         {"INSERT INTO generations (campaign_id, generation, summary) VALUES (?1, ?2, ?3)",
          &insert_generation}},
        {"insert ask request",
         {"INSERT INTO ask_requests (campaign_id, request_id, trials) VALUES (?1, ?2, ?3)",
          &insert_ask_request}},
        {"insert event",
         {"INSERT INTO events (campaign_id, at_ns, kind, trial, worker, message, token_label) "
          "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
          &insert_event}},
        {"find token", {"SELECT 1 FROM tokens WHERE label = ?1", &token_exists}},
        {"insert token",
         {"INSERT INTO tokens (label, digest, role, campaigns, created_at_ns, revoked_at_ns) "
          "VALUES (?1, ?2, ?3, ?4, ?5, NULL)",
          &insert_token}},
        {"revoke token",
         {"UPDATE tokens SET revoked_at_ns = ?2 WHERE label = ?1 AND revoked_at_ns IS NULL",
          &revoke_token}},
    };
    for (const auto& [name, entry] : all) {
      OGIVE_STORAGE_RETURN_IF_ERROR(PrepareInto(c, name, entry.first, entry.second));
    }
    return absl::OkStatus();
  }
};

// A campaign's row with its engine state and distribution, in the columns ReadCampaignRow reads.
#define OGIVE_SELECT_CAMPAIGNS                                                                    \
  "SELECT s.id, s.name, s.design, e.engine, d.distribution, s.create_request_id FROM campaigns s " \
  "LEFT JOIN campaign_engines e ON e.campaign_id = s.id LEFT JOIN campaign_distributions d ON d.campaign_id = s.id"

struct SqliteStore::Reader {
  std::unique_ptr<Connection> connection;
  int index = 0;
  Statement* begin = nullptr;
  Statement* commit = nullptr;
  Statement* rollback = nullptr;
  Statement* campaigns = nullptr;
  Statement* campaign_by_id = nullptr;
  Statement* campaign_exists = nullptr;
  Statement* campaign_trials = nullptr;
  Statement* campaign_ask_requests = nullptr;
  Statement* trials_page = nullptr;
  Statement* trials_page_in_state = nullptr;
  Statement* generations = nullptr;
  Statement* generations_page = nullptr;
  Statement* newest_events = nullptr;
  Statement* tokens = nullptr;
  Statement* integrity_check = nullptr;

  absl::Status Prepare() {
    Connection& c = *connection;
    const std::pair<const char*, std::pair<const char*, Statement**>> all[] = {
        {"begin read", {"BEGIN", &begin}},
        {"end read", {"COMMIT", &commit}},
        {"abandon read", {"ROLLBACK", &rollback}},
        {"load campaigns", {OGIVE_SELECT_CAMPAIGNS " ORDER BY s.id", &campaigns}},
        {"load campaign", {OGIVE_SELECT_CAMPAIGNS " WHERE s.id = ?1", &campaign_by_id}},
        {"find campaign", {"SELECT 1 FROM campaigns WHERE id = ?1", &campaign_exists}},
        {"load trials",
         {"SELECT number, record FROM trials WHERE campaign_id = ?1 ORDER BY number", &campaign_trials}},
        {"load ask requests",
         {"SELECT request_id, trials FROM ask_requests WHERE campaign_id = ?1 ORDER BY id",
          &campaign_ask_requests}},
        {"list trials",
         {"SELECT number, record FROM trials WHERE campaign_id = ?1 AND number > ?2 "
          "ORDER BY number LIMIT ?3",
          &trials_page}},
        {"list trials in state",
         {"SELECT number, record FROM trials WHERE campaign_id = ?1 AND state = ?4 "
          "AND number > ?2 ORDER BY number LIMIT ?3",
          &trials_page_in_state}},
        {"list generations",
         {"SELECT generation, summary FROM generations WHERE campaign_id = ?1 ORDER BY generation",
          &generations}},
        {"list generations after",
         {"SELECT generation, summary FROM generations WHERE campaign_id = ?1 AND generation > ?2 "
          "ORDER BY generation LIMIT ?3",
          &generations_page}},
        {"list events",
         {"SELECT at_ns, kind, trial, worker, message, token_label FROM events "
          "WHERE campaign_id = ?1 ORDER BY id DESC LIMIT ?2",
          &newest_events}},
        {"list tokens",
         {"SELECT label, digest, role, campaigns, created_at_ns, revoked_at_ns FROM tokens "
          "ORDER BY label",
          &tokens}},
        {"integrity check", {"PRAGMA integrity_check(20)", &integrity_check}},
    };
    for (const auto& [name, entry] : all) {
      OGIVE_STORAGE_RETURN_IF_ERROR(PrepareInto(c, name, entry.first, entry.second));
    }
    return absl::OkStatus();
  }

  // NOT_FOUND unless the campaign exists. REQUIRES: inside a read transaction.
  absl::Status CheckCampaign(int64_t campaign_id) {
    ResetOnExit reset(*campaign_exists);
    campaign_exists->BindInt64(1, campaign_id);
    absl::StatusOr<bool> row = campaign_exists->Step();
    if (!row.ok()) return row.status();
    if (!*row) return absl::NotFoundError(absl::StrCat("campaign id ", campaign_id, " does not exist"));
    return absl::OkStatus();
  }
};
#undef OGIVE_SELECT_CAMPAIGNS

struct SqliteStore::EncodedWrite {
  struct Trial {
    int64_t number = 0;
    int state = 0;
    std::string worker;
    int64_t reported_at_ns = 0;
    std::optional<double> score;  // finite
    std::string record;
  };
  struct NewCampaign {
    std::string name;
    std::string design;
    std::string engine;
    std::optional<std::string> distribution;
    std::string request_id;
    int64_t created_at_ns = 0;
  };

  struct TokenChange {
    std::string label;
    bool revoke = false;       // false: insert the token below; true: revoke `label` at revoked_at_ns
    std::string digest;        // insert only
    std::string role;          // insert only
    std::string campaigns;       // insert only: comma-separated
    int64_t created_at_ns = 0;  // insert only
    int64_t revoked_at_ns = 0;  // revoke only
  };

  std::optional<NewCampaign> create;     // set for CreateCampaign
  std::optional<TokenChange> token;   // set for CreateToken and RevokeToken
  // Everything below is for Commit.
  int64_t campaign_id = 0;
  int64_t chain = 0;
  absl::Status refusal;  // not OK: refused before queuing; fails in its place without being applied
  std::vector<Trial> trials;
  std::optional<std::string> engine;
  std::optional<std::string> distribution;
  std::vector<std::pair<int64_t, std::string>> generations;
  std::optional<std::pair<std::string, std::string>> ask_request;  // request id, "4,5,6"
  std::vector<Event> events;
};

struct SqliteStore::Job {
  enum class Kind { kWrite, kInspect };
  Kind kind = Kind::kWrite;
  const EncodedWrite* write = nullptr;               // kWrite
  std::optional<SqliteConnectionSettings> settings;  // kInspect: out
  // kWrite, out: the id of a new campaign; for a revocation 1 when this write revoked the token, 0
  // when it was revoked already.
  int64_t created_id = 0;
  absl::Status status;                               // out
  absl::Notification done;
};

absl::Status SqliteStore::NameTheFile(absl::Status status) const {
  switch (status.code()) {
    case absl::StatusCode::kUnavailable:
    case absl::StatusCode::kDataLoss:
    case absl::StatusCode::kInternal:
      break;
    default:
      return status;  // about the write itself (refused, not found, taken), not about the file
  }
  return absl::Status(status.code(),
                      absl::StrCat("database '", path_, "': ", status.message()));
}

// ---- Open and close ----

SqliteStore::SqliteStore(std::string path, Options options)
    : path_(std::move(path)), options_(options) {}

absl::StatusOr<std::unique_ptr<SqliteStore>> SqliteStore::Open(const std::string& path,
                                                               Options options) {
  OGIVE_STORAGE_RETURN_IF_ERROR(options.Validate());
  if (path.empty() || path == ":memory:" || path.rfind("file:", 0) == 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("path: must name a database file (WAL mode needs one), got '", path, "'"));
  }
  std::unique_ptr<SqliteStore> store(new SqliteStore(path, options));

  if (!options.read_only) {
    absl::StatusOr<std::unique_ptr<Connection>> writer =
        Connection::Open(path, /*read_only=*/false, options.busy_timeout_ms, options.vfs);
    if (!writer.ok()) return writer.status();
    store->writer_ = *std::move(writer);
    if (store->writer_->ReadOnly()) {
      return WithReason(absl::FailedPreconditionError(absl::StrCat(
                            "database file '", path, "' is not writable; open it with read_only to read it")),
                        {std::string(reason::kReadOnly), {}, std::nullopt});
    }
    // One writing store per database file: a second server on the same file would hand out the same
    // trial numbers and overwrite acknowledged outcomes. The lock is on a side file (SQLite's own
    // exclusive locking mode would shut out our reader connections) and is released when the store
    // closes or the process dies.
    const std::string lock_path = path + ".lock";
    store->lock_fd_ = ::open(lock_path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
    if (store->lock_fd_ < 0) {
      return absl::UnavailableError(absl::StrCat("cannot open the lock file '", lock_path, "': ", std::strerror(errno)));
    }
    if (::flock(store->lock_fd_, LOCK_EX | LOCK_NB) != 0) {
      return absl::FailedPreconditionError(absl::StrCat(
          "database file '", path, "' is in use by another server (", lock_path, " is locked)"));
    }
    OGIVE_STORAGE_RETURN_IF_ERROR(
        Configure(*store->writer_, /*writer=*/true, /*read_only_store=*/false));
    OGIVE_STORAGE_RETURN_IF_ERROR(internal::Migrate(*store->writer_, internal::Migrations()));
    store->writer_statements_ = std::make_unique<WriterStatements>();
    OGIVE_STORAGE_RETURN_IF_ERROR(store->writer_statements_->Prepare(*store->writer_));
  }

  // Readers open with SQLITE_OPEN_READONLY: they can neither write nor checkpoint, so the writer
  // connection (with SQLite's default autocheckpoint) is the only one that ever changes the files.
  for (int i = 0; i < options.reader_connections; ++i) {
    auto reader = std::make_unique<Reader>();
    reader->index = i;
    absl::StatusOr<std::unique_ptr<Connection>> connection =
        Connection::Open(path, /*read_only=*/true, options.busy_timeout_ms, options.vfs);
    if (!connection.ok()) return connection.status();
    reader->connection = *std::move(connection);
    if (i == 0 && options.read_only) {
      // Nothing may be migrated here, so the file must already be at this build's version.
      OGIVE_STORAGE_RETURN_IF_ERROR(
          internal::CheckVersion(*reader->connection, internal::Migrations()));
    }
    OGIVE_STORAGE_RETURN_IF_ERROR(
        Configure(*reader->connection, /*writer=*/false, options.read_only));
    OGIVE_STORAGE_RETURN_IF_ERROR(reader->Prepare());
    store->readers_.push_back(std::move(reader));
  }
  {
    absl::MutexLock lock(&store->readers_mu_);
    for (const std::unique_ptr<Reader>& reader : store->readers_) {
      store->free_readers_.push_back(reader.get());
    }
  }

  if (!options.read_only) {
    store->writer_thread_ = std::thread([s = store.get()] { s->WriterLoop(); });
  }
  return store;
}

SqliteStore::~SqliteStore() {
  {
    absl::MutexLock lock(&mu_);
    stopping_ = true;
  }
  if (writer_thread_.joinable()) writer_thread_.join();
  {
    absl::MutexLock lock(&readers_mu_);
    free_readers_.clear();
  }
  readers_.clear();
  // The writer closes last: as the last connection it checkpoints the log into the database file.
  writer_statements_.reset();
  writer_.reset();
  if (lock_fd_ >= 0) ::close(lock_fd_);  // releases the flock
}

int64_t SqliteStore::schema_version() { return internal::SchemaVersion(); }

SqliteStore::Stats SqliteStore::stats() const {
  absl::MutexLock lock(&mu_);
  Stats stats = stats_;
  stats.queued_writes = static_cast<int64_t>(queue_.size());
  return stats;
}

// ---- The writer ----

bool SqliteStore::Enqueue(Job& job) {
  absl::MutexLock lock(&mu_);
  if (stopping_) {
    job.status = absl::FailedPreconditionError("the store is closing");
    return false;
  }
  queue_.push_back(&job);
  return true;
}

void SqliteStore::Submit(Job& job) {
  if (Enqueue(job)) job.done.WaitForNotification();
}

// Owns a queued write and its job until the writer is done with them.
class SqliteStore::Pending final : public PendingCommit {
 public:
  explicit Pending(absl::Status early) : early_(std::move(early)) {}
  Pending(SqliteStore* store, EncodedWrite write) : write_(std::move(write)) {
    job_.write = &write_;
    queued_ = store->Enqueue(job_);
  }
  ~Pending() override {
    if (queued_) job_.done.WaitForNotification();  // the writer still points at job_
  }
  absl::Status Wait() override {
    if (!early_.ok()) return early_;
    if (queued_) job_.done.WaitForNotification();
    return job_.status;
  }

 private:
  absl::Status early_;
  EncodedWrite write_;
  Job job_;
  bool queued_ = false;
};

void SqliteStore::WriterLoop() {
  pthread_setname_np(pthread_self(), "ogive-writer");  // named for top -H, perf and gdb
  std::vector<Job*> batch;
  while (true) {
    batch.clear();
    {
      absl::MutexLock lock(&mu_);
      mu_.Await(absl::Condition(
          +[](SqliteStore* store) ABSL_EXCLUSIVE_LOCKS_REQUIRED(store->mu_) {
            return store->stopping_ || !store->queue_.empty();
          },
          this));
      if (queue_.empty()) return;  // stopping, and every queued write has been done
      if (options_.group_commit_window_us > 0 && queue_.size() < expected_batch_) {
        ++stats_.group_commit_waits;
        mu_.AwaitWithTimeout(absl::Condition(
                                 +[](SqliteStore* store) ABSL_EXCLUSIVE_LOCKS_REQUIRED(store->mu_) {
                                   return store->stopping_ || store->queue_.size() >= store->expected_batch_;
                                 },
                                 this),
                             absl::Microseconds(options_.group_commit_window_us));
      }
      const size_t n = std::min(queue_.size(), static_cast<size_t>(options_.max_batch_writes));
      batch.assign(queue_.begin(), queue_.begin() + static_cast<std::ptrdiff_t>(n));
      queue_.erase(queue_.begin(), queue_.begin() + static_cast<std::ptrdiff_t>(n));
      stats_.active_writes = static_cast<int64_t>(n);
    }
    RunBatch(batch);
  }
}

void SqliteStore::RunBatch(const std::vector<Job*>& batch) {
  WriterStatements& s = *writer_statements_;
  std::vector<Job*> writes;
  for (Job* job : batch) {
    if (job->kind == Job::Kind::kInspect) {
      absl::StatusOr<SqliteConnectionSettings> settings = ReadSettings(*writer_, "writer");
      job->status = settings.status();
      if (settings.ok()) job->settings = *std::move(settings);
    } else {
      writes.push_back(job);
    }
  }

  int64_t committed = 0;
  int64_t failed = 0;
  bool transaction_failed = false;
  bool isolated = false;
  const std::chrono::steady_clock::time_point started = std::chrono::steady_clock::now();
  if (!writes.empty()) {
    absl::Status begun = RunOnce(*s.begin);
    // Almost every batch commits whole: try it without a savepoint per write first. When a write
    // fails in the database, that attempt is rolled back and the batch runs again below, each write
    // in a savepoint of its own, so that the failing write alone is undone.
    bool applied_together = false;
    if (begun.ok()) {
      applied_together = ApplyTogether(writes);
      if (!applied_together) {
        isolated = true;
        begun = RunOnce(*s.begin);
      }
    }
    if (!begun.ok()) {
      transaction_failed = true;
      for (Job* job : writes) {
        job->status = absl::UnavailableError(
            absl::StrCat("could not start a write transaction: ", begun.message()));
      }
    }
    // The error that ended the whole transaction early, if one did.
    absl::Status lost;
    for (size_t i = 0; !applied_together && !transaction_failed && i < writes.size(); ++i) {
      Job& job = *writes[i];
      const std::pair<int64_t, int64_t> chain{job.write->campaign_id, job.write->chain};
      if (!job.write->refusal.ok()) {
        job.status = job.write->refusal;
        if (job.write->chain != 0) broken_chains_.insert(chain);
        continue;
      }
      if (job.write->chain != 0 && broken_chains_.count(chain) > 0) {
        job.status = BrokenChainError(chain.first);
        continue;
      }
      absl::Status status = RunOnce(*s.savepoint);
      if (status.ok()) {
        status = Apply(*job.write, job.created_id);
        if (status.ok()) {
          status = RunOnce(*s.release);
          if (!status.ok()) lost = status;
        } else if (writer_->InTransaction()) {
          // Undo this write alone; the others in the batch stay.
          absl::Status undone = RunOnce(*s.rollback_to);
          if (undone.ok()) undone = RunOnce(*s.release);
          if (!undone.ok()) lost = undone;
        } else {
          // SQLite rolled the whole transaction back by itself (a disk full, an I/O error).
          lost = status;
        }
      } else {
        lost = status;
      }
      job.status = status;
      if (!status.ok() && job.write->chain != 0) broken_chains_.insert(chain);  // later writes see it
      if (!lost.ok()) transaction_failed = true;
    }
    absl::Status end;
    if (!transaction_failed) {
      end = RunOnce(*s.commit);
      if (!end.ok()) transaction_failed = true;
    } else {
      end = lost;
    }
    if (transaction_failed && writer_->InTransaction()) (void)RunOnce(*s.rollback);
    for (Job* job : writes) {
      if (transaction_failed && job->status.ok()) {
        job->status = absl::UnavailableError(absl::StrCat(
            "the write transaction failed and nothing of this write was stored: ", end.message()));
      }
      if (!job->status.ok() && job->write->chain != 0) {
        broken_chains_.insert({job->write->campaign_id, job->write->chain});
      }
      job->status = NameTheFile(std::move(job->status));
      if (job->status.ok()) {
        ++committed;
      } else {
        ++failed;
      }
    }
  }

  {
    absl::MutexLock lock(&mu_);
    expected_batch_ = std::min(batch.size() + queue_.size(), static_cast<size_t>(options_.max_batch_writes));
    if (!writes.empty()) {
      if (transaction_failed) {
        ++stats_.failed_transactions;
      } else {
        ++stats_.transactions;
        stats_.largest_batch = std::max(stats_.largest_batch, static_cast<int64_t>(writes.size()));
      }
    }
    if (isolated) ++stats_.isolated_batches;
    stats_.committed_writes += committed;
    stats_.active_writes = 0;
    stats_.failed_writes += failed;
  }
  SqliteTransactionReport report;
  report.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  report.writes = static_cast<int64_t>(writes.size());
  report.committed_writes = committed;
  report.committed = !transaction_failed;
  for (Job* job : batch) job->done.Notify();  // after this the job may be gone
  // After the callers were woken, so that their replies do not wait for the report.
  if (report.writes > 0 && options_.on_transaction) options_.on_transaction(report);
}

absl::Status SqliteStore::BrokenChainError(int64_t campaign_id) {
  return absl::UnavailableError(absl::StrCat(
      "campaign id ", campaign_id, ": an earlier write of this campaign failed; nothing of this write was stored"));
}

bool SqliteStore::ApplyTogether(const std::vector<Job*>& writes) {
  std::vector<absl::Status> statuses(writes.size());
  std::vector<bool> applied(writes.size(), false);
  std::set<std::pair<int64_t, int64_t>> broken;  // chains broken by a refusal earlier in this batch
  for (size_t i = 0; i < writes.size(); ++i) {
    const EncodedWrite& write = *writes[i]->write;
    const std::pair<int64_t, int64_t> chain{write.campaign_id, write.chain};
    if (!write.refusal.ok()) {
      statuses[i] = write.refusal;
      if (write.chain != 0) broken.insert(chain);
    } else if (write.chain != 0 && (broken_chains_.count(chain) > 0 || broken.count(chain) > 0)) {
      statuses[i] = BrokenChainError(chain.first);
    } else {
      applied[i] = true;
    }
  }
  // Each engine state replaces the one before: of a campaign's writes in this batch, only the last
  // stores its engine state. (Its update also tells whether the campaign exists; if it does not, that
  // write fails and the batch goes write by write.)
  std::vector<EngineWrite> engine(writes.size(), EngineWrite::kStore);
  std::set<int64_t> stored_later;
  for (size_t i = writes.size(); i-- > 0;) {
    const EncodedWrite& write = *writes[i]->write;
    if (!applied[i] || !write.engine.has_value() || write.create.has_value() || write.token.has_value()) continue;
    if (!stored_later.insert(write.campaign_id).second) engine[i] = EngineWrite::kStoredByALaterWrite;
  }
  for (size_t i = 0; i < writes.size(); ++i) {
    if (!applied[i]) continue;
    if (!Apply(*writes[i]->write, writes[i]->created_id, engine[i]).ok()) {
      if (writer_->InTransaction()) (void)RunOnce(*writer_statements_->rollback);
      return false;
    }
  }
  for (size_t i = 0; i < writes.size(); ++i) writes[i]->status = std::move(statuses[i]);
  broken_chains_.insert(broken.begin(), broken.end());
  return true;
}

absl::Status SqliteStore::ApplyToken(const EncodedWrite& write, int64_t& revoked) {
  WriterStatements& s = *writer_statements_;
  const EncodedWrite::TokenChange& token = *write.token;
  bool exists = false;
  {
    ResetOnExit reset(*s.token_exists);
    s.token_exists->BindText(1, token.label);
    absl::StatusOr<bool> row = s.token_exists->Step();
    if (!row.ok()) return row.status();
    exists = *row;
  }
  if (!token.revoke) {
    const absl::Status taken = absl::AlreadyExistsError(absl::StrCat(
        "label: a token labelled '", token.label, "' exists already (labels are never reused, revoked tokens included)"));
    if (exists) return taken;
    Statement& insert = *s.insert_token;
    ResetOnExit reset(insert);
    insert.BindText(1, token.label);
    insert.BindBlob(2, token.digest);
    insert.BindText(3, token.role);
    insert.BindText(4, token.campaigns);
    insert.BindInt64(5, token.created_at_ns);
    absl::Status status = insert.Run();
    if (absl::IsAlreadyExists(status)) return taken;  // the digest, by a chance of 2^-128
    return status;
  }
  if (!exists) return absl::NotFoundError(absl::StrCat("label: no token labelled '", token.label, "'"));
  Statement& revoke = *s.revoke_token;
  ResetOnExit reset(revoke);
  revoke.BindText(1, token.label);
  revoke.BindInt64(2, token.revoked_at_ns);
  OGIVE_STORAGE_RETURN_IF_ERROR(revoke.Run());
  revoked = sqlite3_changes(writer_->db()) > 0 ? 1 : 0;
  return absl::OkStatus();
}

absl::Status SqliteStore::Apply(const EncodedWrite& write, int64_t& created_id, EngineWrite engine) {
  WriterStatements& s = *writer_statements_;
  if (write.token.has_value()) return ApplyToken(write, created_id);
  if (write.create.has_value()) {
    const EncodedWrite::NewCampaign& campaign = *write.create;
    const absl::Status taken =
        absl::AlreadyExistsError(absl::StrCat("campaign name '", campaign.name, "' is taken"));
    {
      ResetOnExit reset(*s.campaign_by_name);
      s.campaign_by_name->BindText(1, campaign.name);
      absl::StatusOr<bool> row = s.campaign_by_name->Step();
      if (!row.ok()) return row.status();
      if (*row) return taken;
    }
    {
      Statement& insert = *s.insert_campaign;
      ResetOnExit reset(insert);
      insert.BindText(1, campaign.name);
      insert.BindBlob(2, campaign.design);
      insert.BindText(3, campaign.request_id);
      insert.BindInt64(4, campaign.created_at_ns);
      absl::Status status = insert.Run();
      if (absl::IsAlreadyExists(status)) return taken;
      if (!status.ok()) return status;
    }
    const int64_t id = sqlite3_last_insert_rowid(writer_->db());
    {
      ResetOnExit reset(*s.insert_engine);
      s.insert_engine->BindInt64(1, id);
      s.insert_engine->BindBlob(2, campaign.engine);
      OGIVE_STORAGE_RETURN_IF_ERROR(s.insert_engine->Run());
    }
    if (campaign.distribution.has_value()) {
      ResetOnExit reset(*s.update_distribution);
      s.update_distribution->BindInt64(1, id);
      s.update_distribution->BindBlob(2, *campaign.distribution);
      OGIVE_STORAGE_RETURN_IF_ERROR(s.update_distribution->Run());
    }
    created_id = id;
    return absl::OkStatus();
  }

  const int64_t id = write.campaign_id;
  auto unknown = [id] { return absl::NotFoundError(absl::StrCat("campaign id ", id, " does not exist")); };
  // First, so that an unknown campaign is NOT_FOUND (not a foreign key failure of its rows): the engine
  // state's row exists exactly when the campaign does.
  if (engine == EngineWrite::kStoredByALaterWrite) {
    // Nothing to store or check here (see ApplyTogether).
  } else if (write.engine.has_value()) {
    ResetOnExit reset(*s.update_engine);
    s.update_engine->BindInt64(1, id);
    s.update_engine->BindBlob(2, *write.engine);
    OGIVE_STORAGE_RETURN_IF_ERROR(s.update_engine->Run());
    if (sqlite3_changes(writer_->db()) == 0) return unknown();
  } else {
    ResetOnExit reset(*s.campaign_exists);
    s.campaign_exists->BindInt64(1, id);
    absl::StatusOr<bool> row = s.campaign_exists->Step();
    if (!row.ok()) return row.status();
    if (!*row) return unknown();
  }
  for (const EncodedWrite::Trial& trial : write.trials) {
    Statement& upsert = *s.upsert_trial;
    ResetOnExit reset(upsert);
    upsert.BindInt64(1, id);
    upsert.BindInt64(2, trial.number);
    upsert.BindInt64(3, trial.state);
    upsert.BindText(4, trial.worker);
    upsert.BindInt64(5, trial.reported_at_ns);
    if (trial.score.has_value()) {
      upsert.BindDouble(6, *trial.score);
    } else {
      upsert.BindNull(6);
    }
    upsert.BindBlob(7, trial.record);
    OGIVE_STORAGE_RETURN_IF_ERROR(upsert.Run());
  }
  if (write.distribution.has_value()) {
    ResetOnExit reset(*s.update_distribution);
    s.update_distribution->BindInt64(1, id);
    s.update_distribution->BindBlob(2, *write.distribution);
    OGIVE_STORAGE_RETURN_IF_ERROR(s.update_distribution->Run());
  }
  for (const auto& [generation, summary] : write.generations) {
    ResetOnExit reset(*s.insert_generation);
    s.insert_generation->BindInt64(1, id);
    s.insert_generation->BindInt64(2, generation);
    s.insert_generation->BindBlob(3, summary);
    absl::Status status = s.insert_generation->Run();
    if (absl::IsAlreadyExists(status)) {
      return absl::AlreadyExistsError(
          absl::StrCat("campaign id ", id, ": generation ", generation, " is already stored"));
    }
    OGIVE_STORAGE_RETURN_IF_ERROR(status);
  }
  if (write.ask_request.has_value()) {
    ResetOnExit reset(*s.insert_ask_request);
    s.insert_ask_request->BindInt64(1, id);
    s.insert_ask_request->BindText(2, write.ask_request->first);
    s.insert_ask_request->BindText(3, write.ask_request->second);
    OGIVE_STORAGE_RETURN_IF_ERROR(s.insert_ask_request->Run());
  }
  for (const Event& event : write.events) {
    Statement& insert = *s.insert_event;
    ResetOnExit reset(insert);
    insert.BindInt64(1, id);
    insert.BindInt64(2, event.at_ns);
    insert.BindText(3, event.kind);
    insert.BindInt64(4, event.trial);
    insert.BindText(5, event.worker);
    insert.BindText(6, event.message);
    insert.BindText(7, event.token_label);
    OGIVE_STORAGE_RETURN_IF_ERROR(insert.Run());
  }
  return absl::OkStatus();
}

// ---- Writes ----

absl::StatusOr<int64_t> SqliteStore::CreateCampaign(const std::string& name,
                                                 const v1::CampaignDesign& design,
                                                 const v1::EngineState& engine,
                                                 const std::string& request_id) {
  if (options_.read_only) return ReadOnlyError(path_);
  if (name.empty()) return absl::InvalidArgumentError("name: must not be empty");
  EncodedWrite write;
  // Constructed here and moved in: clang decides whether a nested struct with default member
  // initializers is default-constructible before it has read them, and refuses emplace().
  EncodedWrite::NewCampaign& campaign = write.create.emplace(EncodedWrite::NewCampaign{});
  campaign.name = name;
  campaign.request_id = request_id;
  campaign.created_at_ns = absl::ToUnixNanos(absl::Now());
  if (!Serialize(design, campaign.design)) {
    return absl::InvalidArgumentError(
        absl::StrCat("campaign '", name, "': design does not serialize"));
  }
  v1::EngineState without_distribution = engine;
  without_distribution.clear_distribution();
  if (!Serialize(without_distribution, campaign.engine)) {
    return absl::InvalidArgumentError(
        absl::StrCat("campaign '", name, "': engine does not serialize"));
  }
  if (engine.has_distribution()) {
    if (!Serialize(engine.distribution(), campaign.distribution.emplace())) {
      return absl::InvalidArgumentError(
          absl::StrCat("campaign '", name, "': distribution does not serialize"));
    }
  }
  Job job;
  job.write = &write;
  Submit(job);
  if (!job.status.ok()) return job.status;
  return job.created_id;
}

std::unique_ptr<PendingCommit> SqliteStore::CommitAsync(CampaignWrite write) {
  if (options_.read_only) return std::make_unique<Pending>(ReadOnlyError(path_));
  EncodedWrite encoded;
  encoded.campaign_id = write.campaign_id;
  encoded.chain = write.chain;
  // Check and serialize here, on the caller's thread, so that the writer thread only binds.
  absl::Status checked = [&]() -> absl::Status {
    const std::string where = absl::StrCat("campaign id ", write.campaign_id, ": ");
    encoded.trials.reserve(write.trials.size());
    for (size_t i = 0; i < write.trials.size(); ++i) {
      const v1::TrialRecord& record = write.trials[i];
      if (record.number() < 1) {
        return absl::InvalidArgumentError(
            absl::StrCat(where, "trials[", i, "].number: must be >= 1, got ", record.number()));
      }
      // SQLite would store NaN as NULL without a word; refuse every non-finite score, in the
      // column or not.
      if (!std::isfinite(record.score())) {
        return absl::InvalidArgumentError(absl::StrCat(where, "trials[", i, "].score (trial ",
                                                       record.number(), "): must be finite, got ",
                                                       record.score()));
      }
      EncodedWrite::Trial& trial = encoded.trials.emplace_back();
      trial.number = record.number();
      trial.state = static_cast<int>(record.state());
      trial.worker = record.worker();
      trial.reported_at_ns = record.reported_at_ns();
      if (record.outcome_kind() == v1::OUTCOME_KIND_SCORE) trial.score = record.score();
      if (!Serialize(record, trial.record)) {
        return absl::InvalidArgumentError(
            absl::StrCat(where, "trial ", record.number(), ": record does not serialize"));
      }
    }
    if (write.engine.has_value()) {
      write.engine->clear_distribution();  // stored on its own; see CampaignWrite
      if (!Serialize(*write.engine, encoded.engine.emplace())) {
        return absl::InvalidArgumentError(absl::StrCat(where, "engine does not serialize"));
      }
    }
    if (write.distribution.has_value() &&
        !Serialize(*write.distribution, encoded.distribution.emplace())) {
      return absl::InvalidArgumentError(absl::StrCat(where, "distribution does not serialize"));
    }
    for (const v1::GenerationSummary& summary : write.generations) {
      auto& [generation, bytes] = encoded.generations.emplace_back();
      generation = summary.generation();
      if (!Serialize(summary, bytes)) {
        return absl::InvalidArgumentError(
            absl::StrCat(where, "generation ", generation, ": summary does not serialize"));
      }
    }
    if (write.ask_request.has_value()) {
      if (write.ask_request->first.empty()) {
        return absl::InvalidArgumentError(absl::StrCat(where, "ask_request: empty request id"));
      }
      encoded.ask_request.emplace(std::move(write.ask_request->first),
                                  absl::StrJoin(write.ask_request->second, ","));
    }
    encoded.events = std::move(write.events);
    return absl::OkStatus();
  }();
  if (!checked.ok()) {
    if (write.chain == 0) {
      absl::MutexLock lock(&mu_);
      ++stats_.failed_writes;
      return std::make_unique<Pending>(checked);
    }
    // In a chain the refusal must take its place in the queue: it breaks the chain for the writes
    // queued after it.
    encoded = EncodedWrite();
    encoded.campaign_id = write.campaign_id;
    encoded.chain = write.chain;
    encoded.refusal = checked;
  }
  return std::make_unique<Pending>(this, std::move(encoded));
}

// ---- Tokens ----

absl::Status SqliteStore::CreateToken(const StoredToken& token) {
  if (options_.read_only) return ReadOnlyError(path_);
  if (token.label.empty()) return absl::InvalidArgumentError("label: must not be empty");
  if (token.digest.size() != 32) {
    return absl::InvalidArgumentError(
        absl::StrCat("digest: must be the 32 bytes of a SHA-256, got ", token.digest.size(), " bytes"));
  }
  if (token.role != "reader" && token.role != "worker" && token.role != "admin") {
    return absl::InvalidArgumentError(
        absl::StrCat("role: must be reader, worker or admin, got '", token.role, "'"));
  }
  for (const std::string& campaign : token.campaigns) {
    if (campaign.empty() || campaign.find(',') != std::string::npos) {
      return absl::InvalidArgumentError(
          absl::StrCat("campaigns: '", campaign, "' is not a campaign name (empty, or holds a comma)"));
    }
  }
  EncodedWrite write;
  EncodedWrite::TokenChange& change = write.token.emplace(EncodedWrite::TokenChange{});  // as NewCampaign above, for clang
  change.label = token.label;
  change.digest = token.digest;
  change.role = token.role;
  change.campaigns = absl::StrJoin(token.campaigns, ",");
  change.created_at_ns = token.created_at_ns;
  Job job;
  job.write = &write;
  Submit(job);
  return job.status;
}

absl::StatusOr<bool> SqliteStore::RevokeToken(const std::string& label, int64_t at_ns) {
  if (options_.read_only) return ReadOnlyError(path_);
  if (label.empty()) return absl::InvalidArgumentError("label: must not be empty");
  EncodedWrite write;
  EncodedWrite::TokenChange& change = write.token.emplace(EncodedWrite::TokenChange{});  // as NewCampaign above, for clang
  change.label = label;
  change.revoke = true;
  change.revoked_at_ns = at_ns;
  Job job;
  job.write = &write;
  Submit(job);
  if (!job.status.ok()) return job.status;
  return job.created_id == 1;
}

absl::StatusOr<std::vector<StoredToken>> SqliteStore::ListTokens() {
  std::vector<StoredToken> tokens;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    tokens.clear();
    Statement& query = *r.tokens;
    ResetOnExit reset(query);
    while (true) {
      absl::StatusOr<bool> row = query.Step();
      if (!row.ok()) return row.status();
      if (!*row) break;
      StoredToken& token = tokens.emplace_back();
      token.label = std::string(query.ColumnText(0));
      token.digest = std::string(query.ColumnBlob(1));
      token.role = std::string(query.ColumnText(2));
      const absl::string_view campaigns = query.ColumnText(3);
      if (!campaigns.empty()) token.campaigns = absl::StrSplit(campaigns, ',');
      token.created_at_ns = query.ColumnInt64(4);
      if (!query.ColumnIsNull(5)) token.revoked_at_ns = query.ColumnInt64(5);
    }
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  return tokens;
}

// ---- Reads ----

absl::Status SqliteStore::ReadTransaction(absl::FunctionRef<absl::Status(Reader&)> read) {
  Reader* reader = nullptr;
  {
    absl::MutexLock lock(&readers_mu_);
    readers_mu_.Await(absl::Condition(
        +[](std::vector<Reader*>* free) { return !free->empty(); }, &free_readers_));
    reader = free_readers_.back();
    free_readers_.pop_back();
  }
  absl::Status status = RunOnce(*reader->begin);
  if (status.ok()) {
    status = read(*reader);
    if (status.ok()) status = RunOnce(*reader->commit);
    if (reader->connection->InTransaction()) (void)RunOnce(*reader->rollback);
  }
  {
    absl::MutexLock lock(&readers_mu_);
    free_readers_.push_back(reader);
  }
  return status;
}

namespace {

// How a load error names the campaign: "campaign 'NAME' (id N): ".
std::string CampaignWhere(const StoredCampaign& campaign) {
  return absl::StrCat("campaign '", campaign.name, "' (id ", campaign.id, "): ");
}

// The campaign of the current row of a "load campaigns" or "load campaign" query: id, name, design, engine
// state and distribution, create request id.
absl::Status ReadCampaignRow(Statement& row, StoredCampaign& campaign) {
  campaign.id = row.ColumnInt64(0);
  campaign.name = std::string(row.ColumnText(1));
  const std::string where = CampaignWhere(campaign);
  if (!Parse(row.ColumnBlob(2), campaign.design)) {
    return absl::DataLossError(absl::StrCat(where, "the stored design does not parse"));
  }
  v1::EngineState& engine = *campaign.snapshot.mutable_engine();
  if (row.ColumnIsNull(3)) return absl::DataLossError(absl::StrCat(where, "no engine state is stored"));
  if (!Parse(row.ColumnBlob(3), engine)) {
    return absl::DataLossError(absl::StrCat(where, "the stored engine state does not parse"));
  }
  if (!row.ColumnIsNull(4) && !Parse(row.ColumnBlob(4), *engine.mutable_distribution())) {
    return absl::DataLossError(absl::StrCat(where, "the stored distribution does not parse"));
  }
  campaign.create_request_id = std::string(row.ColumnText(5));
  return absl::OkStatus();
}

}  // namespace

absl::Status SqliteStore::LoadTrialsAndAskRequests(Reader& r, StoredCampaign& campaign) {
  const std::string where = CampaignWhere(campaign);
  {
    ResetOnExit reset(*r.campaign_trials);
    r.campaign_trials->BindInt64(1, campaign.id);
    while (true) {
      absl::StatusOr<bool> row = r.campaign_trials->Step();
      if (!row.ok()) return row.status();
      if (!*row) break;
      const int64_t number = r.campaign_trials->ColumnInt64(0);
      v1::TrialRecord& record = *campaign.snapshot.add_trials();
      if (!Parse(r.campaign_trials->ColumnBlob(1), record)) {
        return absl::DataLossError(absl::StrCat(where, "the record of trial ", number, " does not parse"));
      }
      if (record.number() != number) {
        return absl::DataLossError(
            absl::StrCat(where, "the row of trial ", number, " holds the record of trial ", record.number()));
      }
    }
  }
  ResetOnExit reset(*r.campaign_ask_requests);
  r.campaign_ask_requests->BindInt64(1, campaign.id);
  while (true) {
    absl::StatusOr<bool> row = r.campaign_ask_requests->Step();
    if (!row.ok()) return row.status();
    if (!*row) break;
    auto& [request_id, trials] = campaign.ask_requests.emplace_back();
    request_id = std::string(r.campaign_ask_requests->ColumnText(0));
    const absl::string_view list = r.campaign_ask_requests->ColumnText(1);
    if (list.empty()) continue;
    for (absl::string_view item : absl::StrSplit(list, ',')) {
      int64_t number = 0;
      if (!absl::SimpleAtoi(item, &number)) {
        return absl::DataLossError(
            absl::StrCat(where, "ask request '", request_id, "': bad trial list '", list, "'"));
      }
      trials.push_back(number);
    }
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<StoredCampaign>> SqliteStore::LoadAll() {
  std::vector<StoredCampaign> campaigns;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    campaigns.clear();
    {
      ResetOnExit reset(*r.campaigns);
      while (true) {
        absl::StatusOr<bool> row = r.campaigns->Step();
        if (!row.ok()) return row.status();
        if (!*row) break;
        OGIVE_STORAGE_RETURN_IF_ERROR(ReadCampaignRow(*r.campaigns, campaigns.emplace_back()));
      }
    }
    for (StoredCampaign& campaign : campaigns) OGIVE_STORAGE_RETURN_IF_ERROR(LoadTrialsAndAskRequests(r, campaign));
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  return campaigns;
}

absl::StatusOr<StoredCampaign> SqliteStore::LoadCampaign(int64_t campaign_id) {
  StoredCampaign campaign;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    campaign = StoredCampaign();
    {
      ResetOnExit reset(*r.campaign_by_id);
      r.campaign_by_id->BindInt64(1, campaign_id);
      absl::StatusOr<bool> row = r.campaign_by_id->Step();
      if (!row.ok()) return row.status();
      if (!*row) return absl::NotFoundError(absl::StrCat("campaign id ", campaign_id, " not found"));
      OGIVE_STORAGE_RETURN_IF_ERROR(ReadCampaignRow(*r.campaign_by_id, campaign));
    }
    return LoadTrialsAndAskRequests(r, campaign);
  });
  if (!status.ok()) return status;
  return campaign;
}

absl::StatusOr<TrialPage> SqliteStore::ListTrials(int64_t campaign_id,
                                                  std::optional<v1::TrialState> state,
                                                  int64_t after_number, int limit) {
  if (limit < 1)
    return absl::InvalidArgumentError(absl::StrCat("limit: must be >= 1, got ", limit));
  if (after_number < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("after_number: must be >= 0, got ", after_number));
  }
  TrialPage page;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    page = TrialPage();
    OGIVE_STORAGE_RETURN_IF_ERROR(r.CheckCampaign(campaign_id));
    Statement& query = state.has_value() ? *r.trials_page_in_state : *r.trials_page;
    ResetOnExit reset(query);
    query.BindInt64(1, campaign_id);
    query.BindInt64(2, after_number);
    query.BindInt64(3, static_cast<int64_t>(limit) + 1);  // one more tells whether a page follows
    if (state.has_value()) query.BindInt64(4, static_cast<int64_t>(*state));
    while (true) {
      absl::StatusOr<bool> row = query.Step();
      if (!row.ok()) return row.status();
      if (!*row) break;
      const int64_t number = query.ColumnInt64(0);
      if (static_cast<int64_t>(page.trials.size()) == limit) {
        page.next_after = page.trials.back().number();
        break;
      }
      if (!Parse(query.ColumnBlob(1), page.trials.emplace_back())) {
        return absl::DataLossError(absl::StrCat("campaign id ", campaign_id, ": the record of trial ",
                                                number, " does not parse"));
      }
    }
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  return page;
}

absl::StatusOr<std::vector<v1::GenerationSummary>> SqliteStore::ListGenerations(int64_t campaign_id) {
  std::vector<v1::GenerationSummary> generations;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    generations.clear();
    OGIVE_STORAGE_RETURN_IF_ERROR(r.CheckCampaign(campaign_id));
    ResetOnExit reset(*r.generations);
    r.generations->BindInt64(1, campaign_id);
    while (true) {
      absl::StatusOr<bool> row = r.generations->Step();
      if (!row.ok()) return row.status();
      if (!*row) break;
      if (!Parse(r.generations->ColumnBlob(1), generations.emplace_back())) {
        return absl::DataLossError(absl::StrCat("campaign id ", campaign_id,
                                                ": the summary of generation ",
                                                r.generations->ColumnInt64(0), " does not parse"));
      }
    }
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  return generations;
}

absl::StatusOr<std::vector<v1::GenerationSummary>> SqliteStore::ListGenerationsAfter(int64_t campaign_id,
                                                                                   int64_t after_generation,
                                                                                   int limit) {
  if (limit < 1) return absl::InvalidArgumentError(absl::StrCat("limit: must be >= 1, got ", limit));
  std::vector<v1::GenerationSummary> generations;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    generations.clear();
    OGIVE_STORAGE_RETURN_IF_ERROR(r.CheckCampaign(campaign_id));
    Statement& query = *r.generations_page;
    ResetOnExit reset(query);
    query.BindInt64(1, campaign_id);
    query.BindInt64(2, after_generation);
    query.BindInt64(3, limit);
    while (true) {
      absl::StatusOr<bool> row = query.Step();
      if (!row.ok()) return row.status();
      if (!*row) break;
      if (!Parse(query.ColumnBlob(1), generations.emplace_back())) {
        return absl::DataLossError(absl::StrCat("campaign id ", campaign_id, ": the summary of generation ",
                                                query.ColumnInt64(0), " does not parse"));
      }
    }
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  return generations;
}

absl::StatusOr<std::vector<Event>> SqliteStore::ListEvents(int64_t campaign_id, int limit) {
  if (limit < 1)
    return absl::InvalidArgumentError(absl::StrCat("limit: must be >= 1, got ", limit));
  std::vector<Event> events;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    events.clear();
    OGIVE_STORAGE_RETURN_IF_ERROR(r.CheckCampaign(campaign_id));
    Statement& query = *r.newest_events;
    ResetOnExit reset(query);
    query.BindInt64(1, campaign_id);
    query.BindInt64(2, limit);
    while (true) {
      absl::StatusOr<bool> row = query.Step();
      if (!row.ok()) return row.status();
      if (!*row) break;
      Event& event = events.emplace_back();
      event.at_ns = query.ColumnInt64(0);
      event.kind = std::string(query.ColumnText(1));
      event.trial = query.ColumnInt64(2);
      event.worker = std::string(query.ColumnText(3));
      event.message = std::string(query.ColumnText(4));
      event.token_label = std::string(query.ColumnText(5));
    }
    std::reverse(events.begin(), events.end());  // newest first from SQL, oldest first out
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  return events;
}

absl::StatusOr<int64_t> SqliteStore::SizeBytes() {
  int64_t total = 0;
  for (const std::string& file : {path_, path_ + "-wal"}) {
    std::error_code error;
    const uintmax_t size = std::filesystem::file_size(file, error);
    if (error) {
      if (file != path_ && error == std::errc::no_such_file_or_directory) continue;
      return absl::UnavailableError(absl::StrCat("size of '", file, "': ", error.message()));
    }
    total += static_cast<int64_t>(size);
  }
  return total;
}

// ---- Diagnostics ----

absl::Status SqliteStore::CheckIntegrity() {
  std::vector<std::string> findings;
  absl::Status status = ReadTransaction([&](Reader& r) -> absl::Status {
    findings.clear();
    ResetOnExit reset(*r.integrity_check);
    while (true) {
      absl::StatusOr<bool> row = r.integrity_check->Step();
      if (!row.ok()) return row.status();
      if (!*row) break;
      findings.emplace_back(r.integrity_check->ColumnText(0));
    }
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  if (findings.size() == 1 && findings[0] == "ok") return absl::OkStatus();
  return absl::DataLossError(
      absl::StrCat("integrity check of '", path_, "' failed: ", absl::StrJoin(findings, "; ")));
}

absl::StatusOr<std::vector<SqliteConnectionSettings>> SqliteStore::InspectConnections() {
  std::vector<SqliteConnectionSettings> all;
  if (!options_.read_only) {
    Job job;
    job.kind = Job::Kind::kInspect;
    Submit(job);
    if (!job.status.ok()) return job.status;
    all.push_back(*std::move(job.settings));
  }
  // Take every reader at once: a diagnostic may hold up other reads for a moment.
  absl::MutexLock lock(&readers_mu_);
  readers_mu_.Await(absl::Condition(
      +[](SqliteStore* store) ABSL_EXCLUSIVE_LOCKS_REQUIRED(store->readers_mu_) {
        return store->free_readers_.size() == store->readers_.size();
      },
      this));
  for (const std::unique_ptr<Reader>& reader : readers_) {
    absl::StatusOr<SqliteConnectionSettings> settings =
        ReadSettings(*reader->connection, absl::StrCat("reader ", reader->index));
    if (!settings.ok()) return settings.status();
    all.push_back(*std::move(settings));
  }
  return all;
}

}  // namespace ogive::storage
