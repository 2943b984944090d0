// The checks both design fuzz targets run on a parsed CampaignDesign: the whole validation the server
// does on CreateCampaign, and for a design it accepts, a short life of the campaign (a few asks, each
// candidate checked against the design, tells that let the distribution update, a reload from the
// store). Invalid designs must be refused with INVALID_ARGUMENT or RESOURCE_EXHAUSTED and leave
// nothing stored. A broken invariant aborts (OGIVE_FUZZ_REQUIRE).
#ifndef OGIVE_TESTS_FUZZ_DESIGN_CHECK_H_
#define OGIVE_TESTS_FUZZ_DESIGN_CHECK_H_

#include "ogive/v1/campaign.pb.h"

namespace ogive::fuzz {

void CheckDesign(const v1::CampaignDesign& design);

}  // namespace ogive::fuzz

#endif  // OGIVE_TESTS_FUZZ_DESIGN_CHECK_H_
