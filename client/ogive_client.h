// Client: a typed C++ client of the ogive service for workers, tools and tests.
//
// Every call has a deadline (ClientOptions::call_timeout). Calls that fail with UNAVAILABLE, or with
// CANCELLED the caller did not ask for (a server stopping mid-call), or are refused with reason
// RATE_LIMITED and a delay of at most max_backoff, are retried with exponential backoff (at least the
// delay a rate limit names) up to ClientOptions::max_attempts (the channel reconnects during the
// backoff, so a restarted server is found at once); every other refusal is returned at once, with its
// reason for ErrorReasonOf (error_reason.h). Writes are safe to retry:
// Ask carries a request id chosen once per call, Tell and Renew are idempotent by trial number (the
// same outcome twice is accepted once).
//
// Thread-safe: one Client may be shared by many threads (gRPC channels are).
#ifndef OGIVE_CLIENT_OGIVE_CLIENT_H_
#define OGIVE_CLIENT_OGIVE_CLIENT_H_

#include <atomic>
#include <functional>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "absl/time/time.h"
#include "client/client_tls.h"
#include "grpcpp/grpcpp.h"
#include "ogive/v1/service.grpc.pb.h"

namespace ogive::client {

// Lets one thread stop a call that another thread is making through Client (LeaseRenewer's destructor
// does): the attempt in flight is cancelled and no retry follows; the call returns CANCELLED. Once
// cancelled, it stays cancelled. Thread-safe; must outlive the calls it is passed to.
class Cancellation {
 public:
  void Cancel();
  bool cancelled() const;

 private:
  friend class Client;
  // Makes `context` the attempt that Cancel() cancels; false when cancelled already.
  bool Enter(grpc::ClientContext* context);
  void Leave();  // before the attempt's context goes

  mutable absl::Mutex mu_;
  grpc::ClientContext* attempt_ ABSL_GUARDED_BY(mu_) = nullptr;
  bool cancelled_ ABSL_GUARDED_BY(mu_) = false;
};

struct ClientOptions {
  absl::Duration call_timeout = absl::Seconds(30);  // deadline of each attempt
  int max_attempts = 5;                              // attempts for UNAVAILABLE and RATE_LIMITED, >= 1
  absl::Duration first_backoff = absl::Milliseconds(100);
  absl::Duration max_backoff = absl::Seconds(5);
  std::string token;                                 // sent as "authorization: Bearer <token>" if set
  int max_message_bytes = 4 << 20;
  ClientTls tls;                                     // plain text unless tls.on()
};

class Client {
 public:
  // A client of the server at `target` ("host:port"): over TLS when options.tls.on(), else in plain
  // text (a server on loopback). INVALID_ARGUMENT naming the option and path when a TLS file cannot
  // be used. Connecting is lazy: an unreachable server or a failed handshake shows as UNAVAILABLE on
  // the first call.
  static absl::StatusOr<std::unique_ptr<Client>> Open(const std::string& target, ClientOptions options = {});
  // Like Open, for callers that never fail to build a channel: nullptr when options.tls names a file
  // that cannot be used (Open says why).
  static std::unique_ptr<Client> Connect(const std::string& target, ClientOptions options = {});
  // A client over a channel the caller made (for TLS credentials or tests).
  Client(std::shared_ptr<grpc::Channel> channel, ClientOptions options);

  absl::StatusOr<v1::CampaignView> CreateCampaign(const v1::CampaignDesign& design);
  absl::StatusOr<v1::CampaignView> GetCampaign(const std::string& campaign);
  // Every campaign the token may see, in name order (all pages).
  absl::StatusOr<v1::ListCampaignsResponse> ListCampaigns();
  absl::StatusOr<v1::AskResponse> Ask(const std::string& campaign, int count, const std::string& worker,
                                      double lease_seconds = 0);
  absl::StatusOr<v1::TellResponse> Tell(const std::string& campaign, const std::vector<v1::Report>& reports,
                                        const std::string& worker);
  // `cancellation` (may be null) lets another thread stop the call and its retries.
  absl::StatusOr<v1::RenewResponse> Renew(const std::string& campaign, const std::vector<int64_t>& trials,
                                          const std::string& worker, double lease_seconds = 0,
                                          Cancellation* cancellation = nullptr);
  // Every trial (all pages), optionally of one state.
  absl::StatusOr<std::vector<v1::Trial>> ListAllTrials(const std::string& campaign,
                                                       v1::TrialState state = v1::TRIAL_STATE_UNSPECIFIED);
  absl::StatusOr<v1::ListTrialsResponse> ListTrials(const v1::ListTrialsRequest& request);
  // Every generation view (all pages), in generation order.
  absl::StatusOr<std::vector<v1::GenerationView>> ListAllGenerations(const std::string& campaign);
  absl::StatusOr<v1::ListGenerationsResponse> ListGenerations(const v1::ListGenerationsRequest& request);
  absl::StatusOr<v1::CampaignView> SetPhase(const std::string& campaign, v1::PhaseCommand command);
  // Streams status updates to `on_view` until the campaign is done, `on_view` returns false, or the
  // stream fails. No deadline (a watch runs as long as it is wanted).
  absl::Status Watch(const std::string& campaign, const std::function<bool(const v1::CampaignView&)>& on_view);

  v1::Ogive::Stub& stub() { return *stub_; }

 private:
  template <typename Request, typename Response>
  absl::Status Call(grpc::Status (v1::Ogive::Stub::*method)(grpc::ClientContext*, const Request&, Response*),
                    const Request& request, Response* response, Cancellation* cancellation = nullptr);
  void Prepare(grpc::ClientContext& context) const;

  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<v1::Ogive::Stub> stub_;
  ClientOptions options_;
};

// Keeps the leases of some trials alive while a long evaluation runs: renews them every `interval`
// (default: a third of the lease) on a background thread until destroyed. Renewal errors are counted,
// not fatal: the lease may lapse, and the late report is still stored. It stops renewing for good when
// the server says the lease can never be renewed again (LEASE_HELD_BY_OTHER, TRIAL_NOT_FOUND,
// TRIAL_ALREADY_REPORTED, CAMPAIGN_NOT_FOUND): gave_up() tells. The destructor cancels a
// renewal in flight (and its retries) rather than wait for it, so a finished evaluation is reported
// at once even when the server does not answer.
class LeaseRenewer {
 public:
  LeaseRenewer(Client* client, std::string campaign, std::vector<int64_t> trials, std::string worker,
               double lease_seconds, absl::Duration interval);
  ~LeaseRenewer();
  LeaseRenewer(const LeaseRenewer&) = delete;
  LeaseRenewer& operator=(const LeaseRenewer&) = delete;

  int renewals() const { return renewals_; }
  int failures() const { return failures_; }
  bool gave_up() const { return gave_up_; }

 private:
  absl::Notification stop_;
  Cancellation cancellation_;
  std::atomic<int> renewals_{0};
  std::atomic<int> failures_{0};
  std::atomic<bool> gave_up_{false};
  std::thread thread_;
};

// A fresh random request id (128 bits, hex).
std::string NewRequestId();

}  // namespace ogive::client

#endif  // OGIVE_CLIENT_OGIVE_CLIENT_H_
