// TellDriver: runs a fuzz input as the life of one campaign served in-process. The first bytes choose a
// design (which parameter kinds, the objective, population, staleness limit, budget, target,
// restarts, lease); the rest is a sequence of requests to the service handlers (server/service/
// handlers.h) over a MemoryStore: ask, tell (scores from any bit pattern, NaN and infinities
// included, grades on and off the scale, infeasible, void, no outcome, notes too long), ask-and-tell
// of a whole cohort, renew, sweep with the clock moving on, pause/resume/finish, trial listings and
// a server restart from the store.
//
// Before each request the driver predicts its answer from what the store holds and what it told so
// far (status code, trial numbers, duplicates, lateness); after each it checks the campaign's
// bookkeeping (campaign_invariants.h). A wrong prediction or broken invariant aborts.
//
// Single-threaded; owns its store and registry.
#ifndef OGIVE_TESTS_FUZZ_TELL_DRIVER_H_
#define OGIVE_TESTS_FUZZ_TELL_DRIVER_H_

#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "server/search/space.h"
#include "server/service/registry.h"
#include "storage/store.h"
#include "tests/fuzz/byte_reader.h"
#include "tests/fuzz/memory_store.h"
#include "tests/fuzz/campaign_invariants.h"

namespace ogive::fuzz {

class TellDriver {
 public:
  // At most this many requests per input, so that one input stays quick.
  static constexpr int kMaxOperations = 96;

  // Reads the design from the first bytes of `input` and creates the campaign.
  explicit TellDriver(ByteReader& input);
  // Runs requests until the input is used up or kMaxOperations ran.
  void Run();

 private:
  void Ask();
  void Tell();
  void AskAndTellCohort();
  void Renew();
  void Sweep();
  void SetPhase();
  void ListTrials();
  void Restart();

  // Sends an ask (or a tell) after predicting its answer; returns the response when it succeeded.
  std::optional<v1::AskResponse> SendAsk(const v1::AskRequest& request);
  void SendTell(const v1::TellRequest& request);
  // Points stored_ and generations_ at what the store holds and checks the invariants.
  void Refresh();
  const v1::TrialRecord* Record(int64_t number) const;
  int64_t PickTrial();
  v1::Outcome PickOutcome();
  absl::Duration LeaseFor(double seconds) const;

  ByteReader& in_;
  MemoryStore store_;
  std::unique_ptr<service::Registry> registry_;
  v1::CampaignDesign design_;
  std::optional<search::Space> space_;
  CampaignModel model_;
  absl::Time now_;
  // The store's copy of the campaign after the last request; it changes with the next write, so every
  // prediction is made before its request is sent.
  const storage::StoredCampaign* stored_ = nullptr;
  const std::vector<v1::GenerationSummary>* generations_ = nullptr;
  std::map<std::string, std::vector<int64_t>> ask_requests_;  // request id -> trials it returned
};

}  // namespace ogive::fuzz

#endif  // OGIVE_TESTS_FUZZ_TELL_DRIVER_H_
