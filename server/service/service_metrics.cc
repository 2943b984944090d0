#include "server/service/service_metrics.h"

#include <array>
#include <vector>

#include "server/service/registry.h"
#include "server/campaign/campaign.h"

namespace ogive::service {
namespace {

using metrics::MetricType;
using metrics::Sample;

// Latency bounds in seconds: a commit's fsync is a few milliseconds on a disk, tens of microseconds
// on a RAM disk; a request waits for one or two of them and then some.
const std::vector<double> kLatencyBounds = {0.0001, 0.00025, 0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025,
                                            0.05,   0.1,     0.25,   0.5,   1,      2.5,   5,     10};

// The methods of ogive.v1.Ogive, so that each shows a zero series before its first call.
constexpr const char* kMethods[] = {"CreateCampaign", "GetCampaign", "ListCampaigns", "Ask",   "Tell",
                                    "Renew",          "ListTrials",  "ListGenerations", "SetPhase", "Watch"};

constexpr std::array<const char*, 4> kOutcomeKinds = {"score", "grade", "infeasible", "void"};
static_assert(static_cast<int>(search::Outcome::Kind::kScore) == 0 &&
              static_cast<int>(search::Outcome::Kind::kGrade) == 1 &&
              static_cast<int>(search::Outcome::Kind::kInfeasible) == 2 &&
              static_cast<int>(search::Outcome::Kind::kVoid) == 3);

}  // namespace

ServiceMetrics::ServiceMetrics(metrics::MetricRegistry* registry, absl::Time started)
    : registry_(registry),
      requests_(registry->AddCounter("ogive_requests_total",
                                     "Calls of the ogive.v1.Ogive service that finished, by method and gRPC status code.",
                                     {"method", "code"})),
      request_seconds_(registry->AddHistogram(
          "ogive_request_duration_seconds",
          "Time from a call's arrival until its status was sent (for Ask, Tell and the other writes this "
          "includes the commit; for Watch it is the stream's lifetime), by method.",
          {"method"}, kLatencyBounds)),
      tells_(registry->AddCounter("ogive_tells_total",
                                  "Reports stored (duplicates excluded), by outcome kind: score, grade, infeasible, void.",
                                  {"kind"})),
      lapses_(registry->AddCounter("ogive_lapses_total", "Leases that ran out before their trial reported.", {})
                  .WithLabels({})),
      generations_(registry->AddCounter("ogive_generations_total",
                                        "Updates of a search distribution (one generation each).", {})
                       .WithLabels({})),
      restarts_(registry->AddCounter("ogive_restarts_total",
                                     "Restarts of a converged campaign with a doubled population.", {})
                    .WithLabels({})),
      commit_seconds_(registry
                          ->AddHistogram("ogive_store_commit_duration_seconds",
                                         "Time a write transaction took, from BEGIN IMMEDIATE until COMMIT "
                                         "returned (the fsync included).",
                                         {}, kLatencyBounds)
                          .WithLabels({})),
      writes_per_transaction_(registry
                                  ->AddHistogram("ogive_store_writes_per_transaction",
                                                 "Writes (one per request that changed a campaign) sharing one "
                                                 "transaction and its fsync: group commit at work.",
                                                 {}, metrics::ExponentialBuckets(1, 2, 9))
                                  .WithLabels({})) {
  for (const char* method : kMethods) {
    requests_.WithLabels({method, "OK"});
    request_seconds_.WithLabels({method});
  }
  for (const char* kind : kOutcomeKinds) tells_.WithLabels({kind});
  const double start_seconds = absl::ToDoubleSeconds(started - absl::UnixEpoch());
  registry->AddCollected("ogive_process_start_time_seconds", "When this ogived started, in Unix seconds.",
                         MetricType::kGauge,
                         [start_seconds](std::vector<Sample>& out) { out.push_back({"", {}, start_seconds}); });
}

void ServiceMetrics::ObserveRequest(const std::string& method, absl::StatusCode code, double seconds) {
  requests_.WithLabels({method, absl::StatusCodeToString(code)}).Increment();
  request_seconds_.WithLabels({method}).Observe(seconds);
}

void ServiceMetrics::ObserveCommitted(const ChangeTally& tally) {
  for (size_t k = 0; k < kOutcomeKinds.size(); ++k) {
    if (tally.tells[k] > 0) tells_.WithLabels({kOutcomeKinds[k]}).Increment(static_cast<uint64_t>(tally.tells[k]));
  }
  if (tally.lapses > 0) lapses_.Increment(static_cast<uint64_t>(tally.lapses));
  if (tally.generations > 0) generations_.Increment(static_cast<uint64_t>(tally.generations));
  if (tally.restarts > 0) restarts_.Increment(static_cast<uint64_t>(tally.restarts));
}

void ServiceMetrics::ObserveTransaction(const storage::SqliteTransactionReport& report) {
  if (!report.committed) return;  // counted by ogive_store_failed_transactions_total
  commit_seconds_.Observe(report.seconds);
  writes_per_transaction_.Observe(static_cast<double>(report.writes));
}

void ServiceMetrics::CollectCampaigns(const Registry* campaigns) {
  registry_->AddCollected(
      "ogive_campaigns", "Campaigns this server holds, by phase: open, paused, done.", MetricType::kGauge,
      [campaigns](std::vector<Sample>& out) {
        std::array<int64_t, 3> by_phase{};
        for (const auto& host : campaigns->All()) ++by_phase[static_cast<size_t>(host->Gauges().phase)];
        for (campaign::Phase p : {campaign::Phase::kOpen, campaign::Phase::kPaused, campaign::Phase::kDone}) {
          out.push_back({"", {{"phase", campaign::PhaseName(p)}}, static_cast<double>(by_phase[static_cast<size_t>(p)])});
        }
      });
  registry_->AddCollected("ogive_open_leases", "Trials leased to a worker and not yet reported or lapsed, per campaign.",
                          MetricType::kGauge, [campaigns](std::vector<Sample>& out) {
                            for (const auto& host : campaigns->All()) {
                              out.push_back({"", {{"campaign", host->name()}},
                                             static_cast<double>(host->Gauges().counts.leased)});
                            }
                          });
  registry_->AddCollected(
      "ogive_trials", "Trials per campaign by state: leased, reported, lapsed, voided.", MetricType::kGauge,
      [campaigns](std::vector<Sample>& out) {
        for (const auto& host : campaigns->All()) {
          const campaign::TrialCounts c = host->Gauges().counts;
          const std::pair<campaign::TrialState, int64_t> states[] = {{campaign::TrialState::kLeased, c.leased},
                                                                  {campaign::TrialState::kReported, c.reported},
                                                                  {campaign::TrialState::kLapsed, c.lapsed},
                                                                  {campaign::TrialState::kVoided, c.voided}};
          for (const auto& [state, n] : states) {
            out.push_back({"", {{"campaign", host->name()}, {"state", campaign::TrialStateName(state)}},
                           static_cast<double>(n)});
          }
        }
      });
  registry_->AddCollected("ogive_campaign_generation", "Updates of the campaign's search distribution so far, per campaign.",
                          MetricType::kGauge, [campaigns](std::vector<Sample>& out) {
                            for (const auto& host : campaigns->All()) {
                              out.push_back(
                                  {"", {{"campaign", host->name()}}, static_cast<double>(host->Gauges().generation)});
                            }
                          });
}

void ServiceMetrics::CollectStore(storage::SqliteStore* store) {
  using Stats = storage::SqliteStore::Stats;
  auto counter = [&](const char* name, const char* help, int64_t Stats::*field) {
    registry_->AddCollected(name, help, MetricType::kCounter, [store, field](std::vector<Sample>& out) {
      out.push_back({"", {}, static_cast<double>(store->stats().*field)});
    });
  };
  counter("ogive_store_transactions_total", "Write transactions committed.", &Stats::transactions);
  counter("ogive_store_writes_total", "Writes stored (one per request that changed a campaign).", &Stats::committed_writes);
  counter("ogive_store_failed_writes_total", "Writes refused or lost with their transaction.", &Stats::failed_writes);
  counter("ogive_store_failed_transactions_total", "Write transactions whose BEGIN or COMMIT failed.",
          &Stats::failed_transactions);
  counter("ogive_store_group_commit_waits_total",
          "Transactions that waited (at most the group commit window) for more writes to join.",
          &Stats::group_commit_waits);
  counter("ogive_store_isolated_batches_total",
          "Batches applied again write by write (a savepoint each) after one of their writes failed in the database.",
          &Stats::isolated_batches);
  registry_->AddCollected("ogive_store_queued_writes", "Writes waiting for the writer thread or in its current batch.",
                          MetricType::kGauge, [store](std::vector<Sample>& out) {
                            const Stats s = store->stats();
                            out.push_back({"", {}, static_cast<double>(s.queued_writes + s.active_writes)});
                          });
  registry_->AddCollected("ogive_store_size_bytes", "Bytes the database occupies on disk (main file and write-ahead log).",
                          MetricType::kGauge, [store](std::vector<Sample>& out) {
                            absl::StatusOr<int64_t> size = store->SizeBytes();
                            if (size.ok()) out.push_back({"", {}, static_cast<double>(*size)});
                          });
}

}  // namespace ogive::service
