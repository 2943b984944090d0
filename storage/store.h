// Store: where ogived keeps its campaigns. The service talks to this interface only; SqliteStore
// (sqlite_store.h) is the embedded implementation. The store knows the serialized form of a campaign
// (protobuf messages of campaign.proto) but none of the math.
//
// Durability contract: when Commit() or CreateCampaign() returns OK, the data is on disk (the
// transaction committed with synchronous=FULL). A write either commits whole or not at all; a
// failed write is not stored, with one exception: when the fsync of its commit failed and the
// process dies before the next commit, a restart may find it stored, whole (SQLite finds the
// complete transaction in its log). Callers treat that as a reply that was lost: every write of
// the service is safe to retry.
// Implementations are thread-safe: any thread may call any method; writes are serialized
// internally, reads do not wait for writes of other campaigns.
#ifndef OGIVE_STORAGE_STORE_H_
#define OGIVE_STORAGE_STORE_H_

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/statusor.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::storage {

// A campaign as stored, for loading at start-up.
struct StoredCampaign {
  int64_t id = 0;
  std::string name;
  v1::CampaignDesign design;
  v1::CampaignSnapshot snapshot;  // engine state (with its distribution) and every trial, by number
  std::string create_request_id;
  // Ask request ids seen, with the trial numbers each returned (for idempotent retries), in the order
  // they were stored.
  std::vector<std::pair<std::string, std::vector<int64_t>>> ask_requests;
};

// One line of a campaign's append-only event log.
struct Event {
  std::string kind;    // e.g. "ask", "tell", "update", "phase", "lapse", "restart"
  int64_t trial = 0;   // 0 when not about one trial
  std::string worker;  // the worker the request named, if any
  std::string message;
  int64_t at_ns = 0;  // Unix nanoseconds
  std::string token_label = "";  // the label of the token whose request wrote it (none: "")
};

// One access token as stored: its SHA-256 digest, never the token itself.
struct StoredToken {
  std::string label;                  // unique for ever (a revoked label is not reused)
  std::string digest;                 // SHA-256 of the token, 32 bytes
  std::string role;                   // "reader", "worker" or "admin"
  std::vector<std::string> campaigns;   // the campaigns it is limited to; empty: every campaign
  int64_t created_at_ns = 0;          // Unix nanoseconds
  std::optional<int64_t> revoked_at_ns;  // set once revoked
};

// Everything one request changed in one campaign; committed as one transaction.
struct CampaignWrite {
  int64_t campaign_id = 0;
  std::vector<v1::TrialRecord> trials;                // inserted or replaced, by (campaign, number)
  std::optional<v1::EngineState> engine;              // replaces the stored engine state; its
                                                      // `distribution` field is ignored here...
  std::optional<v1::DistributionState> distribution;  // ...and replaced only when this is set
  std::vector<v1::GenerationSummary> generations;     // appended
  // request id -> trials. Appended: the store does not look for an earlier write with the same id
  // (that would cost an index lookup at a random place per ask); the caller stores each id once.
  std::optional<std::pair<std::string, std::vector<int64_t>>> ask_request;
  std::vector<Event> events;                          // appended
  // Writes of one campaign that carry the same non-zero chain depend on each other: they commit in the
  // order they were queued, and once one of them fails every later one fails too (UNAVAILABLE)
  // without being applied. A caller that applies changes to memory before their commit completes
  // reloads the campaign after a failure and continues with a new chain.
  int64_t chain = 0;
};

// A queued write; Wait() blocks until the transaction holding it committed or failed.
class PendingCommit {
 public:
  virtual ~PendingCommit() = default;
  // The write's outcome, as Store::Commit() would return it. Call at most once.
  virtual absl::Status Wait() = 0;
};

// One page of ListTrials().
struct TrialPage {
  std::vector<v1::TrialRecord> trials;
  int64_t next_after = 0;  // pass as `after_number` for the next page; 0 when this is the last page
};

// The storage interface; see the top of this file for its contract.
class Store {
 public:
  virtual ~Store() = default;

  // Every campaign with its full state, in id order. DATA_LOSS if a stored message does not parse.
  virtual absl::StatusOr<std::vector<StoredCampaign>> LoadAll() = 0;

  // Inserts a new campaign with its initial engine state (distribution included) and returns its id.
  // ALREADY_EXISTS if the name is taken. Durable on return.
  virtual absl::StatusOr<int64_t> CreateCampaign(const std::string& name,
                                              const v1::CampaignDesign& design,
                                              const v1::EngineState& engine,
                                              const std::string& request_id) = 0;

  // Commits one campaign write. Many concurrent Commit() calls share one transaction and one fsync
  // (group commit); each returns only after the transaction holding its write committed. On error
  // nothing of this write is stored (see the top of this file): UNAVAILABLE, naming the database
  // file, when it is locked by another program, the disk failed or is full (the caller may retry), INVALID_ARGUMENT if the write holds a NaN or infinity where a number is
  // stored in a column (SQLite would store NaN as NULL), NOT_FOUND for an unknown campaign id.
  virtual absl::Status Commit(CampaignWrite write) { return CommitAsync(std::move(write))->Wait(); }

  // Queues one campaign write and returns at once; writes are applied in the order they were queued.
  // Errors found before queuing (a NaN, a malformed write) are returned by Wait().
  virtual std::unique_ptr<PendingCommit> CommitAsync(CampaignWrite write) = 0;

  // One campaign with its full state, as LoadAll() returns it. NOT_FOUND for an unknown id.
  virtual absl::StatusOr<StoredCampaign> LoadCampaign(int64_t campaign_id) {
    absl::StatusOr<std::vector<StoredCampaign>> all = LoadAll();
    if (!all.ok()) return all.status();
    for (StoredCampaign& s : *all) {
      if (s.id == campaign_id) return std::move(s);
    }
    return absl::NotFoundError("campaign id not found");
  }

  // Trials of a campaign with number > after_number, in number order, at most `limit`, optionally of
  // one state. Reads committed data only.
  virtual absl::StatusOr<TrialPage> ListTrials(int64_t campaign_id,
                                               std::optional<v1::TrialState> state,
                                               int64_t after_number, int limit) = 0;

  // The generation summaries of a campaign, in generation order.
  virtual absl::StatusOr<std::vector<v1::GenerationSummary>> ListGenerations(int64_t campaign_id) = 0;

  // The generation summaries with generation > after_generation, in generation order, at most
  // `limit` (>= 1, else INVALID_ARGUMENT). Reads committed data only. This default filters
  // ListGenerations(); SqliteStore reads just the page.
  virtual absl::StatusOr<std::vector<v1::GenerationSummary>> ListGenerationsAfter(int64_t campaign_id,
                                                                                  int64_t after_generation,
                                                                                  int limit) {
    if (limit < 1) return absl::InvalidArgumentError("limit: must be >= 1");
    absl::StatusOr<std::vector<v1::GenerationSummary>> all = ListGenerations(campaign_id);
    if (!all.ok()) return all.status();
    std::vector<v1::GenerationSummary> page;
    for (v1::GenerationSummary& g : *all) {
      if (g.generation() <= after_generation) continue;
      if (static_cast<int>(page.size()) == limit) break;
      page.push_back(std::move(g));
    }
    return page;
  }

  // The event log of a campaign, oldest first, at most `limit` of the newest.
  virtual absl::StatusOr<std::vector<Event>> ListEvents(int64_t campaign_id, int limit) = 0;

  // Bytes the database occupies on disk (main file and write-ahead log).
  virtual absl::StatusOr<int64_t> SizeBytes() = 0;

  // ---- Access tokens (the service hashes and checks them; the store keeps digests) ----
  // A store without tokens answers UNIMPLEMENTED.

  // Stores a new token. ALREADY_EXISTS when its label is taken (revoked tokens included);
  // INVALID_ARGUMENT for a digest that is not 32 bytes, an unknown role or a malformed campaign name.
  // Durable on return.
  virtual absl::Status CreateToken(const StoredToken& token) {
    (void)token;
    return absl::UnimplementedError("this store keeps no tokens");
  }

  // Marks the token with `label` revoked at `at_ns`: true when this call revoked it, false when it
  // was revoked already (the first time is kept). NOT_FOUND for an unknown label. Durable on return.
  virtual absl::StatusOr<bool> RevokeToken(const std::string& label, int64_t at_ns) {
    (void)label;
    (void)at_ns;
    return absl::UnimplementedError("this store keeps no tokens");
  }

  // Every token, revoked ones included, in label order. Reads committed data only.
  virtual absl::StatusOr<std::vector<StoredToken>> ListTokens() {
    return absl::UnimplementedError("this store keeps no tokens");
  }
};

}  // namespace ogive::storage

#endif  // OGIVE_STORAGE_STORE_H_
