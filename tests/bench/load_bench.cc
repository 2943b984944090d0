// ogive-bench-load: N client threads, each with its own channel, loop Ask(1) + Tell against one ogived
// on loopback for T seconds; in the same run the same harness calls the health service's Check RPC as
// a no-op baseline. Prints one JSON object with one result per N. Every call (ask, tell and the
// baseline's) goes through gRPC's callback API and is waited for on its client thread (CallAndWait).
// Each client's channel is connected before the clock starts, and each phase begins with a warm-up
// (1 s by default) whose calls are made but not counted: the first calls on fresh connections and a
// fresh server are slower for reasons of their own (common practice in load benchmarks); the
// measured T seconds and the CPU times below start when the warm-up ends.
//
// p50_ms, p99_ms and max_ms are per ask+tell pair (what one worker waits per trial); ask_p99_ms and
// tell_p99_ms per call.
//
// ratio = (ask+tell pairs per second) / (baseline calls per second / 2): how close a durable ask+tell
// pair (every tell committed with synchronous=FULL) comes to two calls that do nothing.
//
// server_cpu_us_per_pair and client_cpu_us_per_pair: CPU time (user + system, from /proc) that ogived
// and this harness used during the ask+tell phase, per pair; steadier than rates on a shared machine.
// The server's is 0 with --server (another machine's process).
//
// The campaign has `--dimension` reals in [-5, 5] (4 by default) and the default design otherwise (so the
// ranking model is on in n <= 10). Clients report uniform random scores by default, which keep the
// campaign searching however long the run but never let the model earn trust; `--objective ellipsoid`
// reports a separable ellipsoid of the values (condition 10^3), on which the model soon orders cohorts
// well and the engine does all its model work (refits, model-ranked updates, screened picks).
// `--prefill K` first stores K ask+tell pairs from one client, unmeasured (the issue's "Ask with 2000
// stored trials").
//
// Usage: ogive-bench-load --ogived PATH [--seconds T] [--warmup W] [--clients 1,16,64,256] [--no-baseline]
//                         [--dimension N] [--objective random|ellipsoid] [--prefill K] [--model auto|off]
// (--no-baseline skips the health Check phase, for profiling the server's ask+tell path alone; it
// prints baseline_calls_per_s and ratio as 0.)
#include <arpa/inet.h>
#include <netinet/in.h>
#include <signal.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <string>
#include <random>
#include <thread>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "client/ogive_client.h"
#include "grpc/health/v1/health.grpc.pb.h"
#include "grpcpp/grpcpp.h"

namespace {

using Clock = std::chrono::steady_clock;

int FreePort() {
  // Let the kernel pick: bind to port 0, read it back, close. A race with another process taking the
  // port in between is possible but harmless for a benchmark (ogived would fail to start, loudly).
  const int fd = socket(AF_INET, SOCK_STREAM, 0);
  if (fd < 0) return 0;
  sockaddr_in address{};
  address.sin_family = AF_INET;
  address.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  address.sin_port = 0;
  socklen_t length = sizeof address;
  int port = 0;
  if (bind(fd, reinterpret_cast<sockaddr*>(&address), sizeof address) == 0 &&
      getsockname(fd, reinterpret_cast<sockaddr*>(&address), &length) == 0) {
    port = ntohs(address.sin_port);
  }
  close(fd);
  return port;
}

struct Measurement {
  long pairs = 0;  // ask+tell pairs begun after the warm-up and completed
  double pairs_per_s = 0;
  double p50_ms = 0, p99_ms = 0, max_ms = 0;  // per ask+tell pair
  double ask_p99_ms = 0, tell_p99_ms = 0;     // per call
  long errors = 0;
  double server_cpu_s = 0, client_cpu_s = 0;  // during the measured part
};

// CPU seconds (user + system) used so far by process `pid`, from /proc; 0 when it cannot be read.
double ProcessCpuSeconds(pid_t pid) {
  FILE* f = std::fopen(absl::StrCat("/proc/", pid, "/stat").c_str(), "r");
  if (f == nullptr) return 0;
  char buffer[1024];
  const size_t n = std::fread(buffer, 1, sizeof(buffer) - 1, f);
  std::fclose(f);
  buffer[n] = '\0';
  // Fields after the command name (which may hold spaces) start past its closing parenthesis; utime
  // and stime are fields 14 and 15 of proc(5), the 12th and 13th after it.
  const char* p = std::strrchr(buffer, ')');
  if (p == nullptr) return 0;
  std::vector<std::string> fields = absl::StrSplit(p + 2, ' ');
  double utime = 0, stime = 0;
  if (fields.size() < 13 || !absl::SimpleAtod(fields[11], &utime) || !absl::SimpleAtod(fields[12], &stime)) return 0;
  return (utime + stime) / static_cast<double>(sysconf(_SC_CLK_TCK));
}

// One unary call through gRPC's callback API, waited for on the calling thread: `start(context,
// on_done)` starts it. The harness shares the server's two cores, so its own cost per call matters:
// measured in alternating runs, the callback API costs the harness about a fifth less CPU per call
// than the synchronous one (which makes a completion queue per call), leaving that to the server.
template <typename Start>
grpc::Status CallAndWait(Start start) {
  grpc::ClientContext context;
  context.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
  absl::Notification done;
  grpc::Status status;
  start(&context, [&](grpc::Status s) {
    status = std::move(s);
    done.Notify();
  });
  done.WaitForNotification();
  return status;
}

// Client `c`'s channel, connected before it is returned (waited for, at most 10 s): the timed loops
// measure calls on an open connection, not the TCP and HTTP/2 set-up that a channel does on its first
// call (about 60 ms when all clients connect at once here).
std::shared_ptr<grpc::Channel> ConnectedChannel(const std::string& target, int c) {
  grpc::ChannelArguments args;
  args.SetInt("ogive.client", c);  // distinct arguments: a channel (and connection) of its own
  args.SetInt(GRPC_ARG_ENABLE_CHANNELZ, 0);  // as the ogive client library (nobody reads it)
  std::shared_ptr<grpc::Channel> channel = grpc::CreateCustomChannel(target, grpc::InsecureChannelCredentials(), args);
  channel->WaitForConnected(std::chrono::system_clock::now() + std::chrono::seconds(10));
  return channel;
}

double Percentile(std::vector<double>& v, double q) {
  if (v.empty()) return 0;
  const size_t k = std::min(v.size() - 1, static_cast<size_t>(q * (v.size() - 1) + 0.5));
  std::nth_element(v.begin(), v.begin() + k, v.end());
  return v[k];
}

// When a phase's measured part begins (after the warm-up) and when it ends.
struct Schedule {
  Clock::time_point measured_from, end;
  static Schedule After(double warmup, double seconds) {
    const auto from =
        Clock::now() + std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(warmup));
    return {from, from + std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(seconds))};
  }
};

// What the clients report for a trial.
enum class Objective { kRandom, kEllipsoid };

// The separable ellipsoid sum_j 10^(3 j / (n - 1)) (x_j - 1)^2 of the trial's reals (BBOB f2's shape at
// a milder condition, so that a campaign of a few thousand trials is still moving).
double Ellipsoid(const ogive::v1::Candidate& candidate) {
  std::vector<std::pair<std::string, double>> reals;
  for (const auto& [name, value] : candidate.values()) reals.emplace_back(name, value.real());
  std::sort(reals.begin(), reals.end());
  const int n = static_cast<int>(reals.size());
  double f = 0;
  for (int j = 0; j < n; ++j) {
    const double d = reals[j].second - 1;
    f += std::pow(10.0, n > 1 ? 3.0 * j / (n - 1) : 0.0) * d * d;
  }
  return f;
}

// Each client: Ask(1), Tell(score) until the end, or until it has made `pairs_per_client` pairs when
// that is positive; latency per pair begun after the warm-up. CPU times of `server` (0 when not ours)
// and of this process are taken over the measured part.
Measurement RunAskTell(const std::string& target, const std::string& campaign, int clients, double warmup,
                       double seconds, pid_t server, Objective objective, long pairs_per_client = 0) {
  std::vector<std::vector<double>> latencies(clients), ask_latencies(clients), tell_latencies(clients);
  std::vector<long> errors(clients, 0);
  std::atomic<bool> go{false};
  Schedule schedule;
  std::vector<std::thread> threads;
  for (int c = 0; c < clients; ++c) {
    threads.emplace_back([&, c] {
      std::unique_ptr<ogive::v1::Ogive::Stub> stub = ogive::v1::Ogive::NewStub(ConnectedChannel(target, c));
      while (!go) std::this_thread::yield();
      const std::string worker = absl::StrCat("bench-", c);
      std::mt19937_64 rng(c + 1);
      long made = 0;
      // A client stops after kMaxErrors failed calls (the server is gone, or refuses everything):
      // a prefill has no deadline of its own.
      constexpr long kMaxErrors = 100;
      while (Clock::now() < schedule.end && (pairs_per_client <= 0 || made < pairs_per_client) &&
             errors[c] < kMaxErrors) {
        const auto start = Clock::now();
        ogive::v1::AskRequest ask;
        ask.set_campaign(campaign);
        ask.set_count(1);
        ask.set_worker(worker);
        ask.set_lease_seconds(600);
        ask.set_request_id(absl::StrCat(worker, "-", rng()));  // as a worker sends it, for safe retries
        ogive::v1::AskResponse asked;
        const grpc::Status ask_status = CallAndWait(
            [&](grpc::ClientContext* context, auto done) { stub->async()->Ask(context, &ask, &asked, std::move(done)); });
        const auto asked_at = Clock::now();
        if (!ask_status.ok() || asked.trials_size() != 1) {
          if (errors[c]++ == 0) std::fprintf(stderr, "client %d: ask: %s\n", c, ask_status.error_message().c_str());
          continue;
        }
        ogive::v1::TellRequest tell;
        tell.set_campaign(campaign);
        tell.set_worker(worker);
        ogive::v1::Report& report = *tell.add_reports();
        report.set_trial(asked.trials(0).number());
        // Random scores keep the campaign searching (it never converges and ends) however long the run.
        report.mutable_outcome()->set_score(objective == Objective::kEllipsoid
                                                ? Ellipsoid(asked.trials(0).candidate())
                                                : static_cast<double>(rng() >> 11) * 0x1.0p-53);
        ogive::v1::TellResponse told;
        const grpc::Status tell_status = CallAndWait(
            [&](grpc::ClientContext* context, auto done) { stub->async()->Tell(context, &tell, &told, std::move(done)); });
        if (!tell_status.ok() || told.results_size() != 1 || told.results(0).code() != 0) {
          if (errors[c]++ == 0) {
            std::fprintf(stderr, "client %d: tell: %s %s\n", c, tell_status.error_message().c_str(),
                         told.results_size() > 0 ? told.results(0).message().c_str() : "");
          }
          continue;
        }
        const auto told_at = Clock::now();
        ++made;
        if (start < schedule.measured_from) continue;  // warm-up
        latencies[c].push_back(std::chrono::duration<double, std::milli>(told_at - start).count());
        ask_latencies[c].push_back(std::chrono::duration<double, std::milli>(asked_at - start).count());
        tell_latencies[c].push_back(std::chrono::duration<double, std::milli>(told_at - asked_at).count());
      }
    });
  }
  schedule = Schedule::After(warmup, seconds);
  go = true;
  std::this_thread::sleep_until(schedule.measured_from);
  const double server_cpu_before = server > 0 ? ProcessCpuSeconds(server) : 0;
  const double client_cpu_before = ProcessCpuSeconds(getpid());
  for (auto& t : threads) t.join();
  const double elapsed = std::chrono::duration<double>(Clock::now() - schedule.measured_from).count();
  std::vector<double> all, asks, tells;
  Measurement m;
  m.server_cpu_s = server > 0 ? ProcessCpuSeconds(server) - server_cpu_before : 0;
  m.client_cpu_s = ProcessCpuSeconds(getpid()) - client_cpu_before;
  for (int c = 0; c < clients; ++c) {
    all.insert(all.end(), latencies[c].begin(), latencies[c].end());
    asks.insert(asks.end(), ask_latencies[c].begin(), ask_latencies[c].end());
    tells.insert(tells.end(), tell_latencies[c].begin(), tell_latencies[c].end());
    m.errors += errors[c];
  }
  m.pairs = static_cast<long>(all.size());
  m.pairs_per_s = m.pairs / elapsed;
  m.max_ms = all.empty() ? 0 : *std::max_element(all.begin(), all.end());
  m.p99_ms = Percentile(all, 0.99);
  m.p50_ms = Percentile(all, 0.50);
  m.ask_p99_ms = Percentile(asks, 0.99);
  m.tell_p99_ms = Percentile(tells, 0.99);
  return m;
}

// Each client calls grpc.health.v1.Health/Check until the end; calls begun after the warm-up count.
double RunBaseline(const std::string& target, int clients, double warmup, double seconds) {
  std::vector<long> calls(clients, 0);
  std::atomic<bool> go{false};
  Schedule schedule;
  std::vector<std::thread> threads;
  for (int c = 0; c < clients; ++c) {
    threads.emplace_back([&, c] {
      auto stub = grpc::health::v1::Health::NewStub(ConnectedChannel(target, c));
      while (!go) std::this_thread::yield();
      const grpc::health::v1::HealthCheckRequest request;
      while (Clock::now() < schedule.end) {
        grpc::health::v1::HealthCheckResponse response;
        const auto start = Clock::now();
        // The same callback calls as the ask+tell loop, so that the ratio compares like with like.
        if (CallAndWait([&](grpc::ClientContext* context, auto done) {
              stub->async()->Check(context, &request, &response, std::move(done));
            }).ok() &&
            start >= schedule.measured_from) {
          ++calls[c];
        }
      }
    });
  }
  schedule = Schedule::After(warmup, seconds);
  go = true;
  for (auto& t : threads) t.join();
  const double elapsed = std::chrono::duration<double>(Clock::now() - schedule.measured_from).count();
  long total = 0;
  for (long n : calls) total += n;
  return total / elapsed;
}

}  // namespace

int main(int argc, char** argv) {
  // As in ogived: Debian's Abseil checks lock order on every lock (gRPC's included) unless told not
  // to, which would make the harness, not the server, the bottleneck.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  std::string ogived;
  std::string existing;
  double seconds = 5;
  double warmup = 1;
  std::vector<int> client_counts = {1, 16, 64, 256};
  bool baseline_phase = true;
  int dimension = 4;
  Objective objective = Objective::kRandom;
  long prefill = 0;
  std::string model = "auto";
  bool usage_error = false;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--no-baseline") baseline_phase = false;
    if (arg == "--ogived" && i + 1 < argc) ogived = argv[++i];
    if (arg == "--server" && i + 1 < argc) existing = argv[++i];  // a running server (for profiling)
    if (arg == "--seconds" && i + 1 < argc) seconds = std::atof(argv[++i]);
    if (arg == "--warmup" && i + 1 < argc) warmup = std::max(0.0, std::atof(argv[++i]));
    if (arg == "--dimension" && i + 1 < argc) usage_error |= !absl::SimpleAtoi(argv[++i], &dimension) || dimension < 1;
    if (arg == "--prefill" && i + 1 < argc) usage_error |= !absl::SimpleAtoi(argv[++i], &prefill) || prefill < 0;
    if (arg == "--model" && i + 1 < argc) model = argv[++i];
    if (arg == "--objective" && i + 1 < argc) {
      const std::string name = argv[++i];
      usage_error |= name != "random" && name != "ellipsoid";
      objective = name == "ellipsoid" ? Objective::kEllipsoid : Objective::kRandom;
    }
    if (arg == "--clients" && i + 1 < argc) {
      client_counts.clear();
      for (absl::string_view s : absl::StrSplit(argv[++i], ',')) {
        int n = 0;
        if (absl::SimpleAtoi(s, &n) && n > 0) client_counts.push_back(n);
      }
    }
  }
  if (ogived.empty() == existing.empty() || usage_error || (model != "auto" && model != "off")) {
    std::fprintf(stderr,
                 "usage: ogive-bench-load (--ogived PATH | --server HOST:PORT) [--seconds T] [--warmup W] "
                 "[--clients 1,16,64,256] [--no-baseline] [--dimension N >= 1] [--objective random|ellipsoid] "
                 "[--prefill K >= 0] [--model auto|off]\n");
    return 2;
  }
  char dir_template[] = "/tmp/ogive-bench-load.XXXXXX";
  const std::string dir = mkdtemp(dir_template);
  const std::string target = existing.empty() ? absl::StrCat("127.0.0.1:", FreePort()) : existing;
  const pid_t server = existing.empty() ? fork() : -1;
  if (server == 0) {
    const std::string db = dir + "/load.db";
    const std::string log = dir + "/ogived.log";
    freopen(log.c_str(), "w", stderr);
    // Without tokens: the bench measures the path to a durable commit. (With tokens each call also
    // hashes its token once and scans the token table, microseconds against a commit's fsync.)
    execl(ogived.c_str(), ogived.c_str(), "--db", db.c_str(), "--listen", target.c_str(), "--no-auth", nullptr);
    _exit(127);
  }
  auto client = ogive::client::Client::Connect(target);
  ogive::v1::CampaignDesign design;
  design.set_name("load");
  for (int j = 0; j < dimension; ++j) {
    ogive::v1::Parameter* p = design.add_parameters();
    p->set_name(absl::StrCat("x", j));
    p->mutable_real()->set_low(-5);
    p->mutable_real()->set_high(5);
  }
  design.mutable_objective()->set_direction(ogive::v1::DIRECTION_LOWER_IS_BETTER);
  design.set_seed(1);
  design.set_restarts(true);
  design.set_model(model);
  bool created = false;
  for (int attempt = 0; attempt < 100 && !created; ++attempt) {
    created = client->CreateCampaign(design).ok();
    if (!created) std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  if (!created) {
    std::fprintf(stderr, "ogive-bench-load: could not create the campaign on %s (see %s/ogived.log)\n",
                 target.c_str(), dir.c_str());
    if (server > 0) kill(server, SIGTERM);
    return 1;
  }
  if (prefill > 0) {
    // One client stores the trials the measured phases start from; its timings are not kept.
    const Measurement filled = RunAskTell(target, "load", 1, 0, 1e9, server, objective, prefill);
    if (filled.errors > 0) std::fprintf(stderr, "ogive-bench-load: %ld errors while prefilling\n", filled.errors);
  }
  std::printf("{\n  \"benchmark\": \"ogive-bench-load\",\n  \"seconds\": %g,\n  \"warmup_seconds\": %g,\n"
              "  \"synchronous\": \"FULL\",\n  \"dimension\": %d,\n  \"objective\": \"%s\",\n"
              "  \"model\": \"%s\",\n  \"prefilled_trials\": %ld,\n  \"results\": [",
              seconds, warmup, dimension, objective == Objective::kEllipsoid ? "ellipsoid" : "random", model.c_str(),
              prefill);
  for (size_t k = 0; k < client_counts.size(); ++k) {
    const int n = client_counts[k];
    const Measurement m = RunAskTell(target, "load", n, warmup, seconds, server, objective);
    const double pairs = static_cast<double>(m.pairs);
    const double server_us_per_pair = pairs > 0 ? m.server_cpu_s / pairs * 1e6 : 0;
    const double client_us_per_pair = pairs > 0 ? m.client_cpu_s / pairs * 1e6 : 0;
    const double baseline = baseline_phase ? RunBaseline(target, n, warmup, seconds) : 0;
    std::printf("%s\n    {\"clients\": %d, \"pairs\": %ld, \"asks_per_s\": %.1f, \"tells_per_s\": %.1f, \"p50_ms\": %.3f, "
                "\"p99_ms\": %.3f, \"max_ms\": %.3f, \"ask_p99_ms\": %.3f, \"tell_p99_ms\": %.3f, \"errors\": %ld, "
                "\"baseline_calls_per_s\": %.1f, \"ratio\": %.3f, \"server_cpu_us_per_pair\": %.0f, "
                "\"client_cpu_us_per_pair\": %.0f}",
                k ? "," : "", n, m.pairs, m.pairs_per_s, m.pairs_per_s, m.p50_ms, m.p99_ms, m.max_ms, m.ask_p99_ms,
                m.tell_p99_ms, m.errors, baseline,
                baseline > 0 ? m.pairs_per_s / (baseline / 2) : 0, server_us_per_pair, client_us_per_pair);
    std::fflush(stdout);
  }
  std::printf("\n  ]\n}\n");
  if (server < 0) {
    std::filesystem::remove_all(dir);
    return 0;
  }
  kill(server, SIGTERM);
  int status = 0;
  waitpid(server, &status, 0);
  const bool clean_stop = WIFEXITED(status) && WEXITSTATUS(status) == 0;
  // The database and log go with a clean stop; after a failed one the log is kept for a look.
  if (clean_stop) std::filesystem::remove_all(dir);
  return clean_stop ? 0 : 1;
}
