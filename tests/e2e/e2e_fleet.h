// The set-up shared by the e2e tests that submit, fork, extend or archive runs
// and follow them to their end: a real skerry-coordinator on 127.0.0.1 port 0
// with its SQLite file in the test's folder, real skerry-worker processes,
// and the skerry CLI pointed at them (the binaries named by the e2e targets'
// SKERRY_*_BIN definitions, tests/e2e/CMakeLists.txt).
//
// Failures to start are reported to the running test (ADD_FAILURE) and leave
// ok() false, so a fixture's SetUp can ASSERT_TRUE(fleet.ok()).
//
// Thread safety: used from the test's thread.
#ifndef SKERRY_TESTS_E2E_E2E_FLEET_H_
#define SKERRY_TESTS_E2E_E2E_FLEET_H_

#include <csignal>
#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/strip.h"
#include "absl/time/time.h"
#include "gtest/gtest.h"
#include "tests/support/process.h"

namespace skerry::testing {

class LoopbackFleet {
 public:
  // Starts the coordinator on `dir`/`db_name`, logging to
  // `dir`/coordinator.log.
  LoopbackFleet(const TempDir& dir, const std::string& db_name)
      : dir_(dir), db_(dir.File(db_name)) {
    absl::StatusOr<StartedCoordinator> c = StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_, dir.File("coordinator.log"));
    if (!c.ok()) {
      ADD_FAILURE() << "coordinator: " << c.status();
      return;
    }
    coordinator_.emplace(*std::move(c));
  }

  bool ok() const { return coordinator_.has_value(); }
  const std::string& db() const { return db_; }
  std::string address() const { return coordinator_->address(); }
  StartedCoordinator& coordinator() { return *coordinator_; }

  // Starts `count` more workers of `threads` threads (batches of 8), named
  // w0, w1, ... and logging to worker0.log, worker1.log, ...
  bool AddWorkers(int count, int threads) {
    if (!ok()) return false;
    absl::StatusOr<std::vector<Process>> started =
        StartWorkers(SKERRY_WORKER_BIN, address(), count, threads,
                     absl::StrCat("w", workers_.size(), "-"),
                     dir_.File(absl::StrCat("worker", workers_.size(), "-")));
    if (!started.ok()) {
      ADD_FAILURE() << "workers: " << started.status();
      return false;
    }
    for (Process& w : *started) workers_.push_back(std::move(w));
    return true;
  }

  CommandResult Cli(const std::vector<std::string>& args,
                    absl::Duration timeout = absl::Seconds(300)) const {
    return RunCli(SKERRY_CLI_BIN, address(), args, timeout);
  }

  // Follows run `id` with `skerry watch` to its end, which must be
  // `finished`.
  void Follow(int64_t id) const {
    CommandResult watch = Cli({"watch", absl::StrCat(id)});
    EXPECT_EQ(watch.exit_code, 0) << watch.output;
    EXPECT_NE(watch.output.find("finished"), std::string::npos) << watch.output;
  }

  // The run id a submit or fork printed (0, and a failure, when it printed
  // none), after following that run to its end.
  int64_t Finished(const CommandResult& made) const {
    EXPECT_EQ(made.exit_code, 0) << made.output;
    int64_t id = 0;
    if (!absl::SimpleAtoi(absl::StripAsciiWhitespace(made.output), &id)) {
      ADD_FAILURE() << "no run id in: " << made.output;
      return 0;
    }
    Follow(id);
    return id;
  }

  // The digest `skerry digest` prints for run `id` ("" when it fails).
  std::string Digest(int64_t id) const {
    CommandResult digest = Cli({"digest", absl::StrCat(id)});
    EXPECT_EQ(digest.exit_code, 0) << digest.output;
    return DigestIn(digest.output);
  }

  // Stops the coordinator (SIGTERM) and runs `skerry-coordinator --check` on
  // its database, which must pass.
  void StopAndCheck() {
    coordinator_->process.Signal(SIGTERM);
    absl::StatusOr<int> code = coordinator_->process.Wait(absl::Seconds(60));
    ASSERT_TRUE(code.ok()) << code.status();
    CommandResult check =
        RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_}, absl::Seconds(60));
    EXPECT_EQ(check.exit_code, 0) << check.output;
  }

 private:
  const TempDir& dir_;
  std::string db_;
  std::optional<StartedCoordinator> coordinator_;
  std::vector<Process> workers_;
};

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_E2E_E2E_FLEET_H_
