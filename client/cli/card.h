// A printable card for one leased trial, for bench work: the campaign, the trial number in large
// block digits, every parameter with its value, unit and description, the lease deadline, and how
// to report the result back. Plain text (fits 72 columns), so any printer or terminal shows it.
// Pure, unit-tested.
#ifndef OGIVE_CLIENT_CLI_CARD_H_
#define OGIVE_CLIENT_CLI_CARD_H_

#include <string>

#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// `number` in block digits five lines high (each digit 5 columns and a space).
std::string BlockDigits(int64_t number);

// The card of `trial` of campaign `campaign` with `design`; ends with a form feed so that each card
// starts a new page when printed.
std::string TrialCard(absl::string_view campaign, const v1::CampaignDesign& design, const v1::Trial& trial,
                      absl::TimeZone zone);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_CARD_H_
