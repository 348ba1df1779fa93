// Shutdown that always ends cleanly (server/main.cc, Coordinator::Shutdown):
// SIGTERM at seeded random moments of a busy coordinator, restarted each time
// on the same database and port, must end in exit 0 every time, with nothing
// left beside the database; SIGHUP stops the coordinator and the worker the
// same way (docs/operations.md, "Signals"). Every wait is bounded.
#include <signal.h>

#include <filesystem>
#include <memory>
#include <random>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "gtest/gtest.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"
#include "tests/support/specs.h"

namespace skerry {
namespace {

using testing::CommandResult;
using testing::Process;
using testing::QueryText;
using testing::RunCommand;

const std::string kSpec = testing::BuiltinIslandSpec(
    "shutdown", 4242, 6, "rastrigin", "population_size: 20 elites: 1",
    "count: 2 interval: 3 migrants: 1", 100000);

int64_t Evaluations(const std::string& db) {
  int64_t n = 0;
  if (!absl::SimpleAtoi(
          QueryText(db, "SELECT evaluations FROM runs WHERE id = 1"), &n)) {
    return 0;
  }
  return n;
}

class ShutdownTest : public ::testing::Test {
 protected:
  std::string db() const { return dir_.File("shutdown.db"); }

  // A coordinator on `port` (0: any), waited for until it listens.
  std::unique_ptr<testing::StartedCoordinator> Start(int port, int serial) {
    absl::StatusOr<testing::StartedCoordinator> c =
        testing::StartCoordinatorOnPort(
            SKERRY_COORDINATOR_BIN, db(),
            dir_.File(absl::StrCat("coordinator", serial, ".log")), port,
            {"--lease-seconds", "2", "--max-wait-ms", "300"});
    EXPECT_TRUE(c.ok()) << c.status();
    if (!c.ok()) return nullptr;
    return std::make_unique<testing::StartedCoordinator>(std::move(*c));
  }

  Process StartWorker(const std::string& address, int serial) {
    absl::StatusOr<Process> w = Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", address, "--threads", "2",
         "--batch", "8", "--name", absl::StrCat("w", serial)},
        dir_.File(absl::StrCat("worker", serial, ".log")));
    EXPECT_TRUE(w.ok()) << w.status();
    return std::move(*w);
  }

  testing::TempDir dir_;
};

TEST_F(ShutdownTest, SigtermAtRandomMomentsOfABusyCoordinatorAlwaysExitsZero) {
  const std::string spec = dir_.File("run.spec");
  ASSERT_TRUE(testing::WriteTextFile(spec, kSpec));
  std::unique_ptr<testing::StartedCoordinator> c = Start(0, 0);
  ASSERT_NE(c, nullptr);
  const int port = c->port;
  const std::string address = c->address();
  CommandResult submit =
      RunCommand({SKERRY_CLI_BIN, "--coordinator", address, "submit", spec});
  ASSERT_EQ(submit.exit_code, 0) << submit.output;
  std::vector<Process> workers;
  workers.push_back(StartWorker(address, 0));
  workers.push_back(StartWorker(address, 1));

  std::mt19937 rng(18);  // seeded: the same moments on every run
  constexpr int kStops = 12;
  for (int stop = 0; stop < kStops; ++stop) {
    const int64_t before = Evaluations(db());
    ASSERT_TRUE(testing::WaitFor([&] { return Evaluations(db()) > before; },
                                 absl::Seconds(60)))
        << "no progress after start " << stop << "\n"
        << c->process.Log();
    absl::SleepFor(
        absl::Milliseconds(std::uniform_int_distribution<int>(0, 400)(rng)));
    c->process.Signal(SIGTERM);
    absl::StatusOr<int> code = c->process.Wait(absl::Seconds(60));
    ASSERT_TRUE(code.ok()) << "stop " << stop << ": " << code.status() << "\n"
                           << c->process.Log();
    EXPECT_EQ(*code, 0) << "stop " << stop << "\n" << c->process.Log();
    EXPECT_NE(c->process.Log().find("skerry-coordinator: stopped"),
              std::string::npos)
        << c->process.Log();
    EXPECT_FALSE(std::filesystem::exists(db() + ".owner"));
    c = Start(port, stop + 1);
    ASSERT_NE(c, nullptr);
  }
  RecordProperty("sigterms", kStops);
  c->process.Signal(SIGTERM);
  ASSERT_TRUE(c->process.Wait(absl::Seconds(60)).ok());
  for (Process& w : workers) w.Kill();
  CommandResult check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", db()});
  EXPECT_EQ(check.exit_code, 0) << check.output;
}

TEST_F(ShutdownTest, SighupStopsTheCoordinatorAndTheWorkerCleanly) {
  const std::string spec = dir_.File("run.spec");
  ASSERT_TRUE(testing::WriteTextFile(spec, kSpec));
  std::unique_ptr<testing::StartedCoordinator> c = Start(0, 0);
  ASSERT_NE(c, nullptr);
  CommandResult submit = RunCommand(
      {SKERRY_CLI_BIN, "--coordinator", c->address(), "submit", spec});
  ASSERT_EQ(submit.exit_code, 0) << submit.output;
  Process worker = StartWorker(c->address(), 0);
  ASSERT_TRUE(testing::WaitFor([&] { return Evaluations(db()) > 0; },
                               absl::Seconds(60)));
  worker.Signal(SIGHUP);
  absl::StatusOr<int> w = worker.Wait(absl::Seconds(60));
  ASSERT_TRUE(w.ok()) << w.status();
  EXPECT_EQ(*w, 0) << worker.Log();
  c->process.Signal(SIGHUP);
  absl::StatusOr<int> code = c->process.Wait(absl::Seconds(60));
  ASSERT_TRUE(code.ok()) << code.status();
  EXPECT_EQ(*code, 0) << c->process.Log();
  EXPECT_NE(c->process.Log().find("skerry-coordinator: stopped"),
            std::string::npos);
}

TEST_F(ShutdownTest, SecondCoordinatorThroughALinkOrDotPathIsRefused) {
  std::unique_ptr<testing::StartedCoordinator> c = Start(0, 0);
  ASSERT_NE(c, nullptr);
  std::filesystem::create_symlink(db(), dir_.File("link.db"));
  std::filesystem::create_hard_link(db(), dir_.File("hard.db"));
  for (const std::string& other : {dir_.File("link.db"), dir_.File("hard.db"),
                                   dir_.path() + "/./shutdown.db"}) {
    CommandResult second = RunCommand(
        {SKERRY_COORDINATOR_BIN, "--db", other, "--listen", "127.0.0.1:0"},
        absl::Seconds(30));
    EXPECT_EQ(second.exit_code, 1) << other << ": " << second.output;
    EXPECT_NE(second.output.find("owned by another running coordinator"),
              std::string::npos)
        << second.output;
  }
  c->process.Signal(SIGTERM);
  ASSERT_TRUE(c->process.Wait(absl::Seconds(60)).ok());
}

TEST_F(ShutdownTest, EmptyFileIsRefusedAtStartLikeCheckRefusesIt) {
  ASSERT_TRUE(testing::WriteTextFile(db(), ""));
  CommandResult start = RunCommand(
      {SKERRY_COORDINATOR_BIN, "--db", db(), "--listen", "127.0.0.1:0"},
      absl::Seconds(30));
  EXPECT_EQ(start.exit_code, 1) << start.output;
  EXPECT_NE(start.output.find("file is empty"), std::string::npos)
      << start.output;
  EXPECT_EQ(std::filesystem::file_size(db()), 0u);
  CommandResult check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", db()});
  EXPECT_EQ(check.exit_code, 2) << check.output;
  EXPECT_NE(check.output.find("file is empty"), std::string::npos)
      << check.output;
}

}  // namespace
}  // namespace skerry
