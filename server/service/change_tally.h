// ChangeTally: what one planned campaign::Change does, counted the way ogived's metrics count it —
// reports stored by outcome kind, leases that lapsed, distribution updates and restarts. A pure
// function of the campaign before the change and the change itself; the campaign host adds the tally to
// the metrics once the change committed.
#ifndef OGIVE_SERVER_SERVICE_CHANGE_TALLY_H_
#define OGIVE_SERVER_SERVICE_CHANGE_TALLY_H_

#include <array>
#include <cstdint>

#include "server/search/ranking.h"
#include "server/campaign/campaign.h"

namespace ogive::service {

struct ChangeTally {
  // Reports newly stored (a duplicate is not one), indexed by search::Outcome::Kind.
  std::array<int64_t, 4> tells{};
  int64_t lapses = 0;       // trials that went from leased to lapsed
  int64_t generations = 0;  // distribution updates
  int64_t restarts = 0;

  int64_t tells_of(search::Outcome::Kind kind) const { return tells[static_cast<size_t>(kind)]; }
  bool empty() const { return tells == std::array<int64_t, 4>{} && lapses == 0 && generations == 0 && restarts == 0; }
};

// The tally of `change`, planned on `before` and not yet applied to it.
ChangeTally TallyChange(const campaign::Campaign& before, const campaign::Change& change);

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_CHANGE_TALLY_H_
