#include "server/service/change_tally.h"

namespace ogive::service {

ChangeTally TallyChange(const campaign::Campaign& before, const campaign::Change& change) {
  ChangeTally tally;
  for (const campaign::Trial& t : change.trials) {
    const campaign::Trial* old = before.trial(t.number);  // nullptr for a new trial
    if (t.state == campaign::TrialState::kLapsed && (old == nullptr || old->state != campaign::TrialState::kLapsed)) {
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
