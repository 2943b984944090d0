// Tests of SqliteStore on temporary files: round trips, replacement and appends, pagination, group
// commit, error isolation inside a batch, durability settings, migrations, damaged and read-only
// files. A separate raw sqlite3 connection inspects the file, or holds its write lock to make the
// writer wait (it never writes while a store is open on the file).
#include "storage/sqlite_store.h"

#include <atomic>
#include <grp.h>
#include <sqlite3.h>
#include <stdlib.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <functional>
#include <limits>
#include <map>
#include <memory>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "gtest/gtest.h"
#include "storage/schema.h"
#include "storage/sqlite_connection.h"
#include "storage/store_test_support.h"

namespace ogive::storage {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::Pair;
using ::testing::SizeIs;
using namespace ::ogive::storage::test_support;  // NOLINT(build/namespaces): test helpers


TEST_F(SqliteStoreTest, CreateAndLoadRoundTripsEveryByte) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const v1::CampaignDesign design = MakeDesign("alpha");
  const v1::EngineState created_engine = MakeEngine(0.5);
  absl::StatusOr<int64_t> alpha = store->CreateCampaign("alpha", design, created_engine, "req-1");
  ASSERT_THAT(alpha, IsOk());
  v1::EngineState bare_engine = MakeEngine(0.0);
  bare_engine.clear_distribution();
  absl::StatusOr<int64_t> beta =
      store->CreateCampaign("beta", MakeDesign("beta"), bare_engine, "req-2");
  ASSERT_THAT(beta, IsOk());
  EXPECT_GT(*beta, *alpha);

  // Trials out of number order; the engine carries a distribution that must be ignored, and the
  // distribution comes separately.
  CampaignWrite write;
  write.campaign_id = *alpha;
  write.trials = {MakeTrial(3, v1::TRIAL_STATE_VOIDED), MakeTrial(1, v1::TRIAL_STATE_LEASED),
                  MakeTrial(2, v1::TRIAL_STATE_REPORTED, 1.5)};
  v1::EngineState next_engine = MakeEngine(9.0);  // its distribution is ignored
  next_engine.set_next_trial(4);
  next_engine.set_generation(1);
  write.engine = next_engine;
  write.distribution = MakeDistribution(0.75);
  write.generations = {MakeSummary(1)};
  write.ask_request = std::make_pair(std::string("ask-7"), std::vector<int64_t>{1, 2, 3});
  write.events = {MakeEvent("ask", 1, "asked for 3")};
  ASSERT_THAT(store->Commit(write), IsOk());

  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  ASSERT_THAT(*loaded, SizeIs(2));
  const StoredCampaign& a = (*loaded)[0];
  EXPECT_EQ(a.id, *alpha);
  EXPECT_EQ(a.name, "alpha");
  EXPECT_EQ(a.create_request_id, "req-1");
  EXPECT_EQ(Bytes(a.design), Bytes(design));
  v1::EngineState expected_engine = next_engine;
  *expected_engine.mutable_distribution() = MakeDistribution(0.75);
  EXPECT_EQ(Bytes(a.snapshot.engine()), Bytes(expected_engine));
  ASSERT_EQ(a.snapshot.trials_size(), 3);
  for (int i = 0; i < 3; ++i) {
    EXPECT_EQ(a.snapshot.trials(i).number(), i + 1);
  }
  EXPECT_EQ(Bytes(a.snapshot.trials(0)), Bytes(MakeTrial(1, v1::TRIAL_STATE_LEASED)));
  EXPECT_EQ(Bytes(a.snapshot.trials(1)), Bytes(MakeTrial(2, v1::TRIAL_STATE_REPORTED, 1.5)));
  EXPECT_EQ(Bytes(a.snapshot.trials(2)), Bytes(MakeTrial(3, v1::TRIAL_STATE_VOIDED)));
  EXPECT_THAT(a.ask_requests, ElementsAre(Pair("ask-7", ElementsAre(1, 2, 3))));

  // The campaign without commits keeps its initial engine; without a distribution it has none.
  const StoredCampaign& b = (*loaded)[1];
  EXPECT_EQ(b.name, "beta");
  EXPECT_FALSE(b.snapshot.engine().has_distribution());
  EXPECT_EQ(Bytes(b.snapshot.engine()), Bytes(bare_engine));
  EXPECT_EQ(b.snapshot.trials_size(), 0);
  EXPECT_TRUE(b.ask_requests.empty());
}

TEST_F(SqliteStoreTest, CreatedEngineKeepsItsDistribution) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  ASSERT_THAT(*loaded, SizeIs(1));
  EXPECT_EQ((*loaded)[0].id, id);
  EXPECT_EQ(Bytes((*loaded)[0].snapshot.engine()), Bytes(MakeEngine(0.5)));
}

TEST_F(SqliteStoreTest, CommitReplacesTrialsByNumberAndAppendsGenerationsAndEvents) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");

  CampaignWrite ask;
  ask.campaign_id = id;
  ask.trials = {MakeTrial(1, v1::TRIAL_STATE_LEASED), MakeTrial(2, v1::TRIAL_STATE_LEASED)};
  ask.generations = {MakeSummary(1)};
  ask.events = {MakeEvent("ask", 1, "first"), MakeEvent("ask", 2, "second")};
  ASSERT_THAT(store->Commit(ask), IsOk());

  CampaignWrite tell;
  tell.campaign_id = id;
  tell.trials = {MakeTrial(1, v1::TRIAL_STATE_REPORTED, -2.25)};
  tell.engine = MakeEngine(7.0);  // distribution inside is ignored: the stored one stays
  tell.generations = {MakeSummary(2), MakeSummary(3)};
  tell.events = {MakeEvent("tell", 1, "third")};
  ASSERT_THAT(store->Commit(tell), IsOk());

  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  ASSERT_THAT(*loaded, SizeIs(1));
  const v1::CampaignSnapshot& snapshot = (*loaded)[0].snapshot;
  ASSERT_EQ(snapshot.trials_size(), 2);
  EXPECT_EQ(Bytes(snapshot.trials(0)), Bytes(MakeTrial(1, v1::TRIAL_STATE_REPORTED, -2.25)));
  EXPECT_EQ(Bytes(snapshot.trials(1)), Bytes(MakeTrial(2, v1::TRIAL_STATE_LEASED)));
  EXPECT_EQ(Bytes(snapshot.engine()), Bytes(MakeEngine(0.5)))
      << "the engine's own distribution field must not replace the stored distribution";

  absl::StatusOr<TrialPage> reported =
      store->ListTrials(id, v1::TRIAL_STATE_REPORTED, /*after_number=*/0, /*limit=*/10);
  ASSERT_THAT(reported, IsOk());
  ASSERT_THAT(reported->trials, SizeIs(1));
  EXPECT_EQ(reported->trials[0].number(), 1);
  // The score column holds the score of reported trials only (read from outside; no writes).
  {
    RawDb raw(path_);
    EXPECT_EQ(raw.Text("SELECT score FROM trials WHERE number = 1"), "-2.25");
    EXPECT_EQ(raw.Text("SELECT quote(score) FROM trials WHERE number = 2"), "NULL");
  }

  absl::StatusOr<std::vector<v1::GenerationSummary>> generations = store->ListGenerations(id);
  ASSERT_THAT(generations, IsOk());
  ASSERT_THAT(*generations, SizeIs(3));
  for (int64_t g = 1; g <= 3; ++g) {
    EXPECT_EQ(Bytes((*generations)[static_cast<size_t>(g - 1)]), Bytes(MakeSummary(g)));
  }
  // Pages: after generation 1, at most one; then the rest; the default over ListGenerations agrees.
  absl::StatusOr<std::vector<v1::GenerationSummary>> page = store->ListGenerationsAfter(id, 1, 1);
  ASSERT_THAT(page, IsOk());
  ASSERT_THAT(*page, SizeIs(1));
  EXPECT_EQ(Bytes((*page)[0]), Bytes(MakeSummary(2)));
  page = store->ListGenerationsAfter(id, 2, 10);
  ASSERT_THAT(page, IsOk());
  ASSERT_THAT(*page, SizeIs(1));
  EXPECT_EQ((*page)[0].generation(), 3);
  page = store->Store::ListGenerationsAfter(id, 1, 1);
  ASSERT_THAT(page, IsOk());
  ASSERT_THAT(*page, SizeIs(1));
  EXPECT_EQ(Bytes((*page)[0]), Bytes(MakeSummary(2)));
  page = store->ListGenerationsAfter(id, 3, 10);
  ASSERT_THAT(page, IsOk());
  EXPECT_THAT(*page, SizeIs(0));
  EXPECT_THAT(store->ListGenerationsAfter(id, 0, 0), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("limit")));
  EXPECT_THAT(store->ListGenerationsAfter(999, 0, 5), StatusIs(absl::StatusCode::kNotFound, HasSubstr("999")));

  absl::StatusOr<std::vector<Event>> events = store->ListEvents(id, 100);
  ASSERT_THAT(events, IsOk());
  ASSERT_THAT(*events, SizeIs(3));
  EXPECT_EQ((*events)[0].message, "first");
  EXPECT_EQ((*events)[2].message, "third");
  EXPECT_EQ((*events)[2].kind, "tell");
  EXPECT_EQ((*events)[2].trial, 1);
  EXPECT_EQ((*events)[2].worker, "worker-1");
  EXPECT_EQ((*events)[2].at_ns, 5'000'001);
  absl::StatusOr<std::vector<Event>> newest = store->ListEvents(id, 2);
  ASSERT_THAT(newest, IsOk());
  ASSERT_THAT(*newest, SizeIs(2));
  EXPECT_EQ((*newest)[0].message, "second");  // the newest two, oldest first
  EXPECT_EQ((*newest)[1].message, "third");

  // Replacing the distribution alone leaves the engine's other fields.
  CampaignWrite update;
  update.campaign_id = id;
  update.distribution = MakeDistribution(-3.0);
  ASSERT_THAT(store->Commit(update), IsOk());
  loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  v1::EngineState expected = MakeEngine(7.0);
  *expected.mutable_distribution() = MakeDistribution(-3.0);
  EXPECT_EQ(Bytes((*loaded)[0].snapshot.engine()), Bytes(expected));
}

TEST_F(SqliteStoreTest, ListTrialsPagesInNumberOrderAndFiltersByState) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  const int64_t other = Create(*store, "beta");
  CampaignWrite write;
  write.campaign_id = id;
  for (int64_t n = 25; n >= 1; --n) {  // reverse order on purpose
    write.trials.push_back(n % 2 == 0 ? MakeTrial(n, v1::TRIAL_STATE_REPORTED, 0.5 * n)
                                      : MakeTrial(n, v1::TRIAL_STATE_LEASED));
  }
  ASSERT_THAT(store->Commit(write), IsOk());
  CampaignWrite noise;  // trials of another campaign never show up
  noise.campaign_id = other;
  noise.trials = {MakeTrial(1, v1::TRIAL_STATE_REPORTED, 1.0)};
  ASSERT_THAT(store->Commit(noise), IsOk());

  std::vector<int64_t> seen;
  std::vector<int64_t> next_afters;
  int64_t after = 0;
  do {
    absl::StatusOr<TrialPage> page = store->ListTrials(id, std::nullopt, after, 10);
    ASSERT_THAT(page, IsOk());
    for (const v1::TrialRecord& t : page->trials) seen.push_back(t.number());
    next_afters.push_back(page->next_after);
    after = page->next_after;
  } while (after != 0 && next_afters.size() < 10);
  EXPECT_THAT(next_afters, ElementsAre(10, 20, 0));
  ASSERT_THAT(seen, SizeIs(25));
  for (size_t i = 0; i < seen.size(); ++i) EXPECT_EQ(seen[i], static_cast<int64_t>(i) + 1);

  // 12 reported trials (2, 4, ..., 24): pages of 6 end exactly at the last one.
  absl::StatusOr<TrialPage> first = store->ListTrials(id, v1::TRIAL_STATE_REPORTED, 0, 6);
  ASSERT_THAT(first, IsOk());
  ASSERT_THAT(first->trials, SizeIs(6));
  EXPECT_EQ(first->trials.front().number(), 2);
  EXPECT_EQ(first->trials.back().number(), 12);
  EXPECT_EQ(first->next_after, 12);
  absl::StatusOr<TrialPage> second =
      store->ListTrials(id, v1::TRIAL_STATE_REPORTED, first->next_after, 6);
  ASSERT_THAT(second, IsOk());
  ASSERT_THAT(second->trials, SizeIs(6));
  EXPECT_EQ(second->trials.front().number(), 14);
  EXPECT_EQ(second->trials.back().number(), 24);
  EXPECT_EQ(second->next_after, 0);
  for (const v1::TrialRecord& t : second->trials) {
    EXPECT_EQ(t.state(), v1::TRIAL_STATE_REPORTED);
  }
  absl::StatusOr<TrialPage> lapsed = store->ListTrials(id, v1::TRIAL_STATE_LAPSED, 0, 6);
  ASSERT_THAT(lapsed, IsOk());
  EXPECT_TRUE(lapsed->trials.empty());
  EXPECT_EQ(lapsed->next_after, 0);

  EXPECT_THAT(store->ListTrials(id, std::nullopt, 0, 0),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("limit")));
  EXPECT_THAT(store->ListTrials(id, std::nullopt, -1, 5),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("after_number")));
  EXPECT_THAT(store->ListTrials(999, std::nullopt, 0, 5),
              StatusIs(absl::StatusCode::kNotFound, HasSubstr("999")));
  EXPECT_THAT(store->ListGenerations(999), StatusIs(absl::StatusCode::kNotFound, HasSubstr("999")));
  EXPECT_THAT(store->ListEvents(999, 5), StatusIs(absl::StatusCode::kNotFound, HasSubstr("999")));
}

TEST_F(SqliteStoreTest, TakenNameIsAlreadyExists) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  Create(*store, "alpha");
  EXPECT_THAT(store->CreateCampaign("alpha", MakeDesign("alpha"), MakeEngine(1.0), "again"),
              StatusIs(absl::StatusCode::kAlreadyExists, HasSubstr("campaign name 'alpha' is taken")));
  EXPECT_THAT(store->CreateCampaign("", MakeDesign(""), MakeEngine(1.0), "r"),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("name")));
  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  ASSERT_THAT(*loaded, SizeIs(1));
  EXPECT_EQ((*loaded)[0].create_request_id, "create-alpha");
}

TEST_F(SqliteStoreTest, NonFiniteScoreIsRefusedAndNothingOfTheWriteIsStored) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  for (double bad :
       {std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::infinity(),
        -std::numeric_limits<double>::infinity()}) {
    CampaignWrite write;
    write.campaign_id = id;
    write.trials = {MakeTrial(1, v1::TRIAL_STATE_LEASED),
                    MakeTrial(2, v1::TRIAL_STATE_REPORTED, bad)};
    write.generations = {MakeSummary(1)};
    write.events = {MakeEvent("tell", 2, "bad")};
    EXPECT_THAT(store->Commit(write), StatusIs(absl::StatusCode::kInvalidArgument,
                                               HasSubstr("trials[1].score (trial 2)")))
        << bad;
  }
  CampaignWrite bad_number;
  bad_number.campaign_id = id;
  bad_number.trials = {MakeTrial(0, v1::TRIAL_STATE_LEASED)};
  EXPECT_THAT(store->Commit(bad_number),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("trials[0].number")));

  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  EXPECT_EQ((*loaded)[0].snapshot.trials_size(), 0);
  absl::StatusOr<std::vector<Event>> events = store->ListEvents(id, 10);
  ASSERT_THAT(events, IsOk());
  EXPECT_TRUE(events->empty());
  absl::StatusOr<std::vector<v1::GenerationSummary>> generations = store->ListGenerations(id);
  ASSERT_THAT(generations, IsOk());
  EXPECT_TRUE(generations->empty());
  EXPECT_EQ(store->stats().failed_writes, 4);
}

TEST_F(SqliteStoreTest, ConcurrentRefusedWritesFailAloneAndTheOthersCommit) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  constexpr int kThreads = 8;
  constexpr int kPerThread = 40;
  // Every 4th write has a NaN score, every 5th names a campaign that does not exist.
  auto kind_of = [](int64_t number) { return number % 4 == 0 ? 1 : (number % 5 == 0 ? 2 : 0); };
  std::vector<std::vector<absl::Status>> results(kThreads);
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([&, t] {
      for (int i = 0; i < kPerThread; ++i) {
        const int64_t number = t * kPerThread + i + 1;
        CampaignWrite write;
        write.campaign_id = kind_of(number) == 2 ? id + 1000 : id;
        write.trials = {MakeTrial(number, v1::TRIAL_STATE_REPORTED,
                                  kind_of(number) == 1 ? std::nan("") : 0.25 * number)};
        write.events = {MakeEvent("tell", number, "t")};
        results[static_cast<size_t>(t)].push_back(store->Commit(std::move(write)));
      }
    });
  }
  for (std::thread& thread : threads) thread.join();

  int expected_stored = 0;
  for (int t = 0; t < kThreads; ++t) {
    for (int i = 0; i < kPerThread; ++i) {
      const int64_t number = t * kPerThread + i + 1;
      const absl::Status& status = results[static_cast<size_t>(t)][static_cast<size_t>(i)];
      switch (kind_of(number)) {
        case 0:
          EXPECT_THAT(status, IsOk()) << number;
          ++expected_stored;
          break;
        case 1:
          EXPECT_THAT(status, StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("score")))
              << number;
          break;
        default:
          EXPECT_THAT(status, StatusIs(absl::StatusCode::kNotFound, HasSubstr("does not exist")))
              << number;
      }
    }
  }
  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  const v1::CampaignSnapshot& snapshot = (*loaded)[0].snapshot;
  ASSERT_EQ(snapshot.trials_size(), expected_stored);
  for (const v1::TrialRecord& trial : snapshot.trials()) {
    EXPECT_EQ(kind_of(trial.number()), 0) << trial.number();
    EXPECT_EQ(trial.score(), 0.25 * static_cast<double>(trial.number()));
  }
  absl::StatusOr<std::vector<Event>> events = store->ListEvents(id, 10'000);
  ASSERT_THAT(events, IsOk());
  EXPECT_THAT(*events, SizeIs(expected_stored));
  EXPECT_THAT(store->CheckIntegrity(), IsOk());
}

// Holds the database's write lock from a raw connection that writes nothing, so that the writer
// thread waits in BEGIN IMMEDIATE while the test lines up the next batch.
class WriteLockHolder {
 public:
  explicit WriteLockHolder(const std::string& path) : raw_(path) {
    EXPECT_EQ(raw_.Exec("BEGIN IMMEDIATE"), SQLITE_OK);
  }
  ~WriteLockHolder() { Release(); }
  void Release() {
    if (held_) {
      EXPECT_EQ(raw_.Exec("ROLLBACK"), SQLITE_OK);
    }
    held_ = false;
  }

 private:
  RawDb raw_;
  bool held_ = true;
};

TEST_F(SqliteStoreTest, FailingWritesInABatchRollBackAloneAndOnlyTheirCallersSeeIt) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  const SqliteStore::Stats before = store->stats();

  WriteLockHolder lock(path_);
  // X: taken alone by the writer thread, which then waits for the lock.
  absl::Status x_status;
  CampaignWrite x;
  x.campaign_id = id;
  x.trials = {MakeTrial(1, v1::TRIAL_STATE_LEASED)};
  x.generations = {MakeSummary(1)};
  std::thread x_thread([&] { x_status = store->Commit(x); });
  ASSERT_TRUE(WaitFor([&] {
    const SqliteStore::Stats s = store->stats();
    return s.active_writes == 1 && s.queued_writes == 0;
  }));

  // Then four writes queue up behind it, in this order, and form the next batch.
  std::vector<CampaignWrite> writes(4);
  writes[0].campaign_id = id + 41;  // unknown campaign
  writes[0].trials = {MakeTrial(5, v1::TRIAL_STATE_LEASED)};
  writes[1].campaign_id = id;  // fine
  writes[1].trials = {MakeTrial(2, v1::TRIAL_STATE_LEASED)};
  writes[2].campaign_id = id;  // its trial is written, then its generation collides: all undone
  writes[2].trials = {MakeTrial(3, v1::TRIAL_STATE_LEASED)};
  writes[2].events = {MakeEvent("ask", 3, "never stored")};
  writes[2].generations = {MakeSummary(1)};
  writes[3].campaign_id = id;  // fine
  writes[3].events = {MakeEvent("phase", 0, "stored")};
  std::vector<absl::Status> statuses(writes.size());
  std::vector<std::thread> threads;
  for (size_t i = 0; i < writes.size(); ++i) {
    threads.emplace_back([&, i] { statuses[i] = store->Commit(writes[i]); });
    ASSERT_TRUE(
        WaitFor([&] { return store->stats().queued_writes == static_cast<int64_t>(i + 1); }));
  }
  lock.Release();
  x_thread.join();
  for (std::thread& thread : threads) thread.join();

  EXPECT_THAT(x_status, IsOk());
  EXPECT_THAT(statuses[0], StatusIs(absl::StatusCode::kNotFound, HasSubstr("does not exist")));
  EXPECT_THAT(statuses[1], IsOk());
  EXPECT_THAT(statuses[2], StatusIs(absl::StatusCode::kAlreadyExists,
                                    HasSubstr("generation 1 is already stored")));
  EXPECT_THAT(statuses[3], IsOk());
  const SqliteStore::Stats after = store->stats();
  EXPECT_EQ(after.transactions - before.transactions, 2);
  EXPECT_EQ(after.largest_batch, 4);
  EXPECT_EQ(after.committed_writes - before.committed_writes, 3);
  EXPECT_EQ(after.failed_writes - before.failed_writes, 2);
  // X committed whole; the batch of four was tried whole, then again write by write.
  EXPECT_EQ(after.isolated_batches - before.isolated_batches, 1);

  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  ASSERT_THAT(*loaded, SizeIs(1));
  const v1::CampaignSnapshot& snapshot = (*loaded)[0].snapshot;
  ASSERT_EQ(snapshot.trials_size(), 2);
  EXPECT_EQ(snapshot.trials(0).number(), 1);
  EXPECT_EQ(snapshot.trials(1).number(), 2);
  absl::StatusOr<std::vector<Event>> events = store->ListEvents(id, 10);
  ASSERT_THAT(events, IsOk());
  ASSERT_THAT(*events, SizeIs(1));
  EXPECT_EQ((*events)[0].message, "stored");
}

// A batch holding several writes of one campaign stores each write's rows and the engine state of its
// last applied write (the engine states before it are replaced within the transaction); a write
// refused before queuing does not count as the last.
TEST_F(SqliteStoreTest, ABatchStoresTheEngineStateOfEachCampaignsLastAppliedWrite) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t alpha = Create(*store, "alpha");
  const int64_t beta = Create(*store, "beta");
  const SqliteStore::Stats before = store->stats();
  auto write = [](int64_t campaign, int64_t next_trial, double score) {
    CampaignWrite w;
    w.campaign_id = campaign;
    w.chain = 5;  // a refusal in a chain takes its place in the queue
    w.trials = {MakeTrial(next_trial - 1, v1::TRIAL_STATE_REPORTED, score)};
    v1::EngineState engine = MakeEngine(0.5);
    engine.set_next_trial(next_trial);
    engine.set_report_sequence(next_trial * 10);
    w.engine = engine;
    return w;
  };
  std::vector<CampaignWrite> writes = {write(alpha, 2, 1.0), write(beta, 2, 1.0), write(alpha, 3, 2.0),
                                    write(beta, 3, std::nan("")),  // refused before queuing
                                    write(alpha, 4, 3.0)};
  std::vector<absl::Status> statuses(writes.size());
  {
    WriteLockHolder lock(path_);
    // The first write waits alone for the lock; the others queue behind it and form one batch.
    std::vector<std::thread> threads;
    for (size_t i = 0; i < writes.size(); ++i) {
      threads.emplace_back([&, i] { statuses[i] = store->Commit(writes[i]); });
      ASSERT_TRUE(WaitFor([&] {
        const SqliteStore::Stats s = store->stats();
        return s.active_writes + s.queued_writes == static_cast<int64_t>(i + 1);
      }));
    }
    lock.Release();
    for (std::thread& thread : threads) thread.join();
  }
  EXPECT_THAT(statuses[0], IsOk());
  EXPECT_THAT(statuses[1], IsOk());
  EXPECT_THAT(statuses[2], IsOk());
  EXPECT_THAT(statuses[3], StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("must be finite")));
  EXPECT_THAT(statuses[4], IsOk());
  const SqliteStore::Stats after = store->stats();
  EXPECT_EQ(after.transactions - before.transactions, 2);
  EXPECT_EQ(after.isolated_batches - before.isolated_batches, 0);

  absl::StatusOr<StoredCampaign> a = store->LoadCampaign(alpha);
  ASSERT_THAT(a, IsOk());
  EXPECT_EQ(a->snapshot.engine().next_trial(), 4);
  EXPECT_EQ(a->snapshot.engine().report_sequence(), 40);
  EXPECT_EQ(a->snapshot.engine().distribution().population_size(), 6);  // the distribution is untouched
  ASSERT_EQ(a->snapshot.trials_size(), 3);
  EXPECT_EQ(a->snapshot.trials(2).score(), 3.0);
  absl::StatusOr<StoredCampaign> b = store->LoadCampaign(beta);
  ASSERT_THAT(b, IsOk());
  EXPECT_EQ(b->snapshot.engine().next_trial(), 2);  // its last write was refused
  EXPECT_EQ(b->snapshot.trials_size(), 1);
}

TEST_F(SqliteStoreTest, LockedDatabaseIsUnavailableAndReadsKeepWorking) {
  SqliteStore::Options options;
  options.busy_timeout_ms = 50;
  std::unique_ptr<SqliteStore> store = OpenStore(options);
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  CampaignWrite write;
  write.campaign_id = id;
  write.trials = {MakeTrial(1, v1::TRIAL_STATE_LEASED)};
  {
    WriteLockHolder lock(path_);
    // The message names the file, for the operator who reads it on a client.
    EXPECT_THAT(store->Commit(write),
                StatusIs(absl::StatusCode::kUnavailable,
                         testing::AllOf(HasSubstr("locked"), HasSubstr(path_))));
    EXPECT_THAT(store->CreateCampaign("beta", MakeDesign("beta"), MakeEngine(0.0), "r"),
                StatusIs(absl::StatusCode::kUnavailable, HasSubstr("write transaction")));
    // Reads do not wait for a writer.
    absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
    ASSERT_THAT(loaded, IsOk());
    EXPECT_THAT(*loaded, SizeIs(1));
  }
  EXPECT_EQ(store->stats().failed_transactions, 2);
  EXPECT_THAT(store->Commit(write), IsOk());
  absl::StatusOr<TrialPage> page = store->ListTrials(id, std::nullopt, 0, 10);
  ASSERT_THAT(page, IsOk());
  EXPECT_THAT(page->trials, SizeIs(1));
}

TEST_F(SqliteStoreTest, EveryConnectionIsWalWithSynchronousFull) {
  SqliteStore::Options options;
  options.reader_connections = 3;
  std::unique_ptr<SqliteStore> store = OpenStore(options);
  ASSERT_NE(store, nullptr);
  absl::StatusOr<std::vector<SqliteConnectionSettings>> settings = store->InspectConnections();
  ASSERT_THAT(settings, IsOk());
  ASSERT_THAT(*settings, SizeIs(4));
  EXPECT_EQ((*settings)[0].role, "writer");
  EXPECT_FALSE((*settings)[0].read_only);
  for (size_t i = 0; i < settings->size(); ++i) {
    const SqliteConnectionSettings& s = (*settings)[i];
    EXPECT_EQ(s.synchronous, 2) << s.role;
    EXPECT_EQ(s.journal_mode, "wal") << s.role;
    EXPECT_TRUE(s.foreign_keys) << s.role;
    if (i > 0) {
      EXPECT_EQ(s.role, absl::StrCat("reader ", i - 1));
      EXPECT_TRUE(s.read_only) << s.role;
    }
  }
  // From outside: WAL is a property of the file, and the schema version is the build's.
  RawDb raw(path_);
  EXPECT_EQ(raw.Text("PRAGMA journal_mode"), "wal");
  EXPECT_EQ(raw.Text("PRAGMA user_version"), absl::StrCat(SqliteStore::schema_version()));
  // Version 3's layout: ask requests in the order of the asks, no index by trial state.
  EXPECT_EQ(raw.Text("SELECT count(*) FROM sqlite_master WHERE name = 'ask_requests_by_campaign'"), "1");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM sqlite_master WHERE name = 'trials_by_state'"), "0");
}

TEST_F(SqliteStoreTest, GroupCommitSharesTransactionsAndKeepsEveryWrite) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  constexpr int kCampaigns = 4;
  constexpr int kThreads = 16;
  constexpr int kPerThread = 200;
  constexpr int kCommits = kThreads * kPerThread;
  std::vector<int64_t> ids;
  for (int s = 0; s < kCampaigns; ++s) ids.push_back(Create(*store, absl::StrCat("campaign-", s)));
  const SqliteStore::Stats before = store->stats();

  std::vector<int> failures(kThreads, 0);
  std::vector<std::thread> threads;
  const absl::Time start = absl::Now();
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([&, t] {
      for (int i = 0; i < kPerThread; ++i) {
        // Thread t writes trials t, t + 16, t + 32, ... of campaign t % 4: numbers never collide.
        const int64_t number = static_cast<int64_t>(i) * kThreads + t + 1;
        CampaignWrite write;
        write.campaign_id = ids[static_cast<size_t>(t % kCampaigns)];
        write.trials = {MakeTrial(number, v1::TRIAL_STATE_REPORTED, 0.5 * number)};
        write.events = {MakeEvent("tell", number, absl::StrCat("thread ", t))};
        if (!store->Commit(std::move(write)).ok()) ++failures[static_cast<size_t>(t)];
      }
    });
  }
  for (std::thread& thread : threads) thread.join();
  const double seconds = absl::ToDoubleSeconds(absl::Now() - start);
  for (int t = 0; t < kThreads; ++t) EXPECT_EQ(failures[static_cast<size_t>(t)], 0) << t;

  const SqliteStore::Stats after = store->stats();
  const int64_t transactions = after.transactions - before.transactions;
  EXPECT_EQ(after.committed_writes - before.committed_writes, kCommits);
  EXPECT_EQ(after.failed_transactions, 0);
  EXPECT_EQ(after.isolated_batches, 0);  // no write failed: every batch went in whole
  // With 16 writers waiting on fsyncs, most transactions carry several commits.
  EXPECT_LE(transactions, kCommits / 3);
  std::printf(
      "group commit: %d commits in %.3f s (%.0f commits/s), %lld transactions, "
      "%.1f commits per transaction, largest batch %lld\n",
      kCommits, seconds, kCommits / seconds, static_cast<long long>(transactions),
      static_cast<double>(kCommits) / static_cast<double>(transactions),
      static_cast<long long>(after.largest_batch));
  RecordProperty("commits_per_second", static_cast<int>(kCommits / seconds));
  RecordProperty("transactions", static_cast<int>(transactions));

  auto check_all_stored = [&](SqliteStore& s) {
    absl::StatusOr<std::vector<StoredCampaign>> loaded = s.LoadAll();
    ASSERT_THAT(loaded, IsOk());
    ASSERT_THAT(*loaded, SizeIs(kCampaigns));
    int total = 0;
    for (const StoredCampaign& campaign : *loaded) {
      int64_t previous = 0;
      for (const v1::TrialRecord& trial : campaign.snapshot.trials()) {
        EXPECT_GT(trial.number(), previous);
        previous = trial.number();
        EXPECT_EQ(Bytes(trial), Bytes(MakeTrial(trial.number(), v1::TRIAL_STATE_REPORTED,
                                                0.5 * static_cast<double>(trial.number()))));
        EXPECT_EQ(static_cast<int64_t>((trial.number() - 1) % kThreads) % kCampaigns,
                  campaign.id - ids[0]);
      }
      total += campaign.snapshot.trials_size();
      absl::StatusOr<std::vector<Event>> events = s.ListEvents(campaign.id, kCommits);
      ASSERT_THAT(events, IsOk());
      EXPECT_EQ(static_cast<int>(events->size()), campaign.snapshot.trials_size());
    }
    EXPECT_EQ(total, kCommits);
  };
  check_all_stored(*store);
  EXPECT_THAT(store->CheckIntegrity(), IsOk());

  store.reset();
  {
    RawDb raw(path_);
    EXPECT_EQ(raw.Text("PRAGMA integrity_check"), "ok");
    EXPECT_EQ(raw.Text("SELECT count(*) FROM trials"), absl::StrCat(kCommits));
  }
  store = OpenStore();
  ASSERT_NE(store, nullptr);
  check_all_stored(*store);
}

TEST_F(SqliteStoreTest, GroupCommitWindowWaitsForABatchOnlyUnderLoad) {
  SqliteStore::Options options;
  options.group_commit_window_us = 50000;  // long enough that a wait would show in the timing
  std::unique_ptr<SqliteStore> store = OpenStore(options);
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  int64_t number = 0;
  auto write = [&](int64_t n) {
    CampaignWrite w;
    w.campaign_id = id;
    w.trials = {MakeTrial(n, v1::TRIAL_STATE_REPORTED, 1.0)};
    return w;
  };

  // One writer alone: every batch holds its one write and nothing queued behind it, so the writer
  // never waits (20 waits of 50 ms would take a second).
  const absl::Time start = absl::Now();
  for (int i = 0; i < 20; ++i) ASSERT_THAT(store->Commit(write(++number)), IsOk());
  EXPECT_LT(absl::Now() - start, absl::Milliseconds(900));
  EXPECT_EQ(store->stats().group_commit_waits, 0);

  // Eight writers in step: each batch waits until the eight are back, so batches stay full.
  const SqliteStore::Stats before = store->stats();
  constexpr int kThreads = 8;
  constexpr int kPerThread = 40;
  std::atomic<int64_t> next{number};
  std::atomic<int> failures{0};
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([&] {
      for (int i = 0; i < kPerThread; ++i) {
        if (!store->Commit(write(++next)).ok()) ++failures;
      }
    });
  }
  for (std::thread& thread : threads) thread.join();
  EXPECT_EQ(failures, 0);
  const SqliteStore::Stats after = store->stats();
  const int64_t transactions = after.transactions - before.transactions;
  EXPECT_EQ(after.committed_writes - before.committed_writes, kThreads * kPerThread);
  EXPECT_GT(after.group_commit_waits, 0);
  // Without the window a batch holds what queued during one fsync; with it, about all eight.
  EXPECT_LE(transactions, kThreads * kPerThread / 4) << "writes per transaction "
                                                     << after.commits_per_transaction();
}

TEST_F(SqliteStoreTest, GroupCommitWindowOfZeroNeverWaits) {
  SqliteStore::Options options;
  options.group_commit_window_us = 0;
  std::unique_ptr<SqliteStore> store = OpenStore(options);
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  const int64_t committed_before = store->stats().committed_writes;
  std::atomic<int64_t> next{0};
  std::vector<std::thread> threads;
  for (int t = 0; t < 4; ++t) {
    threads.emplace_back([&] {
      for (int i = 0; i < 20; ++i) {
        CampaignWrite w;
        w.campaign_id = id;
        w.trials = {MakeTrial(++next, v1::TRIAL_STATE_LEASED)};
        EXPECT_THAT(store->Commit(std::move(w)), IsOk());
      }
    });
  }
  for (std::thread& thread : threads) thread.join();
  EXPECT_EQ(store->stats().group_commit_waits, 0);
  EXPECT_EQ(store->stats().committed_writes - committed_before, 80);
}

TEST_F(SqliteStoreTest, ReopeningGivesTheSameDataAndTheLogIsFoldedOnClose) {
  std::string before;
  {
    std::unique_ptr<SqliteStore> store = OpenStore();
    ASSERT_NE(store, nullptr);
    const int64_t id = Create(*store, "alpha");
    Create(*store, "beta");
    CampaignWrite write;
    write.campaign_id = id;
    write.trials = {MakeTrial(1, v1::TRIAL_STATE_REPORTED, 3.0),
                    MakeTrial(2, v1::TRIAL_STATE_LAPSED)};
    write.ask_request = std::make_pair(std::string("a"), std::vector<int64_t>{1, 2});
    write.distribution = MakeDistribution(0.1);
    ASSERT_THAT(store->Commit(write), IsOk());
    absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
    ASSERT_THAT(loaded, IsOk());
    for (const StoredCampaign& s : *loaded) {
      absl::StrAppend(&before, s.id, s.name, Bytes(s.design), Bytes(s.snapshot),
                      s.create_request_id, s.ask_requests.size());
    }
    absl::StatusOr<int64_t> size = store->SizeBytes();
    ASSERT_THAT(size, IsOk());
    EXPECT_GT(*size, 0);
  }
  // The writer closed last and checkpointed: the log is gone, everything is in the main file.
  EXPECT_FALSE(std::filesystem::exists(path_ + "-wal"));

  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  absl::StatusOr<std::vector<StoredCampaign>> loaded = store->LoadAll();
  ASSERT_THAT(loaded, IsOk());
  std::string after;
  for (const StoredCampaign& s : *loaded) {
    absl::StrAppend(&after, s.id, s.name, Bytes(s.design), Bytes(s.snapshot), s.create_request_id,
                    s.ask_requests.size());
  }
  EXPECT_EQ(after, before);
  EXPECT_THAT((*loaded)[0].ask_requests, ElementsAre(Pair("a", ElementsAre(1, 2))));
  // Ids keep counting after a reopen.
  EXPECT_GT(Create(*store, "gamma"), (*loaded)[1].id);
}

TEST_F(SqliteStoreTest, UnknownCampaignIsNotFoundWithOrWithoutAnEngineState) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  CampaignWrite write;
  write.campaign_id = id + 1;
  write.trials = {MakeTrial(1, v1::TRIAL_STATE_LEASED)};
  write.events = {MakeEvent("ask", 1, "never stored")};
  EXPECT_THAT(store->Commit(write), StatusIs(absl::StatusCode::kNotFound, HasSubstr("does not exist")));
  write.engine = MakeEngine(0.25);
  EXPECT_THAT(store->Commit(write), StatusIs(absl::StatusCode::kNotFound, HasSubstr("does not exist")));
  RawDb raw(path_);
  EXPECT_EQ(raw.Text("SELECT count(*) FROM trials"), "0");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM events"), "0");
}

// LoadCampaign reads one campaign's rows alone (the host reloads a campaign after a failed commit, and
// should not read every other campaign to do it); what it returns is what LoadAll returns for it.
TEST_F(SqliteStoreTest, LoadCampaignReturnsWhatLoadAllHoldsForThatCampaignAndNotFoundForAnUnknownId) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t alpha = Create(*store, "alpha");
  const int64_t beta = Create(*store, "beta");
  for (const int64_t id : {alpha, beta}) {
    for (int64_t n = 1; n <= 3; ++n) {
      CampaignWrite write;
      write.campaign_id = id;
      write.trials = {MakeTrial(n, n == 2 ? v1::TRIAL_STATE_REPORTED : v1::TRIAL_STATE_LEASED, 0.5 * n + id)};
      write.ask_request = std::make_pair(absl::StrCat("ask-", id, "-", n), std::vector<int64_t>{n});
      ASSERT_THAT(store->Commit(write), IsOk());
    }
  }
  absl::StatusOr<std::vector<StoredCampaign>> all = store->LoadAll();
  ASSERT_THAT(all, IsOk());
  ASSERT_THAT(*all, SizeIs(2));
  for (const StoredCampaign& expected : *all) {
    absl::StatusOr<StoredCampaign> one = store->LoadCampaign(expected.id);
    ASSERT_THAT(one, IsOk());
    EXPECT_EQ(one->id, expected.id);
    EXPECT_EQ(one->name, expected.name);
    EXPECT_EQ(one->create_request_id, expected.create_request_id);
    EXPECT_EQ(Bytes(one->design), Bytes(expected.design));
    EXPECT_EQ(Bytes(one->snapshot), Bytes(expected.snapshot));
    EXPECT_EQ(one->ask_requests, expected.ask_requests);
    EXPECT_EQ(one->snapshot.trials_size(), 3);
  }
  EXPECT_THAT(store->LoadCampaign(beta + 100), StatusIs(absl::StatusCode::kNotFound, HasSubstr("not found")));
}

TEST_F(SqliteStoreTest, AskRequestsLoadInTheOrderStoredAndAnEmptyIdIsRefused) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  for (const char* request : {"zeta", "alpha", "mid"}) {
    CampaignWrite write;
    write.campaign_id = id;
    write.ask_request = std::make_pair(std::string(request), std::vector<int64_t>{static_cast<int64_t>(request[0])});
    ASSERT_THAT(store->Commit(write), IsOk());
  }
  absl::StatusOr<StoredCampaign> loaded = store->LoadCampaign(id);
  ASSERT_THAT(loaded, IsOk());
  EXPECT_THAT(loaded->ask_requests, ElementsAre(Pair("zeta", ElementsAre('z')), Pair("alpha", ElementsAre('a')),
                                                Pair("mid", ElementsAre('m'))));

  CampaignWrite empty;
  empty.campaign_id = id;
  empty.trials = {MakeTrial(9, v1::TRIAL_STATE_LEASED)};
  empty.ask_request = std::make_pair(std::string(), std::vector<int64_t>{9});
  EXPECT_THAT(store->Commit(empty), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("empty request id")));
  absl::StatusOr<TrialPage> page = store->ListTrials(id, std::nullopt, 0, 10);
  ASSERT_THAT(page, IsOk());
  EXPECT_TRUE(page->trials.empty());
}

TEST_F(SqliteStoreTest, NewerSchemaVersionIsRefusedNamingBothVersions) {
  OpenStore().reset();  // creates the file at the current version
  const int64_t future = SqliteStore::schema_version() + 7;
  {
    RawDb raw(path_);
    ASSERT_EQ(raw.Exec(absl::StrCat("PRAGMA user_version = ", future)), SQLITE_OK);
  }
  for (bool read_only : {false, true}) {
    SqliteStore::Options options;
    options.read_only = read_only;
    EXPECT_THAT(SqliteStore::Open(path_, options),
                StatusIs(absl::StatusCode::kFailedPrecondition,
                         HasSubstr(absl::StrCat("schema version ", future,
                                                " is newer than this build's version ",
                                                SqliteStore::schema_version()))))
        << read_only;
  }
}

TEST_F(SqliteStoreTest, ReadOnlyOpenOfAnOlderSchemaIsRefused) {
  // A database at version 0 (an empty file SQLite created).
  {
    sqlite3* db = nullptr;
    ASSERT_EQ(sqlite3_open(path_.c_str(), &db), SQLITE_OK);
    ASSERT_EQ(sqlite3_exec(db, "PRAGMA journal_mode = WAL; CREATE TABLE unrelated (x)", nullptr,
                           nullptr, nullptr),
              SQLITE_OK);
    sqlite3_close(db);
  }
  SqliteStore::Options options;
  options.read_only = true;
  EXPECT_THAT(SqliteStore::Open(path_, options),
              StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("older")));
  // Opened writable, it is migrated.
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  EXPECT_GT(Create(*store, "alpha"), 0);
}

TEST_F(SqliteStoreTest, MigrateAppliesOnlyMissingStepsAllOrNothing) {
  absl::StatusOr<std::unique_ptr<internal::Connection>> connection =
      internal::Connection::Open(path_, /*read_only=*/false, 1000);
  ASSERT_THAT(connection, IsOk());
  internal::Connection& c = **connection;
  const char* const v1[] = {"CREATE TABLE a (x INTEGER)"};
  const char* const v2[] = {"CREATE TABLE a (x INTEGER)",  // would fail if it ran again
                            "CREATE TABLE b (y TEXT); INSERT INTO b VALUES ('two')"};
  const char* const broken[] = {"CREATE TABLE a (x INTEGER)", "CREATE TABLE b (y TEXT)",
                                "CREATE TABLE c (z); INSERT INTO nowhere VALUES (1)"};
  ASSERT_THAT(internal::Migrate(c, v1), IsOk());
  EXPECT_EQ(*c.QueryInt64("PRAGMA user_version", "v"), 1);
  ASSERT_THAT(internal::Migrate(c, v2), IsOk());
  EXPECT_EQ(*c.QueryInt64("PRAGMA user_version", "v"), 2);
  EXPECT_EQ(*c.QueryText("SELECT y FROM b", "b"), "two");
  ASSERT_THAT(internal::Migrate(c, v2), IsOk());  // nothing to do
  EXPECT_THAT(internal::Migrate(c, broken),
              StatusIs(absl::StatusCode::kInternal, HasSubstr("from version 2 to 3")));
  EXPECT_FALSE(c.InTransaction());
  EXPECT_EQ(*c.QueryInt64("PRAGMA user_version", "v"), 2);
  EXPECT_EQ(*c.QueryInt64("SELECT count(*) FROM sqlite_master WHERE name = 'c'", "c"), 0);
  EXPECT_THAT(internal::Migrate(c, v1),
              StatusIs(absl::StatusCode::kFailedPrecondition,
                       HasSubstr("version 2 is newer than this build's version 1")));
  // The real list starts from an empty database and its length is the version.
  EXPECT_EQ(SqliteStore::schema_version(), static_cast<int64_t>(internal::Migrations().size()));
}

// Checks a store opened on a read-only file; returns "" or what went wrong.
std::string CheckReadOnlyFile(const std::string& path, int64_t campaign_id) {
  absl::StatusOr<std::unique_ptr<SqliteStore>> writable = SqliteStore::Open(path);
  if (writable.ok() || writable.status().code() != absl::StatusCode::kFailedPrecondition ||
      writable.status().message().find("not writable") == absl::string_view::npos) {
    return absl::StrCat("writable open: ", writable.status().ToString());
  }
  SqliteStore::Options options;
  options.read_only = true;
  absl::StatusOr<std::unique_ptr<SqliteStore>> store = SqliteStore::Open(path, options);
  if (!store.ok()) return absl::StrCat("read-only open: ", store.status().ToString());
  absl::StatusOr<std::vector<StoredCampaign>> loaded = (*store)->LoadAll();
  if (!loaded.ok() || loaded->size() != 1 || (*loaded)[0].snapshot.trials_size() != 2) {
    return absl::StrCat("LoadAll: ", loaded.status().ToString());
  }
  absl::StatusOr<TrialPage> page = (*store)->ListTrials(campaign_id, std::nullopt, 0, 10);
  if (!page.ok() || page->trials.size() != 2) return "ListTrials failed";
  CampaignWrite write;
  write.campaign_id = campaign_id;
  absl::Status commit = (*store)->Commit(write);
  if (commit.code() != absl::StatusCode::kFailedPrecondition) {
    return absl::StrCat("Commit: ", commit.ToString());
  }
  absl::StatusOr<int64_t> created =
      (*store)->CreateCampaign("beta", MakeDesign("beta"), MakeEngine(0.0), "r");
  if (created.status().code() != absl::StatusCode::kFailedPrecondition) {
    return absl::StrCat("CreateCampaign: ", created.status().ToString());
  }
  if (absl::Status integrity = (*store)->CheckIntegrity(); !integrity.ok()) {
    return absl::StrCat("CheckIntegrity: ", integrity.ToString());
  }
  return "";
}

TEST_F(SqliteStoreTest, ReadOnlyFileRefusesWritesClearlyAndReadsKeepWorking) {
  int64_t id = 0;
  {
    std::unique_ptr<SqliteStore> store = OpenStore();
    ASSERT_NE(store, nullptr);
    id = Create(*store, "alpha");
    CampaignWrite write;
    write.campaign_id = id;
    write.trials = {MakeTrial(1, v1::TRIAL_STATE_LEASED), MakeTrial(2, v1::TRIAL_STATE_LEASED)};
    ASSERT_THAT(store->Commit(write), IsOk());
  }
  ASSERT_EQ(chmod(path_.c_str(), 0444), 0);
  ASSERT_EQ(chmod(dir_.c_str(), 0777), 0);  // the directory stays writable, as usual

  // Opened read-only on purpose, whoever we are.
  {
    SqliteStore::Options options;
    options.read_only = true;
    absl::StatusOr<std::unique_ptr<SqliteStore>> store = SqliteStore::Open(path_, options);
    ASSERT_THAT(store, IsOk());
    absl::StatusOr<std::vector<StoredCampaign>> loaded = (*store)->LoadAll();
    ASSERT_THAT(loaded, IsOk());
    EXPECT_EQ((*loaded)[0].snapshot.trials_size(), 2);
    CampaignWrite write;
    write.campaign_id = id;
    EXPECT_THAT((*store)->Commit(write),
                StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("read-only")));
    absl::StatusOr<std::vector<SqliteConnectionSettings>> settings = (*store)->InspectConnections();
    ASSERT_THAT(settings, IsOk());
    EXPECT_THAT(*settings, SizeIs(SqliteStore::Options().reader_connections));
  }

  if (geteuid() != 0) {
    EXPECT_EQ(CheckReadOnlyFile(path_, id), "");
  } else {
    // File modes do not bind root: check as an unprivileged user in a child process.
    EXPECT_EXIT(
        {
          if (setgroups(0, nullptr) != 0 || setgid(65534) != 0 || setuid(65534) != 0) {
            std::fprintf(stderr, "cannot drop privileges\n");
            _exit(2);
          }
          const std::string problem = CheckReadOnlyFile(path_, id);
          std::fprintf(stderr, "%s\n",
                       problem.empty() ? "read-only checks passed" : problem.c_str());
          _exit(problem.empty() ? 0 : 1);
        },
        testing::ExitedWithCode(0), "read-only checks passed");
  }
}

TEST_F(SqliteStoreTest, DamagedFilesAreDataLoss) {
  {
    std::ofstream garbage(path_, std::ios::binary);
    garbage << std::string(8192, 'x');
  }
  EXPECT_THAT(SqliteStore::Open(path_), StatusIs(absl::StatusCode::kDataLoss, HasSubstr("")));
  std::filesystem::remove(path_);

  int64_t id = 0;
  {
    std::unique_ptr<SqliteStore> store = OpenStore();
    ASSERT_NE(store, nullptr);
    id = Create(*store, "alpha");
    CampaignWrite write;
    write.campaign_id = id;
    write.trials = {MakeTrial(1, v1::TRIAL_STATE_LEASED), MakeTrial(2, v1::TRIAL_STATE_LEASED)};
    ASSERT_THAT(store->Commit(write), IsOk());
  }
  {
    RawDb raw(path_);
    ASSERT_EQ(raw.Exec("UPDATE trials SET record = X'FFFFFFFF' WHERE number = 2"), SQLITE_OK);
  }
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  EXPECT_THAT(store->LoadAll(), StatusIs(absl::StatusCode::kDataLoss,
                                         HasSubstr("campaign 'alpha' (id 1): the record of trial 2")));
  EXPECT_THAT(store->ListTrials(id, std::nullopt, 0, 10),
              StatusIs(absl::StatusCode::kDataLoss, HasSubstr("trial 2")));
  // A row that holds another trial's record is caught too.
  store.reset();
  {
    RawDb raw(path_);
    ASSERT_EQ(raw.Exec("UPDATE trials SET record = (SELECT record FROM trials WHERE number = 1) "
                       "WHERE number = 2"),
              SQLITE_OK);
  }
  store = OpenStore();
  ASSERT_NE(store, nullptr);
  EXPECT_THAT(store->LoadAll(), StatusIs(absl::StatusCode::kDataLoss,
                                         HasSubstr("row of trial 2 holds the record of trial 1")));
}

TEST_F(SqliteStoreTest, OptionsAndPathAreValidated) {
  SqliteStore::Options options;
  options.max_batch_writes = 0;
  EXPECT_THAT(SqliteStore::Open(path_, options),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("max_batch_writes")));
  options = SqliteStore::Options();
  options.reader_connections = 0;
  EXPECT_THAT(SqliteStore::Open(path_, options),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("reader_connections")));
  options = SqliteStore::Options();
  options.group_commit_window_us = -1;
  EXPECT_THAT(SqliteStore::Open(path_, options),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("group_commit_window_us")));
  options = SqliteStore::Options();
  options.busy_timeout_ms = -1;
  EXPECT_THAT(SqliteStore::Open(path_, options),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("busy_timeout_ms")));
  EXPECT_THAT(SqliteStore::Open(":memory:"),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("WAL")));
  EXPECT_THAT(SqliteStore::Open(dir_ + "/missing/dir/ogive.db"),
              StatusIs(absl::StatusCode::kUnavailable, HasSubstr("open")));
  options = SqliteStore::Options();
  options.read_only = true;
  EXPECT_THAT(SqliteStore::Open(dir_ + "/absent.db", options),
              StatusIs(absl::StatusCode::kUnavailable, HasSubstr("absent.db")));
  EXPECT_FALSE(std::filesystem::exists(dir_ + "/absent.db"));
}

TEST_F(SqliteStoreTest, DestructionCompletesQueuedWrites) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  constexpr int kWrites = 6;
  std::vector<absl::Status> statuses(kWrites);
  std::vector<std::thread> threads;
  std::thread closer;
  {
    WriteLockHolder lock(path_);
    for (int i = 0; i < kWrites; ++i) {
      threads.emplace_back([&, i] {
        CampaignWrite write;
        write.campaign_id = id;
        write.trials = {MakeTrial(i + 1, v1::TRIAL_STATE_LEASED)};
        statuses[static_cast<size_t>(i)] = store->Commit(std::move(write));
      });
    }
    ASSERT_TRUE(WaitFor([&] {
      const SqliteStore::Stats s = store->stats();
      return s.active_writes + s.queued_writes == kWrites;
    }));
    SqliteStore* raw_store = store.release();
    closer = std::thread([raw_store] { delete raw_store; });
    absl::SleepFor(absl::Milliseconds(20));  // let the destructor start waiting for the writer
  }
  closer.join();
  for (std::thread& thread : threads) thread.join();
  for (int i = 0; i < kWrites; ++i) EXPECT_THAT(statuses[static_cast<size_t>(i)], IsOk()) << i;
  store = OpenStore();
  ASSERT_NE(store, nullptr);
  absl::StatusOr<TrialPage> page = store->ListTrials(id, std::nullopt, 0, 100);
  ASSERT_THAT(page, IsOk());
  EXPECT_THAT(page->trials, SizeIs(kWrites));
}

TEST_F(SqliteStoreTest, SizeBytesCountsTheFileAndTheLog) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  absl::StatusOr<int64_t> small = store->SizeBytes();
  ASSERT_THAT(small, IsOk());
  CampaignWrite write;
  write.campaign_id = id;
  for (int64_t n = 1; n <= 500; ++n) write.trials.push_back(MakeTrial(n, v1::TRIAL_STATE_LEASED));
  ASSERT_THAT(store->Commit(write), IsOk());
  absl::StatusOr<int64_t> large = store->SizeBytes();
  ASSERT_THAT(large, IsOk());
  EXPECT_GT(*large, *small);
  std::error_code error;
  const auto main_size = static_cast<int64_t>(std::filesystem::file_size(path_, error));
  EXPECT_GE(*large, main_size);
}

// on_transaction reports every write transaction once, with its writes and a duration; the reports
// add up to the store's counters.
TEST_F(SqliteStoreTest, OnTransactionReportsEveryTransaction) {
  absl::Mutex mu;
  std::vector<SqliteTransactionReport> reports;
  SqliteStore::Options options;
  options.on_transaction = [&](const SqliteTransactionReport& r) {
    absl::MutexLock lock(&mu);
    reports.push_back(r);
  };
  std::unique_ptr<SqliteStore> store = OpenStore(options);
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "alpha");
  std::vector<std::thread> threads;
  for (int t = 0; t < 4; ++t) {
    threads.emplace_back([&, t] {
      for (int i = 0; i < 25; ++i) {
        CampaignWrite write;
        write.campaign_id = id;
        write.trials = {MakeTrial(i * 4 + t + 1, v1::TRIAL_STATE_LEASED)};
        EXPECT_THAT(store->Commit(std::move(write)), IsOk());
      }
    });
  }
  for (std::thread& thread : threads) thread.join();
  CampaignWrite unknown;
  unknown.campaign_id = id + 1000;  // NOT_FOUND: refused inside its transaction, which still commits
  EXPECT_FALSE(store->Commit(std::move(unknown)).ok());
  const SqliteStore::Stats stats = store->stats();
  store.reset();  // the writer thread is gone: no report can still arrive
  int64_t writes = 0, committed = 0;
  for (const SqliteTransactionReport& r : reports) {
    EXPECT_TRUE(r.committed);
    EXPECT_GE(r.writes, 1);
    EXPECT_LE(r.committed_writes, r.writes);
    EXPECT_GT(r.seconds, 0.0);
    EXPECT_LT(r.seconds, 10.0);
    writes += r.writes;
    committed += r.committed_writes;
  }
  EXPECT_EQ(static_cast<int64_t>(reports.size()), stats.transactions);
  EXPECT_EQ(writes, 1 + 100 + 1);  // the campaign, the trials, the refused write
  EXPECT_EQ(committed, stats.committed_writes);
  EXPECT_EQ(committed, 1 + 100);
}

}  // namespace
}  // namespace ogive::storage

namespace ogive::storage {
namespace {

// store.h: writes of one campaign with the same chain depend on each other — once one fails, every
// later one fails unapplied, whether it waits in the same batch or a later one, and whether the
// first was refused before queuing (a NaN) or failed in the database (a duplicate generation).
// Writes of another chain, or without one, are unaffected.
TEST_F(SqliteStoreTest, AFailedWriteBreaksItsChainOnly) {
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  const int64_t id = Create(*store, "chained");

  auto write = [&](int64_t chain, int64_t trial, double score) {
    CampaignWrite w;
    w.campaign_id = id;
    w.chain = chain;
    w.trials = {MakeTrial(trial, v1::TRIAL_STATE_REPORTED, score)};
    return w;
  };
  // Chain 1: a NaN is refused before queuing; the two writes queued behind it fail unapplied.
  std::unique_ptr<PendingCommit> refused = store->CommitAsync(write(1, 1, std::nan("")));
  std::unique_ptr<PendingCommit> behind = store->CommitAsync(write(1, 2, 2.0));
  std::unique_ptr<PendingCommit> other_chain = store->CommitAsync(write(2, 3, 3.0));
  std::unique_ptr<PendingCommit> no_chain = store->CommitAsync(write(0, 4, 4.0));
  EXPECT_THAT(refused->Wait(), StatusIs(absl::StatusCode::kInvalidArgument, testing::HasSubstr("score")));
  EXPECT_THAT(behind->Wait(), StatusIs(absl::StatusCode::kUnavailable, testing::HasSubstr("earlier write")));
  EXPECT_THAT(other_chain->Wait(), IsOk());
  EXPECT_THAT(no_chain->Wait(), IsOk());
  EXPECT_THAT(store->Commit(write(1, 5, 5.0)),
              StatusIs(absl::StatusCode::kUnavailable, testing::HasSubstr("earlier write")));

  // Chain 3: a duplicate generation fails inside the transaction; the next write of the chain, queued
  // at once behind it, fails too.
  CampaignWrite first = write(3, 6, 6.0);
  first.generations.emplace_back().set_generation(1);
  ASSERT_THAT(store->Commit(std::move(first)), IsOk());
  CampaignWrite duplicate = write(3, 7, 7.0);
  duplicate.generations.emplace_back().set_generation(1);
  std::unique_ptr<PendingCommit> failing = store->CommitAsync(std::move(duplicate));
  std::unique_ptr<PendingCommit> after = store->CommitAsync(write(3, 8, 8.0));
  EXPECT_FALSE(failing->Wait().ok());
  EXPECT_THAT(after->Wait(), StatusIs(absl::StatusCode::kUnavailable, testing::_));

  absl::StatusOr<TrialPage> page = store->ListTrials(id, std::nullopt, 0, 100);
  ASSERT_THAT(page, IsOk());
  std::vector<int64_t> stored;
  for (const v1::TrialRecord& t : page->trials) stored.push_back(t.number());
  EXPECT_EQ(stored, (std::vector<int64_t>{3, 4, 6}));
}

}  // namespace
}  // namespace ogive::storage
