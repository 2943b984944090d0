#include "client/ogive_client.h"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <optional>
#include <random>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "client/error_reason.h"
#include "server/base/reason.h"

namespace ogive::client {
namespace {

// Rows per page of the listings this client pages through: every server allows it (--max-page-size
// is at least 100).
constexpr int kPageSize = 100;

// Worth another attempt: UNAVAILABLE (the server restarts, drains, or its store is busy), CANCELLED
// that the caller did not ask for (a server stopping mid-call; every call is safe to repeat: Ask by
// its request id, Tell and Renew by trial number, the rest read), and a rate limit whose named delay
// is within `max_backoff` (a longer one is the caller's to wait out).
bool Retryable(const absl::Status& status, absl::Duration max_backoff, const Cancellation* cancellation) {
  if (status.code() == absl::StatusCode::kUnavailable) return true;
  if (status.code() == absl::StatusCode::kCancelled) return cancellation == nullptr || !cancellation->cancelled();
  std::optional<ErrorReason> why = ErrorReasonOf(status);
  return why.has_value() && why->reason == reason::kRateLimited &&
         why->retry_delay.value_or(absl::ZeroDuration()) <= max_backoff;
}

}  // namespace

std::string NewRequestId() {
  static thread_local std::mt19937_64 rng(std::random_device{}());
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%016llx%016llx", static_cast<unsigned long long>(rng()),
                static_cast<unsigned long long>(rng()));
  return buffer;
}

absl::StatusOr<std::unique_ptr<Client>> Client::Open(const std::string& target, ClientOptions options) {
  grpc::ChannelArguments args;
  args.SetMaxReceiveMessageSize(options.max_message_bytes);
  args.SetMaxSendMessageSize(options.max_message_bytes);
  // Nothing reads channelz in a client of ours; its counters would cost a little on every call.
  args.SetInt(GRPC_ARG_ENABLE_CHANNELZ, 0);
  std::shared_ptr<grpc::ChannelCredentials> credentials = grpc::InsecureChannelCredentials();
  if (options.tls.on()) {
    absl::StatusOr<std::shared_ptr<grpc::ChannelCredentials>> tls = TlsChannelCredentials(options.tls);
    if (!tls.ok()) return tls.status();
    credentials = *std::move(tls);
    if (!options.tls.server_name.empty()) args.SetSslTargetNameOverride(options.tls.server_name);
  }
  return std::make_unique<Client>(grpc::CreateCustomChannel(target, credentials, args), std::move(options));
}

std::unique_ptr<Client> Client::Connect(const std::string& target, ClientOptions options) {
  absl::StatusOr<std::unique_ptr<Client>> client = Open(target, std::move(options));
  return client.ok() ? *std::move(client) : nullptr;
}

Client::Client(std::shared_ptr<grpc::Channel> channel, ClientOptions options)
    : channel_(std::move(channel)), stub_(v1::Ogive::NewStub(channel_)), options_(std::move(options)) {
  options_.max_attempts = std::max(1, options_.max_attempts);
}

void Client::Prepare(grpc::ClientContext& context) const {
  context.set_deadline(std::chrono::system_clock::now() +
                       std::chrono::microseconds(absl::ToInt64Microseconds(options_.call_timeout)));
  if (!options_.token.empty()) context.AddMetadata("authorization", "Bearer " + options_.token);
}

template <typename Request, typename Response>
absl::Status Client::Call(grpc::Status (v1::Ogive::Stub::*method)(grpc::ClientContext*, const Request&, Response*),
                          const Request& request, Response* response, Cancellation* cancellation) {
  const absl::Status cancelled = absl::CancelledError("the call was cancelled by the caller");
  absl::Duration backoff = options_.first_backoff;
  absl::Status last;
  for (int attempt = 1; attempt <= options_.max_attempts; ++attempt) {
    grpc::ClientContext context;
    Prepare(context);
    if (cancellation != nullptr && !cancellation->Enter(&context)) return cancelled;
    last = StatusFromGrpc(((*stub_).*method)(&context, request, response));
    if (cancellation != nullptr) cancellation->Leave();
    if (!Retryable(last, options_.max_backoff, cancellation)) return last;
    if (attempt < options_.max_attempts) {
      if (std::optional<ErrorReason> why = ErrorReasonOf(last); why.has_value() && why->retry_delay.has_value()) {
        backoff = std::max(backoff, std::min(*why->retry_delay, options_.max_backoff));
      }
      // Wait out the backoff while the channel reconnects. A blocking client whose calls fail at
      // once polls its connection only every 5 s (gRPC's backup poller), so without this a
      // restarted server is found seconds late. In slices, so that a cancellation is seen soon.
      const absl::Time until = absl::Now() + backoff;
      for (absl::Time now = absl::Now(); now < until; now = absl::Now()) {
        if (cancellation != nullptr && cancellation->cancelled()) return cancelled;
        const absl::Time slice_end = std::min(until, now + absl::Milliseconds(100));
        channel_->WaitForConnected(absl::ToChronoTime(slice_end));
        absl::SleepFor(slice_end - absl::Now());
      }
      backoff = std::min(2 * backoff, options_.max_backoff);
    }
  }
  return last;
}

absl::StatusOr<v1::CampaignView> Client::CreateCampaign(const v1::CampaignDesign& design) {
  v1::CreateCampaignRequest request;
  *request.mutable_design() = design;
  request.set_request_id(NewRequestId());
  v1::CampaignView response;
  if (absl::Status s = Call(&v1::Ogive::Stub::CreateCampaign, request, &response); !s.ok()) return s;
  return response;
}

absl::StatusOr<v1::CampaignView> Client::GetCampaign(const std::string& campaign) {
  v1::GetCampaignRequest request;
  request.set_campaign(campaign);
  v1::CampaignView response;
  if (absl::Status s = Call(&v1::Ogive::Stub::GetCampaign, request, &response); !s.ok()) return s;
  return response;
}

absl::StatusOr<v1::ListCampaignsResponse> Client::ListCampaigns() {
  v1::ListCampaignsResponse all;
  v1::ListCampaignsRequest request;
  request.set_page_size(kPageSize);
  do {
    v1::ListCampaignsResponse page;
    if (absl::Status s = Call(&v1::Ogive::Stub::ListCampaigns, request, &page); !s.ok()) return s;
    for (v1::CampaignView& view : *page.mutable_campaigns()) *all.add_campaigns() = std::move(view);
    request.set_page_token(page.next_page_token());
  } while (!request.page_token().empty());
  return all;
}

absl::StatusOr<v1::AskResponse> Client::Ask(const std::string& campaign, int count, const std::string& worker,
                                            double lease_seconds) {
  v1::AskRequest request;
  request.set_campaign(campaign);
  request.set_count(count);
  request.set_worker(worker);
  request.set_lease_seconds(lease_seconds);
  request.set_request_id(NewRequestId());  // the same id on every retry of this call
  v1::AskResponse response;
  if (absl::Status s = Call(&v1::Ogive::Stub::Ask, request, &response); !s.ok()) return s;
  return response;
}

absl::StatusOr<v1::TellResponse> Client::Tell(const std::string& campaign, const std::vector<v1::Report>& reports,
                                              const std::string& worker) {
  v1::TellRequest request;
  request.set_campaign(campaign);
  request.set_worker(worker);
  for (const v1::Report& r : reports) *request.add_reports() = r;
  v1::TellResponse response;
  if (absl::Status s = Call(&v1::Ogive::Stub::Tell, request, &response); !s.ok()) return s;
  return response;
}

absl::StatusOr<v1::RenewResponse> Client::Renew(const std::string& campaign, const std::vector<int64_t>& trials,
                                                const std::string& worker, double lease_seconds,
                                                Cancellation* cancellation) {
  v1::RenewRequest request;
  request.set_campaign(campaign);
  for (int64_t t : trials) request.add_trials(t);
  request.set_worker(worker);
  request.set_lease_seconds(lease_seconds);
  v1::RenewResponse response;
  if (absl::Status s = Call(&v1::Ogive::Stub::Renew, request, &response, cancellation); !s.ok()) return s;
  return response;
}

absl::StatusOr<v1::ListTrialsResponse> Client::ListTrials(const v1::ListTrialsRequest& request) {
  v1::ListTrialsResponse response;
  if (absl::Status s = Call(&v1::Ogive::Stub::ListTrials, request, &response); !s.ok()) return s;
  return response;
}

absl::StatusOr<std::vector<v1::Trial>> Client::ListAllTrials(const std::string& campaign, v1::TrialState state) {
  std::vector<v1::Trial> all;
  v1::ListTrialsRequest request;
  request.set_campaign(campaign);
  request.set_state(state);
  request.set_page_size(kPageSize);
  while (true) {
    absl::StatusOr<v1::ListTrialsResponse> page = ListTrials(request);
    if (!page.ok()) return page.status();
    for (const v1::Trial& t : page->trials()) all.push_back(t);
    if (page->next_page_token().empty()) return all;
    request.set_page_token(page->next_page_token());
  }
}

absl::StatusOr<v1::ListGenerationsResponse> Client::ListGenerations(const v1::ListGenerationsRequest& request) {
  v1::ListGenerationsResponse response;
  if (absl::Status s = Call(&v1::Ogive::Stub::ListGenerations, request, &response); !s.ok()) return s;
  return response;
}

absl::StatusOr<std::vector<v1::GenerationView>> Client::ListAllGenerations(const std::string& campaign) {
  std::vector<v1::GenerationView> all;
  v1::ListGenerationsRequest request;
  request.set_campaign(campaign);
  request.set_page_size(kPageSize);
  while (true) {
    absl::StatusOr<v1::ListGenerationsResponse> page = ListGenerations(request);
    if (!page.ok()) return page.status();
    for (const v1::GenerationView& g : page->generations()) all.push_back(g);
    if (page->next_page_token().empty()) return all;
    request.set_page_token(page->next_page_token());
  }
}

absl::StatusOr<v1::CampaignView> Client::SetPhase(const std::string& campaign, v1::PhaseCommand command) {
  v1::SetPhaseRequest request;
  request.set_campaign(campaign);
  request.set_command(command);
  request.set_request_id(NewRequestId());
  v1::CampaignView response;
  if (absl::Status s = Call(&v1::Ogive::Stub::SetPhase, request, &response); !s.ok()) return s;
  return response;
}

absl::Status Client::Watch(const std::string& campaign, const std::function<bool(const v1::CampaignView&)>& on_view) {
  grpc::ClientContext context;
  if (!options_.token.empty()) context.AddMetadata("authorization", "Bearer " + options_.token);
  v1::WatchRequest request;
  request.set_campaign(campaign);
  std::unique_ptr<grpc::ClientReader<v1::CampaignView>> reader = stub_->Watch(&context, request);
  v1::CampaignView view;
  while (reader->Read(&view)) {
    if (!on_view(view)) {
      context.TryCancel();
      break;
    }
  }
  const grpc::Status status = reader->Finish();
  if (status.error_code() == grpc::StatusCode::CANCELLED) return absl::OkStatus();
  return StatusFromGrpc(status);
}

LeaseRenewer::LeaseRenewer(Client* client, std::string campaign, std::vector<int64_t> trials, std::string worker,
                           double lease_seconds, absl::Duration interval) {
  thread_ = std::thread([this, client, campaign = std::move(campaign), trials = std::move(trials),
                         worker = std::move(worker), lease_seconds, interval] {
    while (!stop_.WaitForNotificationWithTimeout(interval)) {
      const absl::Status renewed = client->Renew(campaign, trials, worker, lease_seconds, &cancellation_).status();
      if (renewed.ok()) {
        ++renewals_;
        continue;
      }
      ++failures_;
      // A lease that can never be renewed again: stop asking.
      if (HasReason(renewed, reason::kLeaseHeldByOther) || HasReason(renewed, reason::kTrialNotFound) ||
          HasReason(renewed, reason::kTrialAlreadyReported) || HasReason(renewed, reason::kCampaignNotFound)) {
        gave_up_ = true;
        return;
      }
    }
  });
}

LeaseRenewer::~LeaseRenewer() {
  cancellation_.Cancel();
  stop_.Notify();
  thread_.join();
}

void Cancellation::Cancel() {
  absl::MutexLock lock(&mu_);
  cancelled_ = true;
  if (attempt_ != nullptr) attempt_->TryCancel();
}

bool Cancellation::cancelled() const {
  absl::MutexLock lock(&mu_);
  return cancelled_;
}

bool Cancellation::Enter(grpc::ClientContext* context) {
  absl::MutexLock lock(&mu_);
  if (cancelled_) return false;
  attempt_ = context;
  return true;
}

void Cancellation::Leave() {
  absl::MutexLock lock(&mu_);
  attempt_ = nullptr;
}

}  // namespace ogive::client
