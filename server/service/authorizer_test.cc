// Tests of the Authorizer on a real token table (SqliteStore on a temporary file, tokens made by
// TokenAdmin) and a hand-driven clock: the role table of every method, campaign scopes, every way a
// token can be missing or wrong, revocation and new tokens seen without a restart, and the per-token
// rate limit.
#include "server/service/authorizer.h"

#include <unistd.h>

#include <cstdio>
#include <memory>
#include <string>
#include <tuple>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/service/token_admin.h"
#include "storage/sqlite_store.h"

namespace ogive::service {
namespace {

using ::testing::_;
using ::testing::AllOf;
using ::testing::HasSubstr;
using ::testing::Not;

MATCHER_P2(StatusIs, code, message_matcher, "") {
  const absl::Status& status = arg.status();
  *result_listener << "status is " << status;
  return status.code() == code &&
         ::testing::ExplainMatchResult(message_matcher, std::string(status.message()), result_listener);
}

const absl::Time kStart = absl::FromUnixSeconds(1800000000);

class AuthorizerTest : public ::testing::Test {
 protected:
  void SetUp() override {
    path_ = absl::StrCat(::testing::TempDir(), "authorizer_test_", getpid(), "_",
                         ++test_number_, ".db");
    Remove();
    absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store = storage::SqliteStore::Open(path_);
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = *std::move(store);
    admin_ = std::make_unique<TokenAdmin>(store_.get(), [this] { return now_; });
  }
  void TearDown() override {
    authorizer_.reset();
    admin_.reset();
    store_.reset();
    Remove();
  }
  void Remove() {
    for (const char* suffix : {"", "-wal", "-shm", ".lock"}) std::remove(absl::StrCat(path_, suffix).c_str());
  }

  // Makes a token and returns its `authorization` value.
  std::string MakeToken(const std::string& label, const std::string& role, std::vector<std::string> campaigns = {}) {
    v1::CreateTokenRequest request;
    request.set_label(label);
    request.set_role(role);
    for (const std::string& s : campaigns) request.add_campaigns(s);
    absl::StatusOr<v1::CreateTokenResponse> created = admin_->Create(request);
    EXPECT_TRUE(created.ok()) << created.status();
    return created.ok() ? "Bearer " + created->secret() : "";
  }

  void StartAuthorizer(AuthOptions options = {}) {
    absl::StatusOr<std::unique_ptr<Authorizer>> authorizer =
        Authorizer::Create(store_.get(), options, [this] { return now_; });
    ASSERT_TRUE(authorizer.ok()) << authorizer.status();
    authorizer_ = *std::move(authorizer);
  }

  absl::StatusOr<Caller> Check(const std::string& header, Method method, const std::string& campaign = "kiln") {
    std::vector<absl::string_view> values = {header};
    return authorizer_->Check(values, method, campaign);
  }

  static inline int test_number_ = 0;
  std::string path_;
  absl::Time now_ = kStart;
  std::unique_ptr<storage::SqliteStore> store_;
  std::unique_ptr<TokenAdmin> admin_;
  std::unique_ptr<Authorizer> authorizer_;
};

// The role table as the issue states it: reader (GetCampaign, ListCampaigns, ListTrials, Watch), worker
// (+ Ask, Tell, Renew), admin (+ CreateCampaign, SetPhase). Written out, not derived from the code.
struct RoleCase {
  const char* role;
  Method method;
  bool allowed;
};

class RoleTableTest : public AuthorizerTest, public ::testing::WithParamInterface<RoleCase> {};

TEST_P(RoleTableTest, RoleMayCallExactlyItsMethods) {
  const RoleCase& c = GetParam();
  const std::string header = MakeToken("someone", c.role);
  StartAuthorizer();
  absl::StatusOr<Caller> caller = Check(header, c.method);
  if (c.allowed) {
    ASSERT_TRUE(caller.ok()) << caller.status();
    EXPECT_EQ(caller->label, "someone");
    EXPECT_EQ(RoleName(caller->role), std::string(c.role));
  } else {
    EXPECT_THAT(caller, StatusIs(absl::StatusCode::kPermissionDenied,
                                 AllOf(HasSubstr(absl::StrCat(MethodName(c.method), " needs role")),
                                       HasSubstr(absl::StrCat("has role ", c.role)))));
  }
}

INSTANTIATE_TEST_SUITE_P(
    EveryRoleAndMethod, RoleTableTest,
    ::testing::Values(
        RoleCase{"reader", Method::kGetCampaign, true}, RoleCase{"reader", Method::kListCampaigns, true},
        RoleCase{"reader", Method::kListTrials, true}, RoleCase{"reader", Method::kListGenerations, true}, RoleCase{"reader", Method::kWatch, true},
        RoleCase{"reader", Method::kAsk, false}, RoleCase{"reader", Method::kTell, false},
        RoleCase{"reader", Method::kRenew, false}, RoleCase{"reader", Method::kCreateCampaign, false},
        RoleCase{"reader", Method::kSetPhase, false},
        RoleCase{"worker", Method::kGetCampaign, true}, RoleCase{"worker", Method::kListCampaigns, true},
        RoleCase{"worker", Method::kListTrials, true}, RoleCase{"worker", Method::kWatch, true},
        RoleCase{"worker", Method::kAsk, true}, RoleCase{"worker", Method::kTell, true},
        RoleCase{"worker", Method::kRenew, true}, RoleCase{"worker", Method::kCreateCampaign, false},
        RoleCase{"worker", Method::kSetPhase, false},
        RoleCase{"admin", Method::kGetCampaign, true}, RoleCase{"admin", Method::kListCampaigns, true},
        RoleCase{"admin", Method::kListTrials, true}, RoleCase{"admin", Method::kWatch, true},
        RoleCase{"admin", Method::kAsk, true}, RoleCase{"admin", Method::kTell, true},
        RoleCase{"admin", Method::kRenew, true}, RoleCase{"admin", Method::kCreateCampaign, true},
        RoleCase{"admin", Method::kSetPhase, true}),
    [](const ::testing::TestParamInfo<RoleCase>& param_info) {
      return absl::StrCat(param_info.param.role, "_", MethodName(param_info.param.method));
    });

TEST_F(AuthorizerTest, RefusalMessagesNameTheRolesNeeded) {
  const std::string reader = MakeToken("viewer", "reader");
  const std::string worker = MakeToken("farm", "worker");
  StartAuthorizer();
  EXPECT_THAT(Check(reader, Method::kTell),
              StatusIs(absl::StatusCode::kPermissionDenied, HasSubstr("Tell needs role worker or admin")));
  EXPECT_THAT(Check(worker, Method::kSetPhase),
              StatusIs(absl::StatusCode::kPermissionDenied, HasSubstr("SetPhase needs role admin; token 'farm'")));
}

TEST_F(AuthorizerTest, MissingMalformedRepeatedAndUnknownTokensAreUnauthenticated) {
  const std::string good = MakeToken("alice", "admin");
  StartAuthorizer();
  EXPECT_THAT(authorizer_->Check({}, Method::kAsk, "kiln"),
              StatusIs(absl::StatusCode::kUnauthenticated,
                       AllOf(HasSubstr("Ask needs a token (role worker or admin)"), HasSubstr("Bearer"))));
  EXPECT_THAT(Check("Basic QWxhZGRpbjpvcGVuIHNlc2FtZQ==", Method::kGetCampaign),
              StatusIs(absl::StatusCode::kUnauthenticated, HasSubstr("expected 'Bearer <token>'")));
  EXPECT_THAT(Check("Bearer", Method::kGetCampaign), StatusIs(absl::StatusCode::kUnauthenticated, _));
  std::vector<absl::string_view> twice = {good, good};
  EXPECT_THAT(authorizer_->Check(twice, Method::kGetCampaign, "kiln"),
              StatusIs(absl::StatusCode::kUnauthenticated, HasSubstr("sent 2 times")));
  // A well-formed token this server never issued, and a real one with one character changed.
  EXPECT_THAT(Check("Bearer ogt_aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa", Method::kGetCampaign),
              StatusIs(absl::StatusCode::kUnauthenticated, HasSubstr("knows no such token")));
  std::string altered = good;
  altered.back() = altered.back() == 'a' ? 'b' : 'a';
  EXPECT_THAT(Check(altered, Method::kGetCampaign),
              StatusIs(absl::StatusCode::kUnauthenticated, Not(HasSubstr(altered.substr(7)))));
  EXPECT_TRUE(Check(good, Method::kGetCampaign).ok());
}

TEST_F(AuthorizerTest, ACampaignScopeAdmitsItsCampaignsOnly) {
  const std::string scoped = MakeToken("kiln-line", "worker", {"kiln", "glaze"});
  StartAuthorizer();
  EXPECT_TRUE(Check(scoped, Method::kAsk, "kiln").ok());
  EXPECT_TRUE(Check(scoped, Method::kTell, "glaze").ok());
  EXPECT_THAT(Check(scoped, Method::kGetCampaign, "furnace"),
              StatusIs(absl::StatusCode::kPermissionDenied,
                       AllOf(HasSubstr("campaign 'furnace'"), HasSubstr("limited to the campaigns kiln, glaze"))));
  // ListCampaigns names no campaign: it passes, and the caller's scope filters the list.
  absl::StatusOr<Caller> lister = Check(scoped, Method::kListCampaigns, "");
  ASSERT_TRUE(lister.ok()) << lister.status();
  EXPECT_TRUE(lister->MayUse("kiln"));
  EXPECT_FALSE(lister->MayUse("furnace"));
}

TEST_F(AuthorizerTest, RevocationThroughReloadIsInForceAtOnce) {
  const std::string token = MakeToken("temp", "worker");
  StartAuthorizer();
  ASSERT_TRUE(Check(token, Method::kAsk).ok());
  v1::RevokeTokenRequest revoke;
  revoke.set_label("temp");
  ASSERT_TRUE(admin_->Revoke(revoke).ok());
  ASSERT_TRUE(authorizer_->Reload().ok());
  EXPECT_THAT(Check(token, Method::kAsk),
              StatusIs(absl::StatusCode::kUnauthenticated, HasSubstr("the token 'temp' was revoked")));
  EXPECT_FALSE(authorizer_->StillValid("temp"));
}

TEST_F(AuthorizerTest, RevocationWrittenElsewhereIsSeenWithinTheRefreshInterval) {
  const std::string token = MakeToken("temp", "worker");
  AuthOptions options;
  options.refresh_interval = absl::Seconds(2);
  StartAuthorizer(options);
  ASSERT_TRUE(Check(token, Method::kAsk).ok());
  ASSERT_TRUE(store_->RevokeToken("temp", absl::ToUnixNanos(now_)).ok());  // no Reload()
  now_ += absl::Seconds(1);
  EXPECT_TRUE(Check(token, Method::kAsk).ok()) << "the copy is 1 s old, younger than the interval";
  EXPECT_TRUE(authorizer_->StillValid("temp"));
  now_ += absl::Seconds(1);
  EXPECT_THAT(Check(token, Method::kAsk), StatusIs(absl::StatusCode::kUnauthenticated, HasSubstr("revoked")));
  EXPECT_FALSE(authorizer_->StillValid("temp"));
}

TEST_F(AuthorizerTest, ANewTokenIsFoundOnItsFirstUse) {
  AuthOptions options;
  options.refresh_interval = absl::Hours(1);
  options.miss_refresh_interval = absl::Milliseconds(100);
  StartAuthorizer(options);
  EXPECT_EQ(authorizer_->valid_tokens(), 0);
  const std::string token = MakeToken("late", "reader");  // no Reload()
  // A miss re-reads the table at most every miss_refresh_interval: the copy is from kStart.
  EXPECT_THAT(Check(token, Method::kGetCampaign), StatusIs(absl::StatusCode::kUnauthenticated, _));
  now_ += absl::Milliseconds(100);
  EXPECT_TRUE(Check(token, Method::kGetCampaign).ok());
  EXPECT_EQ(authorizer_->valid_tokens(), 1);
}

TEST_F(AuthorizerTest, EachTokenHasItsOwnRateLimit) {
  const std::string fast = MakeToken("fast", "worker");
  const std::string other = MakeToken("other", "worker");
  AuthOptions options;
  options.max_requests_per_second_per_token = 5;  // bursts of 10
  StartAuthorizer(options);
  for (int i = 0; i < 10; ++i) ASSERT_TRUE(Check(fast, Method::kAsk).ok()) << i;
  EXPECT_THAT(Check(fast, Method::kAsk),
              StatusIs(absl::StatusCode::kResourceExhausted,
                       AllOf(HasSubstr("token 'fast'"), HasSubstr("5 requests per second"),
                             HasSubstr("--max-requests-per-second-per-token"))));
  EXPECT_TRUE(Check(other, Method::kAsk).ok());
  now_ += absl::Milliseconds(200);  // one more at 5 per second
  EXPECT_TRUE(Check(fast, Method::kAsk).ok());
  EXPECT_THAT(Check(fast, Method::kAsk), StatusIs(absl::StatusCode::kResourceExhausted, _));
}

TEST_F(AuthorizerTest, WithoutTokensEveryCallPassesAsAnUnlimitedAdmin) {
  AuthOptions options;
  options.require_tokens = false;
  options.max_requests_per_second_per_token = 1;
  absl::StatusOr<std::unique_ptr<Authorizer>> open = Authorizer::Create(nullptr, options, [this] { return now_; });
  ASSERT_TRUE(open.ok()) << open.status();
  for (int i = 0; i < 5; ++i) {
    absl::StatusOr<Caller> caller = (*open)->Check({}, Method::kSetPhase, "kiln");
    ASSERT_TRUE(caller.ok());
    EXPECT_EQ(caller->label, "");
    EXPECT_EQ(caller->role, Role::kAdmin);
    EXPECT_TRUE(caller->MayUse("anything"));
  }
}

TEST_F(AuthorizerTest, OptionsAreValidated) {
  AuthOptions options;
  options.max_requests_per_second_per_token = -1;
  EXPECT_THAT(Authorizer::Create(store_.get(), options, [this] { return now_; }),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("max_requests_per_second_per_token")));
  options = AuthOptions();
  EXPECT_THAT(Authorizer::Create(nullptr, options, [this] { return now_; }),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("store")));
}

}  // namespace
}  // namespace ogive::service
