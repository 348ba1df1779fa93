// The CLI and a worker talking to a real skerry-coordinator through a slow
// link: a delaying TCP proxy on loopback (tests/support/delay_proxy.h) in
// front of the coordinator's port. Before connect timeouts followed
// --timeout, gRPC allowed a connection attempt only 100 ms (the channel's
// minimum reconnect backoff) and every call through such a link failed.
// No time is asserted; every wait is bounded.
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/delay_proxy.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using ::testing::HasSubstr;
using testing::RunCommand;

class SlowLinkTest : public ::testing::Test {
 protected:
  void SetUp() override {
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, dir_.File("skerry.db"),
        dir_.File("coordinator.log"));
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
    ASSERT_TRUE(testing::WriteTextFile(dir_.File("quick.spec"), R"pb(
      name: "slow-link"
      seed: 3
      genome_length: 3
      evaluator { builtin { function: "sphere" } }
      ga { population_size: 6 }
      stop { max_generations: 3 }
    )pb"));
  }

  // A proxy to the coordinator with `latency` each way.
  std::string Link(absl::Duration latency) {
    absl::StatusOr<std::unique_ptr<testing::DelayProxy>> p =
        testing::DelayProxy::Start(coordinator_->port, latency);
    EXPECT_TRUE(p.ok()) << p.status();
    if (!p.ok()) return "127.0.0.1:1";
    proxies_.push_back(std::move(*p));
    return proxies_.back()->address();
  }

  CommandResult Cli(const std::string& address,
                    const std::vector<std::string>& args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator", address};
    argv.insert(argv.end(), args.begin(), args.end());
    return RunCommand(argv, absl::Minutes(3));
  }

  testing::TempDir dir_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
  std::vector<std::unique_ptr<testing::DelayProxy>> proxies_;
};

// The observed bug: 100 ms of latency made every call fail (exit 3).
TEST_F(SlowLinkTest, CliCallsSucceedThroughALinkSlowerThanAHundredMs) {
  const std::string slow = Link(absl::Milliseconds(150));
  CommandResult submit = Cli(slow, {"submit", dir_.File("quick.spec")});
  EXPECT_EQ(submit.exit_code, 0) << submit.output;
  CommandResult list = Cli(slow, {"list"});
  EXPECT_EQ(list.exit_code, 0) << list.output;
  EXPECT_THAT(list.output, HasSubstr("slow-link"));
  EXPECT_GT(proxies_.back()->connections(), 0) << "the calls took the link";
}

TEST_F(SlowLinkTest, TimeoutOptionLetsCallsWaitSecondsForTheCoordinator) {
  const std::string slow = Link(absl::Milliseconds(1500));
  CommandResult list = Cli(slow, {"--timeout", "60", "list"});
  EXPECT_EQ(list.exit_code, 0) << list.output;
}

TEST_F(SlowLinkTest, CallSlowerThanTheTimeoutFailsAsUnreachable) {
  const std::string slow = Link(absl::Milliseconds(1500));
  CommandResult list = Cli(slow, {"--timeout", "1", "list"});
  EXPECT_EQ(list.exit_code, 3) << list.output;
  EXPECT_THAT(list.output, HasSubstr(slow));
}

TEST_F(SlowLinkTest, TimeoutOutOfRangeIsAUsageError) {
  CommandResult r = Cli(coordinator_->address(), {"--timeout", "0", "list"});
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_THAT(r.output, HasSubstr("--timeout"));
}

TEST_F(SlowLinkTest, WorkerFinishesARunThroughASlowLink) {
  CommandResult submit =
      Cli(coordinator_->address(), {"submit", dir_.File("quick.spec")});
  ASSERT_EQ(submit.exit_code, 0) << submit.output;
  const std::string slow = Link(absl::Milliseconds(150));
  absl::StatusOr<testing::Process> worker = testing::Process::Start(
      {SKERRY_WORKER_BIN, "--coordinator", slow, "--threads", "1", "--timeout",
       "60", "--wait-ms", "200"},
      dir_.File("worker.log"));
  ASSERT_TRUE(worker.ok()) << worker.status();
  // `watch` on the direct address returns when the run has ended.
  CommandResult watch = Cli(coordinator_->address(), {"watch", "1"});
  EXPECT_EQ(watch.exit_code, 0) << watch.output << worker->Log();
  EXPECT_THAT(watch.output, HasSubstr("finished"));
}

}  // namespace
}  // namespace skerry
