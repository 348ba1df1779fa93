// The whole coordinator on a failing disk (the fault VFS of fault_vfs.h): it
// refuses to start on a database it cannot write, naming why, and its shutdown
// ends, in bounded time, at seeded random moments while every write fails and
// real workers keep reporting. Every wait is bounded.
#include <atomic>
#include <memory>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "gtest/gtest.h"
#include "server/coordinator.h"
#include "server/store/store.h"
#include "tests/fault/fault_vfs.h"
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
