// Tests of TokenAdmin on a SqliteStore on a temporary file: what each command stores and returns,
// the checks on every field, and that the database file never holds a token, only its digest.
#include "server/service/token_admin.h"

#include <unistd.h>

#include <cstdio>
#include <fstream>
#include <iterator>
#include <memory>
#include <sstream>
#include <string>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/service/token_secret.h"
#include "storage/sqlite_store.h"

namespace ogive::service {
namespace {

using ::testing::AllOf;
using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::StartsWith;

MATCHER_P2(StatusIs, code, message_matcher, "") {
  const absl::Status& status = arg.status();
  *result_listener << "status is " << status;
  return status.code() == code &&
         ::testing::ExplainMatchResult(message_matcher, std::string(status.message()), result_listener);
}

const absl::Time kStart = absl::FromUnixSeconds(1800000000);

std::string FileBytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

class TokenAdminTest : public ::testing::Test {
 protected:
  void SetUp() override {
    path_ = absl::StrCat(::testing::TempDir(), "token_admin_test_", getpid(), "_",
                         ++test_number_, ".db");
    Remove();
    Open();
  }
  void TearDown() override {
    admin_.reset();
    store_.reset();
    Remove();
  }
  void Open() {
    absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store = storage::SqliteStore::Open(path_);
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = *std::move(store);
    admin_ = std::make_unique<TokenAdmin>(store_.get(), [this] { return now_; }, [this] { ++changes_; });
  }
  void Remove() {
    for (const char* suffix : {"", "-wal", "-shm", ".lock"}) std::remove(absl::StrCat(path_, suffix).c_str());
  }
  absl::StatusOr<v1::CreateTokenResponse> Create(const std::string& label, const std::string& role,
                                                 std::vector<std::string> campaigns = {}) {
    v1::CreateTokenRequest request;
    request.set_label(label);
    request.set_role(role);
    for (const std::string& s : campaigns) request.add_campaigns(s);
    return admin_->Create(request);
  }
  absl::StatusOr<v1::RevokeTokenResponse> Revoke(const std::string& label) {
    v1::RevokeTokenRequest request;
    request.set_label(label);
    return admin_->Revoke(request);
  }

  static inline int test_number_ = 0;
  std::string path_;
  absl::Time now_ = kStart;
  int changes_ = 0;
  std::unique_ptr<storage::SqliteStore> store_;
  std::unique_ptr<TokenAdmin> admin_;
};

TEST_F(TokenAdminTest, CreateReturnsTheSecretOnceAndStoresItsDigest) {
  absl::StatusOr<v1::CreateTokenResponse> created = Create("farm-a", "worker", {"kiln", "glaze", "kiln"});
  ASSERT_TRUE(created.ok()) << created.status();
  EXPECT_THAT(created->secret(), StartsWith("ogt_"));
  EXPECT_EQ(created->token().label(), "farm-a");
  EXPECT_EQ(created->token().role(), "worker");
  EXPECT_THAT(created->token().campaigns(), ElementsAre("kiln", "glaze"));  // the repeat is dropped
  EXPECT_EQ(created->token().created_at_unix_ms(), absl::ToUnixMillis(kStart));
  EXPECT_FALSE(created->token().revoked());
  EXPECT_EQ(changes_, 1);

  absl::StatusOr<std::vector<storage::StoredToken>> stored = store_->ListTokens();
  ASSERT_TRUE(stored.ok()) << stored.status();
  ASSERT_EQ(stored->size(), 1u);
  EXPECT_EQ((*stored)[0].digest, TokenDigest(created->secret()));
  EXPECT_EQ((*stored)[0].created_at_ns, absl::ToUnixNanos(kStart));

  absl::StatusOr<v1::ListTokensResponse> listed = admin_->List();
  ASSERT_TRUE(listed.ok());
  ASSERT_EQ(listed->tokens_size(), 1);
  EXPECT_EQ(listed->tokens(0).label(), "farm-a");
  EXPECT_EQ(listed->DebugString().find(created->secret()), std::string::npos);
}

TEST_F(TokenAdminTest, TheDatabaseFilesNeverHoldATokenOnlyItsDigest) {
  std::vector<std::string> secrets;
  for (const char* label : {"one", "two", "three"}) {
    absl::StatusOr<v1::CreateTokenResponse> created = Create(label, "admin");
    ASSERT_TRUE(created.ok()) << created.status();
    secrets.push_back(created->secret());
  }
  ASSERT_TRUE(Revoke("two").ok());
  auto check = [&](const std::string& bytes, const std::string& when) {
    ASSERT_FALSE(bytes.empty()) << when;
    for (const std::string& secret : secrets) {
      EXPECT_EQ(bytes.find(secret), std::string::npos) << when << ": the token is in the file";
      // Nor its random part alone, in case a prefix were dropped on the way.
      EXPECT_EQ(bytes.find(secret.substr(4)), std::string::npos) << when;
    }
  };
  // While the store is open, the new rows may be in the write-ahead log.
  const std::string open_bytes = FileBytes(path_) + FileBytes(path_ + "-wal");
  check(open_bytes, "open");
  // Closed, the log is folded into the database file. The digests are there: the search works.
  store_.reset();
  const std::string closed_bytes = FileBytes(path_);
  check(closed_bytes, "closed");
  for (const std::string& secret : secrets) {
    EXPECT_NE(closed_bytes.find(TokenDigest(secret)), std::string::npos) << "digest missing";
  }
  EXPECT_NE(closed_bytes.find("three"), std::string::npos);
}

TEST_F(TokenAdminTest, FieldsAreCheckedAndNamed) {
  EXPECT_THAT(Create("", "admin"), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("label: ''")));
  EXPECT_THAT(Create("has space", "admin"),
              StatusIs(absl::StatusCode::kInvalidArgument,
                       AllOf(HasSubstr("label: 'has space'"), HasSubstr("letters, digits"))));
  EXPECT_THAT(Create(std::string(65, 'a'), "admin"),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("1..64")));
  EXPECT_TRUE(Create(std::string(64, 'a'), "admin").ok());
  EXPECT_TRUE(Create("ops@lab-2.x_y", "reader").ok());
  EXPECT_THAT(Create("bob", "operator"),
              StatusIs(absl::StatusCode::kInvalidArgument,
                       HasSubstr("role: must be reader, worker or admin, got 'operator'")));
  EXPECT_THAT(Create("bob", "Admin"), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("role")));
  EXPECT_THAT(Create("bob", "worker", {"kiln,glaze"}),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("campaigns: 'kiln,glaze' is not a campaign name")));
  EXPECT_THAT(Create("bob", "worker", {""}), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("campaigns")));
  std::vector<std::string> many(101, "s");
  for (int i = 0; i < 101; ++i) many[i] = absl::StrCat("s", i);
  EXPECT_THAT(Create("bob", "worker", many), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("at most 100")));
  // Nothing of the refused ones was stored.
  absl::StatusOr<v1::ListTokensResponse> listed = admin_->List();
  ASSERT_TRUE(listed.ok());
  EXPECT_EQ(listed->tokens_size(), 2);
}

TEST_F(TokenAdminTest, LabelsAreNeverReused) {
  ASSERT_TRUE(Create("alice", "admin").ok());
  EXPECT_THAT(Create("alice", "reader"), StatusIs(absl::StatusCode::kAlreadyExists, HasSubstr("'alice'")));
  ASSERT_TRUE(Revoke("alice").ok());
  EXPECT_THAT(Create("alice", "reader"),
              StatusIs(absl::StatusCode::kAlreadyExists, HasSubstr("revoked tokens included")));
}

TEST_F(TokenAdminTest, RevokeMarksTheTokenOnceAndKeepsTheFirstTime) {
  ASSERT_TRUE(Create("temp", "worker").ok());
  EXPECT_EQ(changes_, 1);
  now_ += absl::Minutes(5);
  absl::StatusOr<v1::RevokeTokenResponse> revoked = Revoke("temp");
  ASSERT_TRUE(revoked.ok()) << revoked.status();
  EXPECT_FALSE(revoked->already_revoked());
  EXPECT_TRUE(revoked->token().revoked());
  EXPECT_EQ(revoked->token().revoked_at_unix_ms(), absl::ToUnixMillis(kStart + absl::Minutes(5)));
  EXPECT_EQ(changes_, 2);
  now_ += absl::Minutes(5);
  absl::StatusOr<v1::RevokeTokenResponse> again = Revoke("temp");
  ASSERT_TRUE(again.ok());
  EXPECT_TRUE(again->already_revoked());
  EXPECT_EQ(again->token().revoked_at_unix_ms(), absl::ToUnixMillis(kStart + absl::Minutes(5)));
  EXPECT_EQ(changes_, 2);  // nothing changed
  EXPECT_THAT(Revoke("nobody"), StatusIs(absl::StatusCode::kNotFound, HasSubstr("no token labelled 'nobody'")));
  // A reopened store reads the same.
  admin_.reset();
  store_.reset();
  Open();
  absl::StatusOr<v1::ListTokensResponse> listed = admin_->List();
  ASSERT_TRUE(listed.ok());
  ASSERT_EQ(listed->tokens_size(), 1);
  EXPECT_TRUE(listed->tokens(0).revoked());
  EXPECT_EQ(listed->tokens(0).revoked_at_unix_ms(), absl::ToUnixMillis(kStart + absl::Minutes(5)));
}

}  // namespace
}  // namespace ogive::service
