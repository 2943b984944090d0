// Tests of the Registry's locking around a campaign's creation: the creation's commit (an fsync) must
// not hold up the lookups every Ask and Tell of every other campaign make, and two creations of one
// name must still be decided one after the other. The store is a real SqliteStore behind a wrapper
// whose CreateCampaign waits until the test lets it go (a slow disk, faked in the environment).
#include "server/service/registry.h"

#include <unistd.h>

#include <atomic>
#include <chrono>
#include <filesystem>
#include <future>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/synchronization/notification.h"
#include "gtest/gtest.h"
#include "storage/sqlite_store.h"
#include "tests/support/forwarding_store.h"

namespace ogive::service {
namespace {

class SlowCreateStore final : public testing::ForwardingStore {
 public:
  using ForwardingStore::ForwardingStore;
  // From now on CreateCampaign waits in the store until Release().
  void Hold() { hold_ = true; }
  void Release() { released_.Notify(); }
  void WaitUntilACreationIsHeld() { entered_.WaitForNotification(); }

  absl::StatusOr<int64_t> CreateCampaign(const std::string& name, const v1::CampaignDesign& design,
                                      const v1::EngineState& engine, const std::string& request_id) override {
    if (hold_) {
      if (!entered_.HasBeenNotified()) entered_.Notify();
      released_.WaitForNotification();
    }
    return ForwardingStore::CreateCampaign(name, design, engine, request_id);
  }

 private:
  std::atomic<bool> hold_{false};
  absl::Notification entered_;
  absl::Notification released_;
};

v1::CampaignDesign KilnDesign(const std::string& name) {
  v1::CampaignDesign d;
  d.set_name(name);
  for (const char* parameter : {"peak_temp", "soak_minutes"}) {
    v1::Parameter* p = d.add_parameters();
    p->set_name(parameter);
    p->mutable_real()->set_low(0);
    p->mutable_real()->set_high(10);
  }
  d.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  d.set_seed(3);
  return d;
}

class RegistryTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = ::testing::TempDir() + "/registry_test_" + std::to_string(::getpid());
    std::filesystem::remove_all(dir_);
    std::filesystem::create_directories(dir_);
    absl::StatusOr<std::unique_ptr<storage::SqliteStore>> opened = storage::SqliteStore::Open(dir_ + "/kiln.db");
    ASSERT_TRUE(opened.ok()) << opened.status();
    real_ = *std::move(opened);
    store_ = std::make_unique<SlowCreateStore>(real_.get());
    registry_ = std::make_unique<Registry>(store_.get(), ServiceLimits());
  }
  void TearDown() override {
    registry_.reset();
    store_.reset();
    real_.reset();
    std::filesystem::remove_all(dir_);
  }

  std::string dir_;
  std::unique_ptr<storage::SqliteStore> real_;
  std::unique_ptr<SlowCreateStore> store_;
  std::unique_ptr<Registry> registry_;
};

TEST_F(RegistryTest, LookupsDoNotWaitForACreationsCommit) {
  ASSERT_TRUE(registry_->Create(KilnDesign("kiln-a"), "create-a").ok());
  store_->Hold();
  std::thread creating([&] { EXPECT_TRUE(registry_->Create(KilnDesign("kiln-b"), "create-b").ok()); });
  store_->WaitUntilACreationIsHeld();

  // While kiln-b's commit is held in the store, kiln-a is found and the list is read. Bounded: if a
  // lookup waited for the creation, the future is not ready, the check fails, and the release below
  // lets everything finish.
  std::future<bool> found = std::async(std::launch::async, [&] {
    return registry_->Find("kiln-a").ok() && registry_->All().size() == 1;
  });
  const bool in_time = found.wait_for(std::chrono::seconds(5)) == std::future_status::ready;
  EXPECT_TRUE(in_time) << "Find waited for another campaign's creation to commit";
  // A campaign being created is not found before its commit.
  EXPECT_EQ(registry_->Find("kiln-b").status().code(), absl::StatusCode::kNotFound);
  store_->Release();
  creating.join();
  EXPECT_TRUE(found.get());
  EXPECT_TRUE(registry_->Find("kiln-b").ok());
  EXPECT_EQ(registry_->All().size(), 2u);
}

TEST_F(RegistryTest, CreationsOfOneNameAreDecidedOneAfterTheOther) {
  store_->Hold();
  absl::StatusOr<std::shared_ptr<CampaignHost>> first, retried, other;
  std::thread a([&] { first = registry_->Create(KilnDesign("kiln-c"), "create-c"); });
  store_->WaitUntilACreationIsHeld();
  // A retry of the same request and a different request for the same name, both while the first
  // creation's commit is held: neither may reach the store with the name a second time.
  std::thread b([&] { retried = registry_->Create(KilnDesign("kiln-c"), "create-c"); });
  std::thread c([&] { other = registry_->Create(KilnDesign("kiln-c"), "someone-else"); });
  std::this_thread::sleep_for(std::chrono::milliseconds(50));  // let b and c reach the registry
  store_->Release();
  a.join();
  b.join();
  c.join();
  ASSERT_TRUE(first.ok()) << first.status();
  ASSERT_TRUE(retried.ok()) << retried.status();
  EXPECT_EQ(retried->get(), first->get());  // the retry gets the campaign its first attempt created
  EXPECT_EQ(other.status().code(), absl::StatusCode::kAlreadyExists) << other.status();
  EXPECT_EQ(registry_->All().size(), 1u);
}

}  // namespace
}  // namespace ogive::service
