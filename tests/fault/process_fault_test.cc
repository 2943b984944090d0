// Faults around a real ogived process (tests/support/ogived_process.h) on loopback:
// - workers (`ogive work`) SIGKILLed mid-trial: their trials lapse once the lease runs out, late
//   reports are still stored and marked late; duplicate and out-of-order tells are applied once;
//   all of it survives a SIGKILL of the server;
// - a full disk, for real (a small tmpfs filled up; skipped where mounting is not allowed — the
//   same path beneath SQLite is covered by commit_failure_test): writes fail with UNAVAILABLE naming
//   the database, reads go on, a killed server restarts and serves reads, and writes work again
//   once space is freed; the file passes integrity_check throughout. A tmpfs rather than SQLite's
//   PRAGMA max_page_count: the kernel's ENOSPC then reaches SQLite's unix VFS as on a real disk
//   (max_page_count would only exercise a page-count check SQLite makes before any I/O);
// - a database file ogived may not write (run as uid 65534 on a root-owned file): a clear refusal
//   to start; with --read-only it serves reads and refuses writes; the file is left unchanged.
//
//   process_fault_test --ogived PATH --ogive PATH [gtest flags]
//
// Every wait is bounded; every child process is killed when the test ends.
#include <fcntl.h>
#include <signal.h>
#include <sys/mount.h>
#include <sys/prctl.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <functional>
#include <map>
#include <memory>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "client/ogive_client.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/fault/durability_checks.h"
#include "tests/support/db_inspector.h"
#include "tests/support/ogived_process.h"

namespace ogive::testing {
namespace {

using ::testing::AllOf;
using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::IsEmpty;

std::string g_ogived;  // from the command line
std::string g_ogive;

// A child process of the test (an `ogive work` worker), killed when the test ends. Its TMPDIR is
// `tmpdir`, so that the candidate files a SIGKILLed worker leaves behind go with the test's directory.
class Child {
 public:
  Child(std::vector<std::string> args, const std::string& log, const std::string& tmpdir) {
    std::vector<char*> argv;
    for (std::string& a : args) argv.push_back(a.data());
    argv.push_back(nullptr);
    std::vector<std::string> env_strings = {"TMPDIR=" + tmpdir};
    for (char** e = environ; *e != nullptr; ++e) {
      if (std::strncmp(*e, "TMPDIR=", 7) != 0) env_strings.emplace_back(*e);
    }
    std::vector<char*> envp;
    for (std::string& e : env_strings) envp.push_back(e.data());
    envp.push_back(nullptr);
    const int log_fd = open(log.c_str(), O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
    const pid_t parent = getpid();
    pid_ = fork();
    if (pid_ == 0) {
      prctl(PR_SET_PDEATHSIG, SIGKILL);
      if (getppid() != parent) _exit(127);
      dup2(log_fd, STDOUT_FILENO);
      dup2(log_fd, STDERR_FILENO);
      execve(argv[0], argv.data(), envp.data());
      _exit(127);
    }
    close(log_fd);
  }
  ~Child() { Kill(SIGKILL); }
  // Sends `signal` and reaps the child; its wait status.
  int Kill(int signal) {
    if (pid_ <= 0) return -1;
    kill(pid_, signal);
    int wstatus = 0;
    waitpid(pid_, &wstatus, 0);
    pid_ = -1;
    return wstatus;
  }

 private:
  pid_t pid_ = -1;
};

// Polls `condition` every 50 ms; false if it still fails after `timeout`.
bool WaitFor(const std::function<bool()>& condition, absl::Duration timeout) {
  const absl::Time deadline = absl::Now() + timeout;
  while (!condition()) {
    if (absl::Now() > deadline) return false;
    absl::SleepFor(absl::Milliseconds(50));
  }
  return true;
}

v1::CampaignDesign Design(const std::string& name, double lease_seconds) {
  v1::CampaignDesign design;
  design.set_name(name);
  for (const char* p : {"x0", "x1"}) {
    v1::Parameter* parameter = design.add_parameters();
    parameter->set_name(p);
    parameter->mutable_real()->set_low(-5);
    parameter->mutable_real()->set_high(5);
  }
  design.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  design.set_population_size(4);
  design.set_seed(11);
  design.set_lease_seconds(lease_seconds);
  return design;
}

v1::Report Score(int64_t trial, double score) {
  v1::Report report;
  report.set_trial(trial);
  report.mutable_outcome()->set_score(score);
  return report;
}

// Reads the campaign from the file (integrity_check included) and checks it against `journal`.
StoredCampaignState CheckFile(const std::string& db, const std::string& campaign,
                           const std::map<int64_t, double>& journal) {
  absl::StatusOr<DbInspector> inspector = DbInspector::Open(db);
  EXPECT_TRUE(inspector.ok()) << inspector.status();
  if (!inspector.ok()) return {};
  absl::StatusOr<std::string> integrity = inspector->IntegrityCheck();
  EXPECT_TRUE(integrity.ok() && *integrity == "ok")
      << (integrity.ok() ? *integrity : integrity.status().ToString());
  absl::StatusOr<StoredCampaignState> stored = inspector->ReadCampaign(campaign);
  EXPECT_TRUE(stored.ok()) << stored.status();
  if (!stored.ok()) return {};
  EXPECT_THAT(CheckStoredCampaign(*stored, journal), IsEmpty());
  return *std::move(stored);
}

class ProcessFaultTest : public ::testing::Test {
 protected:
  void SetUp() override {
    std::string pattern = ::testing::TempDir() + "ogive_process_fault_XXXXXX";
    ASSERT_NE(mkdtemp(pattern.data()), nullptr);
    dir_ = pattern;
  }
  void TearDown() override {
    server_.reset();  // kills a server still running
    if (mounted_) umount2(mount_.c_str(), MNT_DETACH);
    std::error_code error;
    std::filesystem::remove_all(dir_, error);
  }

  // Creates the server object (not started) on `db`.
  OgivedProcess& Server(const std::string& db, std::vector<std::string> extra = {}, int uid = -1) {
    OgivedOptions options;
    options.binary = g_ogived;
    options.db = db;
    options.log_path = dir_ + "/ogived.log";
    options.extra_flags = {"--sweep-interval", "0.2"};
    options.extra_flags.insert(options.extra_flags.end(), extra.begin(), extra.end());
    options.uid = uid;
    options.gid = uid;
    if (server_ != nullptr) options.port = server_->options().port;  // the same address again
    server_ = std::make_unique<OgivedProcess>(options);
    return *server_;
  }

  std::string dir_;
  std::string mount_;
  bool mounted_ = false;
  std::unique_ptr<OgivedProcess> server_;
};

TEST_F(ProcessFaultTest, KilledWorkersTrialsLapseAndLateDuplicateAndOutOfOrderTellsApplyOnce) {
  const std::string db = dir_ + "/ogive.db";
  OgivedProcess& server = Server(db);
  ASSERT_TRUE(server.Start().ok());
  std::unique_ptr<client::Client> client = server.NewClient();
  ASSERT_TRUE(client->CreateCampaign(Design("lapse", 30)).ok());

  // Three `ogive work` workers whose program takes 0.6 s and prints x0 as the score; leases of
  // 1 s, renewed while the program runs.
  std::vector<std::unique_ptr<Child>> workers;
  for (int i = 0; i < 3; ++i) {
    std::vector<std::string> args = {g_ogive};
    for (const std::string& f : server.CliFlags()) args.push_back(f);
    for (const char* a : {"work", "lapse", "--parallel", "2", "--lease", "1", "--worker"}) args.push_back(a);
    args.push_back(absl::StrCat("w", i));
    for (const char* a : {"--", "/bin/sh", "-c", "sleep 0.6; echo \"$OGIVE_X0\""}) args.push_back(a);
    workers.push_back(std::make_unique<Child>(args, absl::StrCat(dir_, "/w", i, ".log"), dir_));
  }
  auto trials = [&](v1::TrialState state) {
    absl::StatusOr<std::vector<v1::Trial>> all = client->ListAllTrials("lapse", state);
    EXPECT_TRUE(all.ok()) << all.status();
    return all.ok() ? *all : std::vector<v1::Trial>();
  };
  auto held_by = [&](const std::string& worker) {
    std::set<int64_t> held;
    for (const v1::Trial& t : trials(v1::TRIAL_STATE_LEASED)) {
      if (t.worker() == worker) held.insert(t.number());
    }
    return held;
  };
  ASSERT_TRUE(WaitFor([&] { return trials(v1::TRIAL_STATE_REPORTED).size() >= 6; }, absl::Seconds(30)))
      << "the workers report nothing";

  // w0 dies mid-trial: whatever it holds now was leased and never reported.
  ASSERT_TRUE(WaitFor([&] { return !held_by("w0").empty(); }, absl::Seconds(10)));
  workers[0]->Kill(SIGKILL);
  const std::set<int64_t> orphaned = held_by("w0");
  ASSERT_FALSE(orphaned.empty());
  // Its leases run out 1 s after their last renewal, and the server's sweeper lapses them.
  ASSERT_TRUE(WaitFor(
      [&] {
        std::set<int64_t> lapsed;
        for (const v1::Trial& t : trials(v1::TRIAL_STATE_LAPSED)) lapsed.insert(t.number());
        return std::includes(lapsed.begin(), lapsed.end(), orphaned.begin(), orphaned.end());
      },
      absl::Seconds(10)))
      << "the trials of the killed worker did not lapse";
  // The other workers stop cleanly (their running trials are reported void).
  for (size_t i = 1; i < workers.size(); ++i) {
    const int wstatus = workers[i]->Kill(SIGTERM);
    EXPECT_TRUE(WIFEXITED(wstatus) && WEXITSTATUS(wstatus) == 143) << "wait status " << wstatus;
  }

  AckJournal journal;
  auto tell = [&](std::vector<v1::Report> reports) {
    absl::StatusOr<v1::TellResponse> told = client->Tell("lapse", reports, "technician");
    EXPECT_TRUE(told.ok()) << told.status();
    if (!told.ok()) return v1::TellResponse();
    for (int i = 0; i < told->results_size(); ++i) {
      if (told->results(i).code() == 0) journal.Add(reports[i].trial(), reports[i].outcome().score());
    }
    return *told;
  };
  // A late report of an orphaned trial is stored and marked late; the same again is a duplicate;
  // a different outcome is refused.
  const int64_t late = *orphaned.begin();
  v1::TellResponse told = tell({Score(late, 1.5)});
  ASSERT_EQ(told.results_size(), 1);
  EXPECT_EQ(told.results(0).code(), 0) << told.results(0).message();
  EXPECT_TRUE(told.results(0).late());
  EXPECT_FALSE(told.results(0).duplicate());
  told = tell({Score(late, 1.5)});
  EXPECT_TRUE(told.results(0).duplicate());
  EXPECT_TRUE(told.results(0).late());
  told = tell({Score(late, 2.5)});
  EXPECT_EQ(told.results(0).code(), static_cast<int>(absl::StatusCode::kAlreadyExists));

  // Out of order: three trials told last first, then two of them again in one call.
  absl::StatusOr<v1::AskResponse> asked = client->Ask("lapse", 3, "technician");
  ASSERT_TRUE(asked.ok()) << asked.status();
  ASSERT_EQ(asked->trials_size(), 3);
  const int64_t a = asked->trials(0).number(), b = asked->trials(1).number(), c = asked->trials(2).number();
  for (int64_t n : {c, a, b}) EXPECT_EQ(tell({Score(n, 0.25 * static_cast<double>(n))}).results(0).code(), 0);
  told = tell({Score(b, 0.25 * static_cast<double>(b)), Score(a, 0.25 * static_cast<double>(a))});
  ASSERT_EQ(told.results_size(), 2);
  EXPECT_TRUE(told.results(0).duplicate() && told.results(1).duplicate());

  // All of it survives a crash of the server.
  server.Crash();
  const StoredCampaignState stored = CheckFile(db, "lapse", journal.Snapshot());
  ASSERT_EQ(stored.trials.count(late), 1u);
  EXPECT_TRUE(stored.trials.at(late).late());
  EXPECT_EQ(stored.trials.at(late).state(), v1::TRIAL_STATE_REPORTED);
  for (int64_t n : orphaned) {
    if (n != late) {
      EXPECT_EQ(stored.trials.at(n).state(), v1::TRIAL_STATE_LAPSED) << "trial " << n;
    }
  }
  ASSERT_TRUE(server.Start().ok());
  absl::StatusOr<v1::CampaignView> view = client->GetCampaign("lapse");
  absl::StatusOr<std::vector<v1::Trial>> all = client->ListAllTrials("lapse");
  ASSERT_TRUE(view.ok() && all.ok());
  EXPECT_THAT(CheckServedEqualsStored(*view, *all, stored), IsEmpty());
  EXPECT_GE(view->status().late(), 1);
  const int wstatus = server.Kill(SIGTERM);
  EXPECT_TRUE(WIFEXITED(wstatus) && WEXITSTATUS(wstatus) == 0) << "wait status " << wstatus;
}

TEST_F(ProcessFaultTest, AFullDiskFailsWritesClearlyKeepsReadsAndRecoversWhenSpaceReturns) {
  mount_ = dir_ + "/small";
  ASSERT_EQ(mkdir(mount_.c_str(), 0755), 0);
  if (mount("tmpfs", mount_.c_str(), "tmpfs", 0, "size=4m") != 0) {
    GTEST_SKIP() << "cannot mount a tmpfs here (" << std::strerror(errno)
                 << "); commit_failure_test covers a full disk beneath SQLite";
  }
  mounted_ = true;
  const std::string db = mount_ + "/ogive.db";
  OgivedProcess& server = Server(db);
  ASSERT_TRUE(server.Start().ok());
  client::ClientOptions options = server.ClientOptions();
  options.max_attempts = 2;  // see the failure at once
  std::unique_ptr<client::Client> client = server.NewClient(options);
  ASSERT_TRUE(client->CreateCampaign(Design("full", 600)).ok());
  absl::StatusOr<v1::AskResponse> asked = client->Ask("full", 1000, "kiln-1");
  ASSERT_TRUE(asked.ok()) << asked.status();

  AckJournal journal;
  int next = 0;  // index into asked->trials()
  auto tell_next = [&]() -> absl::Status {
    const v1::Trial& t = asked->trials(next);
    const double score = 0.5 + static_cast<double>(t.number());
    absl::StatusOr<v1::TellResponse> told = client->Tell("full", {Score(t.number(), score)}, "kiln-1");
    if (!told.ok()) return told.status();
    EXPECT_EQ(told->results(0).code(), 0);
    journal.Add(t.number(), score);
    ++next;
    return absl::OkStatus();
  };
  for (int i = 0; i < 20; ++i) ASSERT_TRUE(tell_next().ok());

  // Fill the file system.
  const std::string filler = mount_ + "/filler";
  {
    const int fd = open(filler.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    ASSERT_GE(fd, 0);
    const std::string chunk(64 << 10, 'x');
    while (write(fd, chunk.data(), chunk.size()) > 0) {
    }
    EXPECT_EQ(errno, ENOSPC);
    close(fd);
  }
  // The log may still have room from earlier frames: tell until a commit needs new space.
  absl::Status failed;
  for (int i = 0; i < 400 && failed.ok(); ++i) failed = tell_next();
  ASSERT_FALSE(failed.ok()) << "400 tells went through on a full disk";
  EXPECT_EQ(failed.code(), absl::StatusCode::kUnavailable) << failed;
  EXPECT_THAT(std::string(failed.message()), AllOf(HasSubstr(db), HasSubstr("full")));
  std::printf("the disk was full after %d tells: %s\n", next, std::string(failed.message()).c_str());
  absl::StatusOr<v1::AskResponse> refused = client->Ask("full", 1, "kiln-1");
  EXPECT_EQ(refused.status().code(), absl::StatusCode::kUnavailable);

  // Reads go on, the file is sound, everything acknowledged is there — also after a crash.
  auto check_reads = [&](const std::string& when) {
    SCOPED_TRACE(when);
    absl::StatusOr<v1::CampaignView> view = client->GetCampaign("full");
    absl::StatusOr<std::vector<v1::Trial>> trials = client->ListAllTrials("full");
    ASSERT_TRUE(view.ok()) << view.status();
    ASSERT_TRUE(trials.ok()) << trials.status();
    const StoredCampaignState stored = CheckFile(db, "full", journal.Snapshot());
    EXPECT_THAT(CheckServedEqualsStored(*view, *trials, stored), IsEmpty());
    EXPECT_EQ(view->status().reported(), journal.size());
  };
  check_reads("full disk");
  server.Crash();
  ASSERT_TRUE(server.Start().ok()) << "ogived does not start on a full disk";
  check_reads("full disk, after a crash and a restart");
  EXPECT_FALSE(tell_next().ok());

  // Space comes back: writes work again, and a clean stop folds the log into the file.
  ASSERT_EQ(unlink(filler.c_str()), 0);
  ASSERT_TRUE(tell_next().ok());
  ASSERT_TRUE(client->Ask("full", 1, "kiln-1").ok());
  check_reads("space freed");
  const int wstatus = server.Kill(SIGTERM);
  EXPECT_TRUE(WIFEXITED(wstatus) && WEXITSTATUS(wstatus) == 0) << "wait status " << wstatus;
  CheckFile(db, "full", journal.Snapshot());
}

std::string FileBytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream bytes;
  bytes << in.rdbuf();
  return bytes.str();
}

TEST_F(ProcessFaultTest, AReadOnlyDatabaseFileIsRefusedClearlyOrServedReadOnly) {
  if (geteuid() != 0) GTEST_SKIP() << "needs root to run ogived as another user";
  const std::string db = dir_ + "/ogive.db";
  AckJournal journal;
  {
    OgivedProcess& server = Server(db);
    ASSERT_TRUE(server.Start().ok());
    std::unique_ptr<client::Client> client = server.NewClient();
    ASSERT_TRUE(client->CreateCampaign(Design("frozen", 600)).ok());
    absl::StatusOr<v1::AskResponse> asked = client->Ask("frozen", 6, "kiln-1");
    ASSERT_TRUE(asked.ok());
    for (int i = 0; i < 5; ++i) {
      const int64_t n = asked->trials(i).number();
      ASSERT_TRUE(client->Tell("frozen", {Score(n, 1.0 + static_cast<double>(n))}, "kiln-1").ok());
      journal.Add(n, 1.0 + static_cast<double>(n));
    }
    ASSERT_EQ(server.Kill(SIGTERM), 0);
  }
  // Owned by root, writable by nobody else; the directory stays open to all, as /tmp is.
  ASSERT_EQ(chmod(db.c_str(), 0644), 0);
  ASSERT_EQ(chmod(dir_.c_str(), 0777), 0);
  const std::string bytes = FileBytes(db);

  // Run as nobody, ogived refuses to start, saying which file and why.
  {
    OgivedProcess& server = Server(db, {}, 65534);
    ASSERT_TRUE(server.Spawn().ok());
    const int wstatus = server.WaitForExit(absl::Seconds(20));
    ASSERT_NE(wstatus, -1) << "ogived did not exit";
    EXPECT_TRUE(WIFEXITED(wstatus) && WEXITSTATUS(wstatus) == 2) << "wait status " << wstatus;
    EXPECT_THAT(server.LogTail(3), AllOf(HasSubstr(db), HasSubstr("not writable"), HasSubstr("--read-only")));
  }
  // With --read-only it serves reads and refuses writes, naming the database.
  {
    OgivedProcess& server = Server(db, {"--read-only"}, 65534);
    ASSERT_TRUE(server.Start().ok());
    std::unique_ptr<client::Client> client = server.NewClient();
    absl::StatusOr<v1::CampaignView> view = client->GetCampaign("frozen");
    absl::StatusOr<std::vector<v1::Trial>> trials = client->ListAllTrials("frozen");
    ASSERT_TRUE(view.ok()) << view.status();
    ASSERT_TRUE(trials.ok()) << trials.status();
    const StoredCampaignState stored = CheckFile(db, "frozen", journal.Snapshot());
    EXPECT_THAT(CheckServedEqualsStored(*view, *trials, stored), IsEmpty());
    absl::StatusOr<v1::AskResponse> ask = client->Ask("frozen", 1, "kiln-1");
    EXPECT_EQ(ask.status().code(), absl::StatusCode::kFailedPrecondition) << ask.status();
    EXPECT_THAT(std::string(ask.status().message()), AllOf(HasSubstr(db), HasSubstr("read-only")));
    absl::StatusOr<v1::TellResponse> tell = client->Tell("frozen", {Score(6, 3.0)}, "kiln-1");
    EXPECT_EQ(tell.status().code(), absl::StatusCode::kFailedPrecondition) << tell.status();
    absl::StatusOr<v1::CampaignView> again = client->GetCampaign("frozen");
    ASSERT_TRUE(again.ok());
    EXPECT_EQ(again->status().reported(), 5);
    // A connected but idle client does not hold up a clean stop (it used to, for 10 s).
    const absl::Time stop_sent = absl::Now();
    EXPECT_EQ(server.Kill(SIGTERM), 0);
    EXPECT_LT(absl::Now() - stop_sent, absl::Seconds(3));
  }
  EXPECT_TRUE(FileBytes(db) == bytes) << "the read-only file changed";
  CheckFile(db, "frozen", journal.Snapshot());
}

}  // namespace
}  // namespace ogive::testing

int main(int argc, char** argv) {
  ::testing::InitGoogleTest(&argc, argv);
  for (int i = 1; i + 1 < argc; ++i) {
    const std::string flag = argv[i];
    if (flag == "--ogived") ogive::testing::g_ogived = argv[++i];
    if (flag == "--ogive") ogive::testing::g_ogive = argv[++i];
  }
  if (ogive::testing::g_ogived.empty() || ogive::testing::g_ogive.empty()) {
    std::fprintf(stderr, "usage: process_fault_test --ogived PATH --ogive PATH [gtest flags]\n");
    return 2;
  }
  signal(SIGPIPE, SIG_IGN);
  return RUN_ALL_TESTS();
}
