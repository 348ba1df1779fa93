// Tests for the access tables (schema version 5): tokens stored as hashes, the
// first-admin rule, revocation, the audit log and its filters, the migration
// from version 3; and AccessControl's decisions on top of them.
#include <memory>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/auth/access_control.h"
#include "server/auth/rules.h"
#include "server/auth/tokens.h"
#include "server/store/store.h"
#include "tests/support/process.h"
#include "tests/unit/server/sqlite_test_util.h"

namespace skerry::auth {
namespace {

using skerry::testing::Message;
using skerry::testing::RawExec;
using skerry::testing::RawQuery;
using skerry::testing::TempDir;
using ::testing::HasSubstr;
using ::testing::Not;

class AccessStoreTest : public ::testing::Test {
 protected:
  void SetUp() override {
    auto s = store::Store::Open(path());
    ASSERT_TRUE(s.ok()) << s.status();
    store_ = std::move(*s);
  }
  std::string path() const { return dir_.File("skerry.db"); }

  std::unique_ptr<AccessControl> Open(AuthMode mode) {
    auto ac = AccessControl::Open(store_.get(), &clock_, mode);
    EXPECT_TRUE(ac.ok()) << ac.status();
    return ac.ok() ? std::move(*ac) : nullptr;
  }
  static std::vector<std::string> Bearer(const std::string& token) {
    return {"Bearer " + token};
  }

  TempDir dir_;
  FakeClock clock_;
  std::unique_ptr<store::Store> store_;
};

TEST(TokenTest, NewTokensAreWellFormedAndDistinct) {
  auto a = NewToken();
  auto b = NewToken();
  ASSERT_TRUE(a.ok() && b.ok());
  EXPECT_TRUE(IsWellFormedToken(*a)) << *a;
  EXPECT_NE(*a, *b);
  EXPECT_FALSE(IsWellFormedToken("skt_abc"));
  EXPECT_FALSE(IsWellFormedToken(std::string("skt_") + std::string(64, 'G')));
}

// SHA-256("abc") = ba7816bf...: FIPS 180-2, appendix B.1.
TEST(TokenTest, HashIsSha256HexOfTheWholeToken) {
  EXPECT_EQ(HashToken("abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
}

TEST_F(AccessStoreTest, OnlyTheHashOfATokenIsStored) {
  auto admin = AccessControl::InitAdmin(store_.get(), &clock_, "ada");
  ASSERT_TRUE(admin.ok()) << admin.status();
  EXPECT_EQ(RawQuery(path(), "SELECT count(*) FROM tokens WHERE hash = '" +
                                 HashToken(admin->secret) + "'"),
            "1");
  EXPECT_EQ(RawQuery(path(),
                     "SELECT count(*) FROM tokens WHERE hash LIKE "
                     "'%" +
                         admin->secret.substr(4, 20) + "%'"),
            "0");
  EXPECT_EQ(RawQuery(path(), "SELECT name FROM principals"), "ada");
}

TEST_F(AccessStoreTest, SecondFirstAdminIsRefusedWhileOneHasALiveToken) {
  ASSERT_TRUE(AccessControl::InitAdmin(store_.get(), &clock_, "ada").ok());
  auto again = AccessControl::InitAdmin(store_.get(), &clock_, "bob");
  ASSERT_FALSE(again.ok());
  EXPECT_EQ(again.status().code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_THAT(Message(again.status()), HasSubstr("ada"));
  EXPECT_EQ(RawQuery(path(), "SELECT count(*) FROM tokens"), "1");
  // Once every admin token is revoked, a new first admin may be made.
  ASSERT_TRUE(store_->access().RevokeToken(1, "ops", 5).ok());
  EXPECT_TRUE(AccessControl::InitAdmin(store_.get(), &clock_, "bob").ok());
}

TEST_F(AccessStoreTest, ReservedAndBadPrincipalNamesAreRefused) {
  auto ac = Open(AuthMode::kOff);
  for (const char* bad : {"local", "", "-x", "a b", "ümlaut"}) {
    SCOPED_TRACE(bad);
    auto t = ac->CreateToken(bad, skerry::v1::ROLE_VIEWER, "", "ops");
    ASSERT_FALSE(t.ok());
    EXPECT_EQ(t.status().code(), absl::StatusCode::kInvalidArgument);
  }
  auto no_role = ac->CreateToken("eve", skerry::v1::ROLE_UNSPECIFIED, "", "x");
  EXPECT_EQ(no_role.status().code(), absl::StatusCode::kInvalidArgument);
}

TEST_F(AccessStoreTest, AutoModeIsOffOnAFreshDatabaseAndOnAfterInitAdmin) {
  EXPECT_FALSE(Open(AuthMode::kAuto)->enabled());
  EXPECT_FALSE(AccessControl::Open(store_.get(), &clock_, AuthMode::kOn).ok());
  ASSERT_TRUE(AccessControl::InitAdmin(store_.get(), &clock_, "ada").ok());
  EXPECT_TRUE(Open(AuthMode::kAuto)->enabled());
  EXPECT_FALSE(Open(AuthMode::kOff)->enabled());
}

TEST_F(AccessStoreTest, RevokedTokenIsUnauthenticatedAtOnce) {
  ASSERT_TRUE(AccessControl::InitAdmin(store_.get(), &clock_, "ada").ok());
  auto ac = Open(AuthMode::kAuto);
  auto t = ac->CreateToken("rita", skerry::v1::ROLE_RESEARCHER, "lab", "ada");
  ASSERT_TRUE(t.ok()) << t.status();
  const std::string method = "/skerry.v1.RunService/ListRuns";
  Verdict ok = ac->Admit(method, Bearer(t->secret));
  EXPECT_TRUE(ok.status.ok()) << ok.status.error_message();
  EXPECT_EQ(ok.caller->principal, "rita");
  ASSERT_TRUE(ac->RevokeToken(t->record.id, "ada").ok());
  Verdict gone = ac->Admit(method, Bearer(t->secret));
  EXPECT_EQ(gone.status.error_code(), grpc::StatusCode::UNAUTHENTICATED);
  EXPECT_THAT(gone.status.error_message(), Not(HasSubstr(t->secret)));
  auto twice = ac->RevokeToken(t->record.id, "ada");
  EXPECT_EQ(twice.status().code(), absl::StatusCode::kFailedPrecondition);
  // Still revoked after a restart: the store is the truth.
  EXPECT_EQ(Open(AuthMode::kAuto)
                ->Admit(method, Bearer(t->secret))
                .status.error_code(),
            grpc::StatusCode::UNAUTHENTICATED);
}

TEST_F(AccessStoreTest, RoleRefusalNamesTheRoleNeeded) {
  ASSERT_TRUE(AccessControl::InitAdmin(store_.get(), &clock_, "ada").ok());
  auto ac = Open(AuthMode::kAuto);
  auto viewer = ac->CreateToken("vic", skerry::v1::ROLE_VIEWER, "", "ada");
  ASSERT_TRUE(viewer.ok());
  Verdict v =
      ac->Admit("/skerry.v1.RunService/SubmitRun", Bearer(viewer->secret));
  EXPECT_EQ(v.status.error_code(), grpc::StatusCode::PERMISSION_DENIED);
  EXPECT_THAT(v.status.error_message(), HasSubstr("researcher or admin"));
  EXPECT_THAT(v.status.error_message(), HasSubstr("viewer"));
  Verdict none =
      ac->Admit("/skerry.v1.RunService/NoSuchMethod", Bearer(viewer->secret));
  // Not served at all: what gRPC itself says of an unknown method.
  EXPECT_EQ(none.status.error_code(), grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_THAT(none.status.error_message(), HasSubstr("no method"));
  Verdict anonymous = ac->Admit("/skerry.v1.RunService/ListRuns", {});
  EXPECT_EQ(anonymous.status.error_code(), grpc::StatusCode::UNAUTHENTICATED);
  Verdict health = ac->Admit("/grpc.health.v1.Health/Check", {});
  EXPECT_TRUE(health.status.ok());
}

TEST_F(AccessStoreTest, AuditEntriesAreFilteredByRunAndPrincipalNewestFirst) {
  for (int i = 1; i <= 4; ++i) {
    store::AuditRecord e;
    e.at_ms = 1000 * i;
    e.principal = i % 2 == 0 ? "rita" : "ada";
    e.role = skerry::v1::ROLE_RESEARCHER;
    e.method = "/skerry.v1.RunService/PauseRun";
    e.run_id = i <= 2 ? 7 : 8;
    e.peer = "ipv4:127.0.0.1:1";
    auto id = store_->access().BeginAudit(e);
    ASSERT_TRUE(id.ok()) << id.status();
    if (i != 4) {
      e.id = *id;
      e.code = 0;
      ASSERT_TRUE(store_->access().FinishAudit(e).ok());
    }
  }
  store::AuditQuery by_run;
  by_run.run_id = 7;
  auto rows = store_->access().QueryAudit(by_run);
  ASSERT_TRUE(rows.ok());
  ASSERT_EQ(rows->size(), 2u);
  EXPECT_EQ((*rows)[0].id, 2);
  EXPECT_EQ((*rows)[1].id, 1);
  store::AuditQuery by_who;
  by_who.principal = "rita";
  rows = store_->access().QueryAudit(by_who);
  ASSERT_TRUE(rows.ok());
  ASSERT_EQ(rows->size(), 2u);
  EXPECT_EQ((*rows)[0].id, 4);
  EXPECT_FALSE((*rows)[0].code.has_value())
      << "not ended: the code stays empty";
  EXPECT_TRUE((*rows)[1].code.has_value());
}

// A version-4 database (before access control) gains the access tables and
// keeps its runs; access control stays off on it until --init-admin.
TEST_F(AccessStoreTest, Version4DatabaseIsMigratedToTheAccessTables) {
  store_.reset();
  RawExec(path(),
          skerry::testing::UndoSchemaTo(4) +
              "INSERT INTO runs (name, owner, spec, spec_text, seed, state, "
              "created_ms, updated_ms) VALUES ('old', 'local', x'', '', 1, 4, "
              "1, 1)");
  auto again = store::Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  store_ = std::move(*again);
  EXPECT_EQ(*store_->db().SchemaVersion(), store::Store::kSchemaVersion);
  EXPECT_EQ(RawQuery(path(),
                     "SELECT count(*) FROM sqlite_master WHERE name IN "
                     "('principals', 'tokens', 'audit')"),
            "3");
  EXPECT_EQ(RawQuery(path(), "SELECT owner FROM runs WHERE name = 'old'"),
            "local");
  EXPECT_FALSE(Open(AuthMode::kAuto)->enabled());
}

}  // namespace
}  // namespace skerry::auth
