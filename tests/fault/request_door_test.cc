// What the coordinator does with requests no honest client sends, at the
// door, before anything is allocated for them (issue 11): specs over the
// coordinator's budgets, strings and lists over their bounds, error messages
// that would quote megabytes, unknown methods, bytes that are no request at
// all, the standard health check, and a first token that would lock everyone
// out. A real coordinator (Coordinator::Start, in-process) serves on
// 127.0.0.1 port 0, and the calls go through a real channel: typed stubs for
// well-formed requests, raw byte buffers for the rest.
#include <chrono>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/clock.h"
#include "common/spec.h"
#include "common/version.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/impl/client_unary_call.h"
#include "grpcpp/impl/rpc_method.h"
#include "grpcpp/support/byte_buffer.h"
#include "grpcpp/support/sync_stream.h"
#include "gtest/gtest.h"
#include "server/coordinator.h"
#include "skerry/v1/access.grpc.pb.h"
#include "skerry/v1/admin.grpc.pb.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "skerry/v1/lineage.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "skerry/v1/validation.grpc.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using skerry::testing::QueryText;
using skerry::testing::TempDir;

std::unique_ptr<grpc::ClientContext> Context() {
  auto ctx = std::make_unique<grpc::ClientContext>();
  ctx->set_deadline(std::chrono::system_clock::now() +
                    std::chrono::seconds(60));
  return ctx;
}

skerry::v1::RunSpec SmallSpec() {
  skerry::v1::RunSpec spec;
  spec.set_name("door");
  spec.set_genome_length(3);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(6);
  spec.mutable_stop()->set_max_generations(2);
  return spec;
}

grpc::ByteBuffer Bytes(const std::string& bytes) {
  grpc::Slice slice(bytes);
  return grpc::ByteBuffer(&slice, 1);
}

std::string Flatten(const grpc::ByteBuffer& buffer) {
  std::vector<grpc::Slice> slices;
  if (!buffer.Dump(&slices).ok()) return "";
  std::string out;
  for (const grpc::Slice& s : slices) {
    out.append(reinterpret_cast<const char*>(s.begin()), s.size());
  }
  return out;
}

class RequestDoorTest : public ::testing::Test {
 protected:
  void SetUp() override { Start(); }

  void Start() {
    db_ = dir_.File("coordinator.db");
    server::CoordinatorOptions options;
    options.db_path = db_;
    options.listen_address = "127.0.0.1:0";
    options.clock = &clock_;
    absl::StatusOr<std::unique_ptr<server::Coordinator>> c =
        server::Coordinator::Start(options);
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::move(*c);
    grpc::ChannelArguments args;
    args.SetMaxSendMessageSize(128 << 20);
    channel_ = grpc::CreateCustomChannel(
        absl::StrCat("127.0.0.1:", coordinator_->port()),
        grpc::InsecureChannelCredentials(), args);
    runs_ = skerry::v1::RunService::NewStub(channel_);
    fleet_ = skerry::v1::FleetService::NewStub(channel_);
    access_ = skerry::v1::AccessService::NewStub(channel_);
  }

  grpc::Status Submit(const skerry::v1::RunSpec& spec,
                      const std::string& spec_text = "") {
    skerry::v1::SubmitRunRequest req;
    *req.mutable_spec() = spec;
    req.set_spec_text(spec_text);
    skerry::v1::SubmitRunResponse resp;
    return runs_->SubmitRun(Context().get(), req, &resp);
  }

  // A unary call with raw bytes for a request; the answer's bytes in *out.
  grpc::Status Raw(const std::string& method, const std::string& request,
                   std::string* out = nullptr) {
    grpc::internal::RpcMethod rpc(method.c_str(),
                                  grpc::internal::RpcMethod::NORMAL_RPC);
    grpc::ByteBuffer response;
    grpc::Status s =
        grpc::internal::BlockingUnaryCall<grpc::ByteBuffer, grpc::ByteBuffer>(
            channel_.get(), rpc, Context().get(), Bytes(request), &response);
    if (out != nullptr) *out = Flatten(response);
    return s;
  }

  size_t StoredRuns() {
    return static_cast<size_t>(
        std::stoll("0" + QueryText(db_, "SELECT count(*) FROM runs")));
  }

  // ListRuns answers, and its answer is small.
  void ExpectListRunsAnswers(size_t runs) {
    skerry::v1::ListRunsResponse list;
    grpc::Status s =
        runs_->ListRuns(Context().get(), skerry::v1::ListRunsRequest(), &list);
    ASSERT_TRUE(s.ok()) << s.error_message();
    EXPECT_EQ(static_cast<size_t>(list.runs_size()), runs);
    EXPECT_LT(list.ByteSizeLong(), 4096u * (runs + 1));
  }

  TempDir dir_;
  std::string db_;
  FakeClock clock_;
  std::unique_ptr<server::Coordinator> coordinator_;
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<skerry::v1::RunService::Stub> runs_;
  std::unique_ptr<skerry::v1::FleetService::Stub> fleet_;
  std::unique_ptr<skerry::v1::AccessService::Stub> access_;
};

// ---- Budgets (point 3) ----

// Issue 11: genome length 10^6 with population 10^6, each in its documented
// range, froze the coordinator while it seeded generation 0.
TEST_F(RequestDoorTest, InRangeSpecOverTheGenesBudgetIsRefusedNamingTheFlag) {
  skerry::v1::RunSpec spec = SmallSpec();
  spec.set_genome_length(1000000);
  spec.mutable_ga()->set_population_size(1000000);
  grpc::Status s = Submit(spec);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  for (const char* part :
       {"genes per generation", "1000000000000", "--max-generation-genes"}) {
    EXPECT_NE(s.error_message().find(part), std::string::npos)
        << part << " in: " << s.error_message();
  }
  EXPECT_EQ(StoredRuns(), 0u);
  ExpectListRunsAnswers(0);
  ASSERT_TRUE(Submit(SmallSpec()).ok()) << "the coordinator still serves";
}

// Issue 11: a 70 MiB evaluator spec was accepted, and then no worker could
// lease a task.
TEST_F(RequestDoorTest, SeventyMiBEvaluatorSpecIsRefusedByTheEvaluatorBudget) {
  skerry::v1::RunSpec spec = SmallSpec();
  spec.mutable_evaluator()->mutable_external()->add_argv(
      std::string(70u << 20, 'x'));
  grpc::Status s = Submit(spec);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_NE(s.error_message().find("--max-evaluator-bytes"), std::string::npos)
      << s.error_message().substr(0, 300);
  EXPECT_LT(s.error_message().size(), 1100u);
  EXPECT_EQ(StoredRuns(), 0u);
}

// Issue 11: a 10 MiB run name made every ListRuns answer 10 MB.
TEST_F(RequestDoorTest, TenMiBRunNameIsRefusedByTheNameBudget) {
  skerry::v1::RunSpec spec = SmallSpec();
  spec.set_name(std::string(10u << 20, 'n'));
  grpc::Status s = Submit(spec);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_NE(s.error_message().find("--max-name-bytes"), std::string::npos)
      << s.error_message().substr(0, 300);
  EXPECT_LT(s.error_message().size(), 1100u);
  ASSERT_TRUE(Submit(SmallSpec()).ok());
  ExpectListRunsAnswers(1);
}

// ---- Bounds and short error messages (point 4) ----

// Issue 11: a 1 MiB function name came back as a 1 MiB error message, which
// a default client cannot receive.
TEST_F(RequestDoorTest, HugeFunctionNameComesBackAsAShortError) {
  skerry::v1::RunSpec spec = SmallSpec();
  // Under the evaluator budget (1 MiB by default), so the spec check sees it.
  spec.mutable_evaluator()->mutable_builtin()->set_function(
      std::string(900u << 10, 'f'));
  grpc::Status s = Submit(spec);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_NE(s.error_message().find("evaluator.builtin.function"),
            std::string::npos)
      << s.error_message().substr(0, 300);
  EXPECT_LT(s.error_message().size(), 1100u);
}

TEST_F(RequestDoorTest, StringsAndListsOverTheirBoundsAreInvalidArgument) {
  {
    SCOPED_TRACE("SubmitRunRequest.spec_text");
    grpc::Status s = Submit(SmallSpec(), std::string((1 << 20) + 1, 't'));
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    EXPECT_NE(s.error_message().find("spec_text"), std::string::npos)
        << s.error_message();
    EXPECT_EQ(StoredRuns(), 0u);
  }
  {
    SCOPED_TRACE("QueryAuditRequest.principal");
    skerry::v1::QueryAuditRequest req;
    req.set_principal(std::string(1 << 20, 'p'));
    skerry::v1::QueryAuditResponse resp;
    grpc::Status s = access_->QueryAudit(Context().get(), req, &resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    EXPECT_NE(s.error_message().find("principal"), std::string::npos)
        << s.error_message().substr(0, 300);
    EXPECT_LT(s.error_message().size(), 300u);
  }
  {
    SCOPED_TRACE("JoinRequest.evaluators");
    skerry::v1::JoinRequest req;
    req.set_protocol_version(kProtocolVersion);
    req.set_threads(1);
    for (int i = 0; i < 1001; ++i) req.add_evaluators("sphere");
    skerry::v1::JoinResponse resp;
    grpc::Status s = fleet_->Join(Context().get(), req, &resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    EXPECT_NE(s.error_message().find("evaluators"), std::string::npos)
        << s.error_message();
  }
  {
    SCOPED_TRACE("unknown fields");
    // LeaseRequest with field 99 (length-delimited) of 100 KiB.
    std::string request = "\x08\x01";       // worker_id 1
    request += std::string("\x9a\x06", 2);  // tag (99 << 3) | 2
    const size_t n = 100 << 10;
    request += static_cast<char>(0x80 | (n & 0x7f));
    request += static_cast<char>(0x80 | ((n >> 7) & 0x7f));
    request += static_cast<char>(n >> 14);
    request += std::string(n, 'u');
    grpc::Status s = Raw("/skerry.v1.FleetService/Lease", request);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    EXPECT_NE(s.error_message().find("unknown fields"), std::string::npos)
        << s.error_message();
  }
}

// ---- Smaller, server side (point 5) ----

// Issue 11: an unknown method was PERMISSION_DENIED with access control off.
TEST_F(RequestDoorTest, UnknownMethodIsUnimplemented) {
  for (const char* method :
       {"/skerry.v1.RunService/NoSuchMethod", "/no.such.Service/Call"}) {
    SCOPED_TRACE(method);
    grpc::Status s = Raw(method, "");
    EXPECT_EQ(s.error_code(), grpc::StatusCode::UNIMPLEMENTED)
        << s.error_message();
  }
}

// Issue 11: undecodable requests got INTERNAL with an empty message.
TEST_F(RequestDoorTest, UndecodableRequestIsInvalidArgumentNamingTheType) {
  struct Case {
    const char* method;
    std::string bytes;
    const char* type;
  };
  const std::vector<Case> cases = {
      {"/skerry.v1.RunService/GetRun", "\xff\xff\xff\xff", "skerry.v1.RunRef"},
      // SubmitRunRequest.spec_text (field 2) holding invalid UTF-8.
      {"/skerry.v1.RunService/SubmitRun", std::string("\x12\x02\xc3\x28", 4),
       "skerry.v1.SubmitRunRequest"},
      {"/skerry.v1.FleetService/Report", "\x0a\x05\x08",
       "skerry.v1.ReportRequest"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.method);
    grpc::Status s = Raw(c.method, c.bytes);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT)
        << s.error_message();
    EXPECT_NE(s.error_message().find(c.type), std::string::npos)
        << s.error_message();
  }
  EXPECT_EQ(StoredRuns(), 0u);
  {
    SCOPED_TRACE("WatchRun, a server stream");
    grpc::internal::RpcMethod rpc("/skerry.v1.RunService/WatchRun",
                                  grpc::internal::RpcMethod::SERVER_STREAMING);
    std::unique_ptr<grpc::ClientContext> ctx = Context();
    std::unique_ptr<grpc::ClientReader<grpc::ByteBuffer>> reader(
        grpc::internal::ClientReaderFactory<grpc::ByteBuffer>::Create(
            channel_.get(), rpc, ctx.get(), Bytes("\xff\xff\xff")));
    grpc::ByteBuffer chunk;
    int read = 0;
    while (read < 10 && reader->Read(&chunk)) ++read;
    grpc::Status s = reader->Finish();
    EXPECT_EQ(read, 0);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT)
        << s.error_message();
    EXPECT_NE(s.error_message().find("skerry.v1.WatchRunRequest"),
              std::string::npos)
        << s.error_message();
  }
}

// Issue 11: the standard health service answered NOT_FOUND for each of our
// service names.
TEST_F(RequestDoorTest, HealthCheckIsServingForEverySkerryService) {
  const std::vector<std::string> services = {
      "",
      skerry::v1::FleetService::service_full_name(),
      skerry::v1::RunService::service_full_name(),
      skerry::v1::LineageService::service_full_name(),
      skerry::v1::AdminService::service_full_name(),
      skerry::v1::ValidationService::service_full_name(),
      skerry::v1::AccessService::service_full_name()};
  for (const std::string& name : services) {
    SCOPED_TRACE(name);
    // grpc.health.v1.HealthCheckRequest { string service = 1; }, encoded by
    // hand (grpc/health/v1/health.proto, from memory).
    std::string request;
    if (!name.empty()) {
      request = std::string(1, '\x0a') + static_cast<char>(name.size()) + name;
    }
    std::string answer;
    grpc::Status s = Raw("/grpc.health.v1.Health/Check", request, &answer);
    ASSERT_TRUE(s.ok()) << s.error_code() << " " << s.error_message();
    // HealthCheckResponse { ServingStatus status = 1; }, SERVING = 1.
    EXPECT_EQ(answer, std::string("\x08\x01", 2));
  }
  grpc::Status s =
      Raw("/grpc.health.v1.Health/Check", std::string("\x0a\x03xyz", 5));
  EXPECT_EQ(s.error_code(), grpc::StatusCode::NOT_FOUND);

  // A health watcher of RunService sees SERVING, then NOT_SERVING (2) when
  // the coordinator shuts down.
  const std::string name = skerry::v1::RunService::service_full_name();
  grpc::internal::RpcMethod rpc("/grpc.health.v1.Health/Watch",
                                grpc::internal::RpcMethod::SERVER_STREAMING);
  std::unique_ptr<grpc::ClientContext> ctx = Context();
  std::unique_ptr<grpc::ClientReader<grpc::ByteBuffer>> reader(
      grpc::internal::ClientReaderFactory<grpc::ByteBuffer>::Create(
          channel_.get(), rpc, ctx.get(),
          Bytes(std::string(1, '\x0a') + static_cast<char>(name.size()) +
                name)));
  grpc::ByteBuffer update;
  ASSERT_TRUE(reader->Read(&update));
  EXPECT_EQ(Flatten(update), std::string("\x08\x01", 2));
  std::thread stop([&] { coordinator_->Shutdown(); });
  std::vector<std::string> seen;
  while (seen.size() < 10 && reader->Read(&update)) {
    seen.push_back(Flatten(update));
    if (seen.back() == std::string("\x08\x02", 2)) break;
  }
  ctx->TryCancel();  // so that the shutdown need not wait for this stream
  reader->Finish().IgnoreError();
  stop.join();
  ASSERT_FALSE(seen.empty()) << "no update before the stream ended";
  EXPECT_EQ(seen.back(), std::string("\x08\x02", 2));
}

// Issue 11: a viewer token created on an open coordinator turned access
// control on at the next start, with no admin.
TEST_F(RequestDoorTest, FirstTokenOnAnOpenCoordinatorMustBeAnAdmins) {
  auto create = [&](const std::string& principal, skerry::v1::Role role,
                    skerry::v1::CreateTokenResponse* resp) {
    skerry::v1::CreateTokenRequest req;
    req.set_principal(principal);
    req.set_role(role);
    return access_->CreateToken(Context().get(), req, resp);
  };
  skerry::v1::CreateTokenResponse resp;
  for (skerry::v1::Role role :
       {skerry::v1::ROLE_VIEWER, skerry::v1::ROLE_RESEARCHER,
        skerry::v1::ROLE_WORKER}) {
    SCOPED_TRACE(skerry::v1::Role_Name(role));
    grpc::Status s = create("someone", role, &resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::FAILED_PRECONDITION);
    EXPECT_NE(s.error_message().find("admin"), std::string::npos)
        << s.error_message();
  }
  EXPECT_EQ(QueryText(db_, "SELECT count(*) FROM principals"), "0");
  ASSERT_TRUE(create("boss", skerry::v1::ROLE_ADMIN, &resp).ok());
  const std::string admin_secret = resp.secret();
  ASSERT_TRUE(create("reader", skerry::v1::ROLE_VIEWER, &resp).ok())
      << "with an admin in place";

  // The next start has access control on, and the admin can act.
  coordinator_.reset();
  Start();
  skerry::v1::WhoAmIResponse who;
  {
    grpc::Status s =
        access_->WhoAmI(Context().get(), skerry::v1::WhoAmIRequest(), &who);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::UNAUTHENTICATED);
  }
  std::unique_ptr<grpc::ClientContext> ctx = Context();
  ctx->AddMetadata("authorization", "Bearer " + admin_secret);
  grpc::Status s =
      access_->WhoAmI(ctx.get(), skerry::v1::WhoAmIRequest(), &who);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_TRUE(who.access_control());
  EXPECT_EQ(who.principal(), "boss");
  EXPECT_EQ(who.role(), skerry::v1::ROLE_ADMIN);
}

}  // namespace
}  // namespace skerry
