// Tests of the tokens table of SqliteStore (schema version 2) on temporary files: round trips,
// revocation, refusals, and the migration of a version-1 database (its events keep their rows and
// get an empty token label). A separate raw sqlite3 connection inspects the file after the store
// closed.
#include <sqlite3.h>
#include <unistd.h>

#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "storage/schema.h"
#include "storage/sqlite_connection.h"
#include "storage/sqlite_store.h"

namespace ogive::storage {
namespace {

using ::testing::_;
using ::testing::ElementsAre;
using ::testing::HasSubstr;

MATCHER_P2(StatusIs, code, message_matcher, "") {
  *result_listener << "status is " << arg;
  return arg.code() == code &&
         ::testing::ExplainMatchResult(message_matcher, std::string(arg.message()), result_listener);
}

class SqliteStoreTokensTest : public ::testing::Test {
 protected:
  void SetUp() override {
    path_ = absl::StrCat(::testing::TempDir(), "sqlite_store_tokens_test_", getpid(), "_", ++test_number_, ".db");
    Remove();
  }
  void TearDown() override { Remove(); }
  void Remove() {
    for (const char* suffix : {"", "-wal", "-shm", ".lock"}) std::remove(absl::StrCat(path_, suffix).c_str());
  }
  std::unique_ptr<SqliteStore> Open() {
    absl::StatusOr<std::unique_ptr<SqliteStore>> store = SqliteStore::Open(path_);
    EXPECT_TRUE(store.ok()) << store.status();
    return store.ok() ? *std::move(store) : nullptr;
  }
  static StoredToken Token(const std::string& label, char fill, const std::string& role = "worker",
                           std::vector<std::string> campaigns = {}) {
    StoredToken t;
    t.label = label;
    t.digest = std::string(32, fill);
    t.role = role;
    t.campaigns = std::move(campaigns);
    t.created_at_ns = 1800000000000000000 + fill;
    return t;
  }

  static inline int test_number_ = 0;
  std::string path_;
};

TEST_F(SqliteStoreTokensTest, TokensRoundTripInLabelOrderAcrossAReopen) {
  {
    std::unique_ptr<SqliteStore> store = Open();
    ASSERT_NE(store, nullptr);
    ASSERT_TRUE(store->CreateToken(Token("zeta", 'z', "admin")).ok());
    ASSERT_TRUE(store->CreateToken(Token("alpha", 'a', "reader", {"kiln", "glaze"})).ok());
  }
  std::unique_ptr<SqliteStore> store = Open();
  ASSERT_NE(store, nullptr);
  absl::StatusOr<std::vector<StoredToken>> tokens = store->ListTokens();
  ASSERT_TRUE(tokens.ok()) << tokens.status();
  ASSERT_EQ(tokens->size(), 2u);
  const StoredToken& a = (*tokens)[0];
  EXPECT_EQ(a.label, "alpha");
  EXPECT_EQ(a.digest, std::string(32, 'a'));
  EXPECT_EQ(a.role, "reader");
  EXPECT_THAT(a.campaigns, ElementsAre("kiln", "glaze"));
  EXPECT_EQ(a.created_at_ns, 1800000000000000000 + 'a');
  EXPECT_FALSE(a.revoked_at_ns.has_value());
  EXPECT_EQ((*tokens)[1].label, "zeta");
  EXPECT_TRUE((*tokens)[1].campaigns.empty());
}

TEST_F(SqliteStoreTokensTest, RevokeOnceKeepsTheFirstTime) {
  std::unique_ptr<SqliteStore> store = Open();
  ASSERT_NE(store, nullptr);
  ASSERT_TRUE(store->CreateToken(Token("temp", 't')).ok());
  absl::StatusOr<bool> first = store->RevokeToken("temp", 111);
  ASSERT_TRUE(first.ok()) << first.status();
  EXPECT_TRUE(*first);
  absl::StatusOr<bool> second = store->RevokeToken("temp", 222);
  ASSERT_TRUE(second.ok());
  EXPECT_FALSE(*second);
  absl::StatusOr<std::vector<StoredToken>> tokens = store->ListTokens();
  ASSERT_TRUE(tokens.ok());
  ASSERT_EQ(tokens->size(), 1u);
  EXPECT_EQ((*tokens)[0].revoked_at_ns, 111);
  EXPECT_THAT(store->RevokeToken("nobody", 1).status(),
              StatusIs(absl::StatusCode::kNotFound, HasSubstr("'nobody'")));
}

TEST_F(SqliteStoreTokensTest, RefusesMalformedTokensAndTakenLabels) {
  std::unique_ptr<SqliteStore> store = Open();
  ASSERT_NE(store, nullptr);
  ASSERT_TRUE(store->CreateToken(Token("alice", 'a')).ok());
  EXPECT_THAT(store->CreateToken(Token("alice", 'b')), StatusIs(absl::StatusCode::kAlreadyExists, HasSubstr("alice")));
  StoredToken short_digest = Token("bob", 'b');
  short_digest.digest = "abc";
  EXPECT_THAT(store->CreateToken(short_digest), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("digest")));
  EXPECT_THAT(store->CreateToken(Token("bob", 'b', "root")),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("role")));
  EXPECT_THAT(store->CreateToken(Token("bob", 'b', "worker", {"a,b"})),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("campaigns")));
  EXPECT_THAT(store->CreateToken(Token("", 'b')), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("label")));
  // The same digest under another label: refused by the UNIQUE constraint, nothing stored.
  EXPECT_THAT(store->CreateToken(Token("carol", 'a')), StatusIs(absl::StatusCode::kAlreadyExists, _));
  absl::StatusOr<std::vector<StoredToken>> tokens = store->ListTokens();
  ASSERT_TRUE(tokens.ok());
  EXPECT_EQ(tokens->size(), 1u);
}

TEST_F(SqliteStoreTokensTest, EventsCarryTheTokenLabel) {
  std::unique_ptr<SqliteStore> store = Open();
  ASSERT_NE(store, nullptr);
  v1::CampaignDesign design;
  design.set_name("kiln");
  absl::StatusOr<int64_t> id = store->CreateCampaign("kiln", design, v1::EngineState(), "");
  ASSERT_TRUE(id.ok()) << id.status();
  CampaignWrite write;
  write.campaign_id = *id;
  write.events.push_back({"phase", 0, "", "paused", 5, "alice"});
  write.events.push_back({"lapse", 3, "node-1", "", 6});
  ASSERT_TRUE(store->Commit(std::move(write)).ok());
  absl::StatusOr<std::vector<Event>> events = store->ListEvents(*id, 10);
  ASSERT_TRUE(events.ok()) << events.status();
  ASSERT_EQ(events->size(), 2u);
  EXPECT_EQ((*events)[0].token_label, "alice");
  EXPECT_EQ((*events)[1].token_label, "");
}

}  // namespace
}  // namespace ogive::storage
