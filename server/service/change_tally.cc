#include "server/service/change_tally.h"

namespace ogive::service {

ChangeTally TallyChange(const study::Study& before, const study::Change& change) {
  ChangeTally tally;
  for (const study::Trial& t : change.trials) {
    const study::Trial* old = before.trial(t.number);  // nullptr for a new trial
    if (t.state == study::TrialState::kLapsed && (old == nullptr || old->state != study::TrialState::kLapsed)) {
      ++tally.lapses;
    }
    if (t.outcome.has_value() && (old == nullptr || !old->outcome.has_value())) {
      ++tally.tells[static_cast<size_t>(t.outcome->kind)];
    }
  }
  tally.generations = static_cast<int64_t>(change.generations.size());
  if (change.engine.epoch > before.engine().epoch) tally.restarts = change.engine.epoch - before.engine().epoch;
  return tally;
}

}  // namespace ogive::service
