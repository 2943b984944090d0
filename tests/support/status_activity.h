// ClearActivity: clears the fields of a StatusSummary that depend on the clock and on who called recently
// (as_of_unix_ms, reports_last_hour, workers), for tests that compare views of one campaign
// taken at different moments or by different processes. Header-only, so the fuzz targets (built
// without the test libraries) can use it too.
#ifndef OGIVE_TESTS_SUPPORT_STATUS_ACTIVITY_H_
#define OGIVE_TESTS_SUPPORT_STATUS_ACTIVITY_H_

#include "ogive/v1/service.pb.h"

namespace ogive::testing {

inline void ClearActivity(v1::StatusSummary* status) {
  status->clear_workers();
  status->clear_as_of_unix_ms();
  status->clear_reports_last_hour();
}

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_STATUS_ACTIVITY_H_
