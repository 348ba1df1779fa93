// The whole coordinator on a failing disk (the fault VFS of fault_vfs.h): it
// refuses to start on a database it cannot write, naming why, and its shutdown
// ends, in bounded time, at seeded random moments while every write fails and
// real workers keep reporting. Every wait is bounded.
#include <atomic>
#include <fstream>
#include <memory>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "google/protobuf/text_format.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "server/coordinator.h"
#include "server/store/store.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "tests/fault/fault_vfs.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"
#include "tests/support/specs.h"

namespace skerry::server {
namespace {

using skerry::testing::FaultKind;
using skerry::testing::FaultVfs;
using skerry::testing::Process;
using skerry::testing::TempDir;

const std::string kSpec = skerry::testing::BuiltinIslandSpec(
    "failing-disk", 515, 5, "sphere", "population_size: 16 elites: 1",
    "count: 2 interval: 2 migrants: 1", 100000);

skerry::v1::RunSpec SpecOf(const std::string& text) {
  skerry::v1::RunSpec spec;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(text, &spec));
  return spec;
}

CoordinatorOptions Options(const std::string& db, int port) {
  CoordinatorOptions o;
  o.db_path = db;
  o.listen_address = absl::StrCat("127.0.0.1:", port);
  o.lease = absl::Seconds(2);
  o.max_lease_wait = absl::Milliseconds(300);
  o.auth = auth::AuthMode::kOff;
  o.sqlite_vfs = FaultVfs::kName;
  return o;
}

TEST(CoordinatorFaultTest, RefusesToStartOnADatabaseItCannotWrite) {
  FaultVfs* vfs = FaultVfs::Install();
  TempDir dir;
  const std::string db = dir.File("ro.db");
  ASSERT_TRUE(store::Store::Open(db).ok());
  vfs->Arm(FaultKind::kIoErr, 1, /*persistent=*/true);
  absl::StatusOr<std::unique_ptr<Coordinator>> c =
      Coordinator::Start(Options(db, 0));
  vfs->Disarm();
  ASSERT_FALSE(c.ok());
  EXPECT_TRUE(absl::StrContains(c.status().message(), "cannot write"))
      << c.status();
  // Once it can write, it starts.
  EXPECT_TRUE(Coordinator::Start(Options(db, 0)).ok());
}

// A start reads only the small tables (Database::QuickCheckAtStart: a
// whole-file quick_check took 28 s of a start on 10 million genomes); the
// genomes table is checked while serving. Damage found there stops every write,
// with the reason, and reads go on. The damage is a genomes b-tree page whose
// page type byte is wrong, which SQLite's quick_check finds (SQLite's file
// format documentation, "B-tree Pages": byte 0 of the page header is the page
// type, 2, 5, 10 or 13; from memory). The test first checks that the damage is
// one the whole-file check finds and the start's check does not read.
TEST(CoordinatorFaultTest, DamageFoundWhileServingStopsEveryWriteReadsGoOn) {
  TempDir dir;
  const std::string db = dir.File("damaged.db");
  {
    absl::StatusOr<std::unique_ptr<store::Store>> st = store::Store::Open(db);
    ASSERT_TRUE(st.ok()) << st.status();
    store::RunRecord run;
    run.name = "finished";
    run.spec = SpecOf(kSpec);
    run.state = skerry::v1::FINISHED;
    std::vector<store::GenomeRecord> genomes(3000);
    for (size_t i = 0; i < genomes.size(); ++i) {
      genomes[i].slot = static_cast<uint32_t>(i);
      genomes[i].genes.assign(5, 0.25 * static_cast<double>(i % 7));
      genomes[i].state = skerry::v1::EVALUATED;
      genomes[i].score = static_cast<double>(i);
      genomes[i].attempts = 1;
    }
    ASSERT_TRUE((*st)->runs().CreateRun(&run, &genomes).ok());
  }  // closed: the WAL is checkpointed into the file
  const int64_t root = std::stoll(skerry::testing::QueryText(
      db, "SELECT rootpage FROM sqlite_schema WHERE name = 'genomes'"));
  const int64_t page_size =
      std::stoll(skerry::testing::QueryText(db, "PRAGMA page_size"));
  ASSERT_GT(root, 1);
  {
    std::fstream f(db, std::ios::in | std::ios::out | std::ios::binary);
    ASSERT_TRUE(f.is_open());
    f.seekp((root - 1) * page_size);
    const char wrong_type = 0x0A;  // an index leaf, not a table page
    f.write(&wrong_type, 1);
    ASSERT_TRUE(f.good());
  }
  {
    absl::StatusOr<std::unique_ptr<store::Store>> st = store::Store::Open(db);
    ASSERT_TRUE(st.ok()) << st.status();
    EXPECT_TRUE((*st)->db().QuickCheckAtStart().ok())
        << "the start check read it";
    EXPECT_TRUE(absl::IsDataLoss((*st)->db().QuickCheck()))
        << "the damage is not one quick_check finds";
  }
  CoordinatorOptions o = Options(db, 0);
  o.sqlite_vfs.clear();
  absl::StatusOr<std::unique_ptr<Coordinator>> c = Coordinator::Start(o);
  ASSERT_TRUE(c.ok()) << c.status();
  auto runs = skerry::v1::RunService::NewStub(
      grpc::CreateChannel(absl::StrCat("127.0.0.1:", (*c)->port()),
                          grpc::InsecureChannelCredentials()));
  grpc::Status refused;
  int stored_meanwhile = 0;
  for (int i = 0; i < 200; ++i) {
    skerry::v1::SubmitRunRequest req;
    *req.mutable_spec() = SpecOf(kSpec);
    skerry::v1::SubmitRunResponse resp;
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() +
                     std::chrono::seconds(30));
    refused = runs->SubmitRun(&ctx, req, &resp);
    if (!refused.ok()) break;
    ++stored_meanwhile;  // before the check had finished: allowed
    absl::SleepFor(absl::Milliseconds(50));
  }
  ASSERT_FALSE(refused.ok()) << "writes went on after the check";
  EXPECT_EQ(refused.error_code(), grpc::StatusCode::UNAVAILABLE);
  EXPECT_TRUE(absl::StrContains(refused.error_message(), "malformed"))
      << refused.error_message();
  EXPECT_TRUE(
      absl::StrContains(refused.error_message(), "nothing more is written"))
      << refused.error_message();
  // Reads go on: the runs are listed.
  skerry::v1::ListRunsResponse listed;
  grpc::ClientContext ctx;
  ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(30));
  grpc::Status read =
      runs->ListRuns(&ctx, skerry::v1::ListRunsRequest(), &listed);
  ASSERT_TRUE(read.ok()) << read.error_message();
  EXPECT_EQ(listed.runs_size(), 1 + stored_meanwhile);
  (*c)->Shutdown();
}

TEST(CoordinatorFaultTest, ShutdownWhileEveryWriteFailsEndsEveryTime) {
  FaultVfs* vfs = FaultVfs::Install();
  TempDir dir;
  const std::string db = dir.File("full.db");
  const std::string spec = dir.File("run.spec");
  ASSERT_TRUE(skerry::testing::WriteTextFile(spec, kSpec));
  absl::StatusOr<std::unique_ptr<Coordinator>> c =
      Coordinator::Start(Options(db, 0));
  ASSERT_TRUE(c.ok()) << c.status();
  const int port = (*c)->port();
  const std::string address = absl::StrCat("127.0.0.1:", port);
  skerry::testing::CommandResult submit = skerry::testing::RunCommand(
      {SKERRY_CLI_BIN, "--coordinator", address, "submit", spec});
  ASSERT_EQ(submit.exit_code, 0) << submit.output;
  std::vector<Process> workers;
  for (int w = 0; w < 2; ++w) {
    absl::StatusOr<Process> p =
        Process::Start({SKERRY_WORKER_BIN, "--coordinator", address,
                        "--threads", "2", "--batch", "8"},
                       dir.File(absl::StrCat("worker", w, ".log")));
    ASSERT_TRUE(p.ok()) << p.status();
    workers.push_back(std::move(*p));
  }
  std::mt19937 rng(1812);  // seeded: the same moments on every run
  constexpr int kStops = 6;
  for (int stop = 0; stop < kStops; ++stop) {
    absl::SleepFor(absl::Milliseconds(
        300 + std::uniform_int_distribution<int>(0, 500)(rng)));
    // The disk fails from now on: commits fail, work is held.
    vfs->Arm(stop % 2 == 0 ? FaultKind::kFull : FaultKind::kIoErr, 1, true);
    absl::SleepFor(
        absl::Milliseconds(std::uniform_int_distribution<int>(0, 1500)(rng)));
    // As the signal does: one thread stops it; the test bounds the wait.
    std::atomic<bool> ended{false};
    std::thread stopper([&] {
      (*c)->Shutdown();
      c->reset();
      ended.store(true);
    });
    const bool in_time = skerry::testing::WaitFor([&] { return ended.load(); },
                                                  absl::Seconds(60));
    if (!in_time) {
      ADD_FAILURE() << "shutdown " << stop << " did not end in 60 s";
      stopper.detach();
      std::abort();  // a hung shutdown cannot be recovered from in-process
    }
    stopper.join();
    vfs->Disarm();
    c = Coordinator::Start(Options(db, port));
    ASSERT_TRUE(c.ok()) << "restart " << stop << ": " << c.status();
  }
  (*c)->Shutdown();
  for (Process& w : workers) w.Kill();
}

}  // namespace
}  // namespace skerry::server
