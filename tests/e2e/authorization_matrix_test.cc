// The authorisation matrix, against a real coordinator binary: every method of
// every service in proto/skerry/v1 (found through the protobuf descriptors of
// the generated files, so a new RPC is covered without touching this test) is
// called with no token, a wrong token, a revoked token and a token of each
// role, with an empty request (grpc::GenericStub, so the test needs no message
// types), and the status code is checked against the rule table
// (server/auth/rules.h). A method without a rule fails the test. A few cells
// are also written out by hand below, independent of the table.
#include <dirent.h>

#include <fstream>
#include <iterator>
#include <map>
#include <set>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_replace.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "google/protobuf/descriptor.h"
#include "grpcpp/generic/generic_stub.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "server/auth/rules.h"
#include "server/auth/tokens.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "skerry/v1/validation.grpc.pb.h"
#include "tests/e2e/access_fixture.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
namespace v1 = skerry::v1;

// Every "/pkg.Service/Method" of the generated files of proto/skerry/v1.
std::vector<std::string> AllMethods() {
  std::vector<std::string> out;
  DIR* dir = opendir(SKERRY_PROTO_DIR);
  EXPECT_NE(dir, nullptr) << SKERRY_PROTO_DIR;
  if (dir == nullptr) return out;
  std::set<std::string> files;
  while (dirent* e = readdir(dir)) {
    if (!absl::EndsWith(e->d_name, ".proto")) continue;
    // A file of storage messages only (strategy.proto) declares no service:
    // nothing here to call, and a binary that does not use it may leave its
    // generated code out.
    std::ifstream in(absl::StrCat(SKERRY_PROTO_DIR, "/", e->d_name));
    const std::string text((std::istreambuf_iterator<char>(in)),
                           std::istreambuf_iterator<char>());
    if (text.find("\nservice ") != std::string::npos) files.insert(e->d_name);
  }
  closedir(dir);
  for (const std::string& f : files) {
    const google::protobuf::FileDescriptor* fd =
        google::protobuf::DescriptorPool::generated_pool()->FindFileByName(
            "skerry/v1/" + f);
    EXPECT_NE(fd, nullptr) << f << " is not compiled into skerry_proto";
    if (fd == nullptr) continue;
    for (int s = 0; s < fd->service_count(); ++s) {
      const google::protobuf::ServiceDescriptor* sd = fd->service(s);
      for (int m = 0; m < sd->method_count(); ++m) {
        out.push_back(
            absl::StrCat("/", sd->full_name(), "/", sd->method(m)->name()));
      }
    }
  }
  return out;
}

struct Answer {
  grpc::StatusCode code = grpc::StatusCode::UNKNOWN;
  std::string message;
};

// Calls `method` with one empty request message, reading every answer.
Answer CallRaw(const std::shared_ptr<grpc::Channel>& channel,
               const std::string& method, const std::string& token) {
  grpc::GenericStub stub(channel);
  grpc::ClientContext ctx;
  testing::Authorize(&ctx, token);
  grpc::CompletionQueue cq;
  std::unique_ptr<grpc::GenericClientAsyncReaderWriter> call =
      stub.PrepareCall(&ctx, method, &cq);
  void* tag = nullptr;
  bool ok = false;
  int next = 0;
  auto wait = [&] {
    ++next;
    return cq.Next(&tag, &ok) && ok;
  };
  call->StartCall(reinterpret_cast<void*>(1));
  if (wait()) {
    grpc::Slice empty("");
    grpc::ByteBuffer request(&empty, 1);
    call->Write(request, reinterpret_cast<void*>(2));
    if (wait()) {
      call->WritesDone(reinterpret_cast<void*>(3));
      if (wait()) {
        grpc::ByteBuffer response;
        // A backup of a small database is a few chunks; bounded anyway.
        for (int i = 0; i < 100000; ++i) {
          call->Read(&response, reinterpret_cast<void*>(4));
          if (!wait()) break;
        }
      }
    }
  }
  grpc::Status status;
  call->Finish(&status, reinterpret_cast<void*>(5));
  cq.Next(&tag, &ok);
  cq.Shutdown();
  while (cq.Next(&tag, &ok)) {
  }
  return {status.error_code(), status.error_message()};
}

class AuthorizationMatrixTest : public ::testing::Test {
 protected:
  void SetUp() override {
    const std::string db = dir_.File("skerry.db");
    absl::StatusOr<std::string> admin =
        testing::InitAdmin(SKERRY_COORDINATOR_BIN, db, "ada");
    ASSERT_TRUE(admin.ok()) << admin.status();
    tokens_["admin"] = *admin;
    auto c = testing::StartCoordinator(SKERRY_COORDINATOR_BIN, db,
                                       dir_.File("coordinator.log"));
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
    channel_ = grpc::CreateChannel(coordinator_->address(),
                                   grpc::InsecureChannelCredentials());
    access_ = v1::AccessService::NewStub(channel_);
    const std::pair<std::string, v1::Role> roles[] = {
        {"viewer", v1::ROLE_VIEWER},
        {"researcher", v1::ROLE_RESEARCHER},
        {"worker", v1::ROLE_WORKER},
        {"revoked", v1::ROLE_ADMIN}};
    for (const auto& [who, role] : roles) {
      auto t = testing::CreateToken(*access_, *admin, who, role);
      ASSERT_TRUE(t.ok()) << t.status();
      tokens_[who] = t->secret();
      ids_[who] = t->token().id();
    }
    grpc::ClientContext ctx;
    testing::Authorize(&ctx, *admin);
    v1::RevokeTokenRequest req;
    req.set_token_id(ids_["revoked"]);
    v1::RevokeTokenResponse resp;
    ASSERT_TRUE(access_->RevokeToken(&ctx, req, &resp).ok());
  }

  // Submits `spec_text` with the token of `who`; the run's id (0 on failure).
  uint64_t SubmitAs(const std::string& who, const std::string& spec_text) {
    absl::StatusOr<v1::RunSpec> spec = ParseSpecText(spec_text, "inline");
    EXPECT_TRUE(spec.ok()) << spec.status();
    if (!spec.ok()) return 0;
    grpc::ClientContext ctx;
    testing::Authorize(&ctx, tokens_[who]);
    v1::SubmitRunRequest req;
    *req.mutable_spec() = *spec;
    v1::SubmitRunResponse submitted;
    grpc::Status s =
        v1::RunService::NewStub(channel_)->SubmitRun(&ctx, req, &submitted);
    EXPECT_TRUE(s.ok()) << s.error_message();
    EXPECT_EQ(submitted.run().owner(), who);
    return submitted.run().id();
  }

  // The audit entries of a run, newest first, as an admin reads them.
  v1::QueryAuditResponse AuditOf(uint64_t run) {
    grpc::ClientContext ctx;
    testing::Authorize(&ctx, tokens_["admin"]);
    v1::QueryAuditRequest q;
    q.set_run_id(run);
    v1::QueryAuditResponse log;
    grpc::Status s = access_->QueryAudit(&ctx, q, &log);
    EXPECT_TRUE(s.ok()) << s.error_message();
    return log;
  }

  static auth::Role RoleOf(const std::string& who) {
    if (who == "viewer") return v1::ROLE_VIEWER;
    if (who == "researcher") return v1::ROLE_RESEARCHER;
    if (who == "worker") return v1::ROLE_WORKER;
    return v1::ROLE_ADMIN;
  }

  testing::TempDir dir_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<v1::AccessService::Stub> access_;
  std::map<std::string, std::string> tokens_;
  std::map<std::string, uint64_t> ids_;
};

TEST_F(AuthorizationMatrixTest, EveryMethodAnswersAsItsRuleSays) {
  const std::vector<std::string> methods = AllMethods();
  ASSERT_GE(methods.size(), 25u) << "fewer methods than the services have";
  absl::StatusOr<std::string> stranger = auth::NewToken();
  ASSERT_TRUE(stranger.ok());
  const std::map<std::string, std::string> intruders = {
      {"no token", ""},
      {"wrong token", *stranger},
      {"not even a token", "hunter2"},
      {"revoked token", tokens_["revoked"]}};
  for (const std::string& method : methods) {
    SCOPED_TRACE(method);
    const auth::Rule* rule = auth::FindRule(method);
    ASSERT_NE(rule, nullptr)
        << method << " has no rule in server/auth/rules.cc: add one";
    ASSERT_NE(rule->permission, auth::Permission::kPublic)
        << "only the gRPC health check may be public";
    for (const auto& [what, token] : intruders) {
      SCOPED_TRACE(what);
      Answer a = CallRaw(channel_, method, token);
      EXPECT_EQ(a.code, grpc::StatusCode::UNAUTHENTICATED) << a.message;
    }
    for (const std::string who : {"viewer", "researcher", "admin", "worker"}) {
      SCOPED_TRACE(who);
      Answer a = CallRaw(channel_, method, tokens_[who]);
      const bool allowed = auth::RoleAllows(rule->permission, RoleOf(who));
      // An empty request names run 0, which no researcher owns.
      const bool owner_check = rule->permission == auth::Permission::kOwnRun &&
                               RoleOf(who) == v1::ROLE_RESEARCHER;
      if (!allowed || owner_check) {
        EXPECT_EQ(a.code, grpc::StatusCode::PERMISSION_DENIED) << a.message;
        if (!owner_check) {
          EXPECT_THAT(a.message,
                      HasSubstr(auth::NeededRoles(rule->permission)));
        }
      } else {
        // Let through: whatever the handler makes of an empty request, but
        // not a refusal, and never a missing handler or a gate failure.
        // An empty JoinRequest speaks worker protocol 1 (common/version.h),
        // which Join refuses with UNIMPLEMENTED naming the protocols: the
        // handler ran.
        const bool old_protocol =
            method == "/skerry.v1.FleetService/Join" &&
            a.code == grpc::StatusCode::UNIMPLEMENTED &&
            absl::StrContains(a.message, "worker protocol 1");
        for (grpc::StatusCode refused :
             {grpc::StatusCode::UNAUTHENTICATED,
              grpc::StatusCode::PERMISSION_DENIED,
              grpc::StatusCode::UNIMPLEMENTED, grpc::StatusCode::INTERNAL}) {
          if (old_protocol) break;
          EXPECT_NE(a.code, refused) << a.message;
        }
      }
      EXPECT_THAT(a.message, ::testing::Not(HasSubstr(tokens_[who])));
    }
  }
}

// The same answers, written out by hand for the cells that matter most, so a
// wrong entry in the rule table is caught as well.
TEST_F(AuthorizationMatrixTest, KeyCellsWrittenOutByHand) {
  struct Cell {
    const char* method;
    const char* who;
    bool refused;
  };
  const Cell cells[] = {
      {"/skerry.v1.RunService/ListRuns", "viewer", false},
      {"/skerry.v1.RunService/ListRuns", "worker", true},
      {"/skerry.v1.RunService/SubmitRun", "viewer", true},
      {"/skerry.v1.RunService/SubmitRun", "researcher", false},
      {"/skerry.v1.RunService/StopRun", "viewer", true},
      {"/skerry.v1.RunService/StopRun", "admin", false},
      {"/skerry.v1.RunService/ForkRun", "viewer", true},
      {"/skerry.v1.RunService/ForkRun", "researcher", false},
      {"/skerry.v1.RunService/DeleteRun", "viewer", true},
      {"/skerry.v1.RunService/DeleteRun", "researcher", true},  // run 0
      {"/skerry.v1.RunService/DeleteRun", "admin", false},
      {"/skerry.v1.FleetService/Join", "admin", true},
      {"/skerry.v1.FleetService/Join", "researcher", true},
      {"/skerry.v1.FleetService/Lease", "worker", false},
      {"/skerry.v1.AccessService/CreateToken", "researcher", true},
      {"/skerry.v1.AccessService/QueryAudit", "viewer", true},
      {"/skerry.v1.AdminService/Backup", "researcher", true},
      {"/skerry.v1.LineageService/GetGenomeNode", "viewer", false},
      {"/skerry.v1.AccessService/WhoAmI", "worker", false},
  };
  for (const Cell& c : cells) {
    SCOPED_TRACE(absl::StrCat(c.method, " as ", c.who));
    Answer a = CallRaw(channel_, c.method, tokens_[c.who]);
    if (c.refused) {
      EXPECT_EQ(a.code, grpc::StatusCode::PERMISSION_DENIED) << a.message;
    } else {
      EXPECT_NE(a.code, grpc::StatusCode::PERMISSION_DENIED) << a.message;
      EXPECT_NE(a.code, grpc::StatusCode::UNAUTHENTICATED) << a.message;
    }
  }
}

TEST_F(AuthorizationMatrixTest, HealthCheckNeedsNoToken) {
  Answer a = CallRaw(channel_, "/grpc.health.v1.Health/Check", "");
  EXPECT_EQ(a.code, grpc::StatusCode::OK) << a.message;
}

// Issue 11: an unknown method was PERMISSION_DENIED; gRPC clients expect
// UNIMPLEMENTED. Without a valid token the token is still checked first.
TEST_F(AuthorizationMatrixTest, MethodUnknownToTheServerIsUnimplemented) {
  Answer a = CallRaw(channel_, "/skerry.v1.RunService/DropEverything",
                     tokens_["admin"]);
  EXPECT_EQ(a.code, grpc::StatusCode::UNIMPLEMENTED) << a.message;
  EXPECT_THAT(a.message, HasSubstr("no method"));
  Answer anonymous =
      CallRaw(channel_, "/skerry.v1.RunService/DropEverything", "");
  EXPECT_EQ(anonymous.code, grpc::StatusCode::UNAUTHENTICATED)
      << anonymous.message;
}

// A researcher may steer only its own runs, and cannot tell another's run from
// a run that does not exist; an admin may steer any. Every change, refused
// ones included, is in the audit log with who, what, when and from where.
TEST_F(AuthorizationMatrixTest,
       ResearchersSteerOnlyTheirOwnRunsAndAllIsAudited) {
  auto other = testing::CreateToken(*access_, tokens_["admin"], "rob",
                                    v1::ROLE_RESEARCHER);
  ASSERT_TRUE(other.ok()) << other.status();
  auto runs = v1::RunService::NewStub(channel_);
  const uint64_t run =
      SubmitAs("researcher",
               "name: \"owned\" seed: 3 genome_length: 2 "
               "evaluator { builtin { function: \"sphere\" } } "
               "ga { population_size: 6 } stop { max_generations: 50 }");
  ASSERT_NE(run, 0u);
  auto steer = [&](const std::string& token, uint64_t id, bool resume) {
    grpc::ClientContext ctx;
    testing::Authorize(&ctx, token);
    v1::RunRef ref;
    ref.set_run_id(id);
    v1::RunSummary out;
    return resume ? runs->ResumeRun(&ctx, ref, &out)
                  : runs->PauseRun(&ctx, ref, &out);
  };
  auto pause = [&](const std::string& token, uint64_t id) {
    return steer(token, id, false);
  };
  grpc::Status theirs = pause(other->secret(), run);
  grpc::Status missing = pause(other->secret(), run + 1000);
  EXPECT_EQ(theirs.error_code(), grpc::StatusCode::PERMISSION_DENIED);
  EXPECT_EQ(missing.error_code(), grpc::StatusCode::PERMISSION_DENIED);
  EXPECT_EQ(
      theirs.error_message(),
      absl::StrReplaceAll(missing.error_message(),
                          {{absl::StrCat(run + 1000), absl::StrCat(run)}}))
      << "another's run and a missing run must look the same";
  EXPECT_TRUE(pause(tokens_["researcher"], run).ok());
  EXPECT_TRUE(steer(tokens_["admin"], run, true).ok())
      << "an admin steers any run";

  const v1::QueryAuditResponse log = AuditOf(run);
  ASSERT_EQ(log.entries_size(), 4);  // newest first
  EXPECT_EQ(log.entries(0).principal(), "ada");
  EXPECT_EQ(log.entries(0).method(), "/skerry.v1.RunService/ResumeRun");
  EXPECT_EQ(log.entries(2).principal(), "rob");
  EXPECT_EQ(log.entries(2).code(),
            static_cast<uint32_t>(grpc::StatusCode::PERMISSION_DENIED));
  EXPECT_EQ(log.entries(3).principal(), "researcher");
  EXPECT_EQ(log.entries(3).method(), "/skerry.v1.RunService/SubmitRun");
  for (const v1::AuditEntry& e : log.entries()) {
    EXPECT_TRUE(e.ended());
    EXPECT_THAT(e.peer(), HasSubstr("127.0.0.1"));
    EXPECT_GT(e.unix_ms(), 0);
  }
}

// Asking for a validation uses the fleet for a run: only its owner or an
// admin may, whether the genome is named by id (its run looked up) or by key,
// and the request is audited with who asked.
TEST_F(AuthorizationMatrixTest, ValidationRequestsFollowRunOwnership) {
  auto other = testing::CreateToken(*access_, tokens_["admin"], "rob",
                                    v1::ROLE_RESEARCHER);
  ASSERT_TRUE(other.ok()) << other.status();
  auto validations = v1::ValidationService::NewStub(channel_);
  const uint64_t run = SubmitAs(
      "researcher",
      "name: \"held-out\" seed: 5 evaluator { cart_pole { max_steps: 50 } "
      "validation { generalisation: true champions: ON_REQUEST } } "
      "ga { population_size: 6 } stop { max_generations: 50 }");
  ASSERT_NE(run, 0u);
  auto validate = [&](const std::string& token, const v1::GenomeRef& ref,
                      v1::Validation* out) {
    grpc::ClientContext ctx;
    testing::Authorize(&ctx, token);
    v1::ValidateRequest req;
    *req.mutable_genome() = ref;
    return validations->Validate(&ctx, req, out);
  };
  v1::GenomeRef by_key;
  by_key.mutable_key()->set_run_id(run);
  v1::Validation v;
  ASSERT_TRUE(validate(tokens_["researcher"], by_key, &v).ok());
  EXPECT_EQ(v.requested_by(), "researcher");
  v1::GenomeRef by_id;
  by_id.set_id(v.genome_id());
  v1::GenomeRef missing;
  missing.set_id(v.genome_id() + 100000);
  EXPECT_EQ(validate(other->secret(), by_id, &v).error_code(),
            grpc::StatusCode::PERMISSION_DENIED);
  EXPECT_EQ(validate(other->secret(), by_key, &v).error_code(),
            grpc::StatusCode::PERMISSION_DENIED);
  EXPECT_EQ(validate(other->secret(), missing, &v).error_code(),
            grpc::StatusCode::PERMISSION_DENIED)
      << "a missing genome looks like another's";
  EXPECT_EQ(validate(tokens_["viewer"], by_id, &v).error_code(),
            grpc::StatusCode::PERMISSION_DENIED);
  EXPECT_TRUE(validate(tokens_["admin"], by_id, &v).ok());

  const v1::QueryAuditResponse log = AuditOf(run);
  int asked = 0;
  for (const v1::AuditEntry& e : log.entries()) {
    if (e.method() == "/skerry.v1.ValidationService/Validate") ++asked;
  }
  EXPECT_EQ(asked, 5) << "2 allowed, 3 refused with a known run";
}

}  // namespace
}  // namespace skerry
