// The durability checks of the process-level fault tests: a journal of the tells the clients saw
// acknowledged, and the rules a campaign's stored state must obey after any crash — every
// acknowledged outcome stored once and equal, every report applied once, generations matching the
// consumed outcomes, no trial consumed twice.
//
// AckJournal is thread-safe (worker threads add to it while a supervisor reads it). The check
// functions are pure; they return what they found wrong, one line per finding (empty: all good).
#ifndef OGIVE_TESTS_FAULT_DURABILITY_CHECKS_H_
#define OGIVE_TESTS_FAULT_DURABILITY_CHECKS_H_

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/synchronization/mutex.h"
#include "ogive/v1/service.pb.h"
#include "tests/support/db_inspector.h"

namespace ogive::testing {

// Every tell a client saw acknowledged: trial number -> the score it reported.
class AckJournal {
 public:
  // Records an acknowledged score. False (and nothing changes) when the trial was acknowledged
  // before with a different score: the clients of these tests never do that.
  bool Add(int64_t trial, double score);
  std::map<int64_t, double> Snapshot() const;
  int64_t size() const;

 private:
  mutable absl::Mutex mu_;
  std::map<int64_t, double> acked_ ABSL_GUARDED_BY(mu_);
};

// What is on disk, checked on its own and against the journal:
// - every journaled trial is stored reported with exactly its score (record and score column);
// - each stored outcome was applied once: one "tell" event per reported or voided trial, none for
//   the others; report sequence numbers are exactly 1..engine.report_sequence;
// - trials are numbered 1..engine.next_trial - 1; engine.informative counts the reported ones;
// - generation summaries are numbered 1..engine.generation; each cohort has population_size
//   trials, every trial is in at most one cohort, and a trial is in the cohort of generation g
//   exactly when its record says consumed_by = g (and use CONSUMED).
std::vector<std::string> CheckStoredCampaign(const StoredCampaignState& stored,
                                          const std::map<int64_t, double>& journal);

// What the server answers (read through GetCampaign and ListTrials while clients may still be
// telling) against what was on disk before it restarted and against the journal: nothing stored is
// gone or changed, every journaled outcome is there, the generation did not go back.
std::vector<std::string> CheckServedCampaign(const v1::CampaignView& view,
                                          const std::vector<v1::Trial>& trials,
                                          const StoredCampaignState& before_restart,
                                          const std::map<int64_t, double>& journal);

// With no request in flight: the server's view and trial list equal the file, trial by trial
// (state, outcome, use, consumed_by, late), and its counts equal the file's.
std::vector<std::string> CheckServedEqualsStored(const v1::CampaignView& view,
                                                 const std::vector<v1::Trial>& trials,
                                                 const StoredCampaignState& stored);

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_FAULT_DURABILITY_CHECKS_H_
