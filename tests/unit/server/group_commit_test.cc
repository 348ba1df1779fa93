// Tests for GroupCommit (server/engine/group_commit.h): batches waiting
// together are applied together, callers are answered with what `apply` set,
// and shutdown answers everyone.
#include "server/engine/group_commit.h"

#include <atomic>
#include <thread>
#include <vector>

#include "absl/synchronization/notification.h"
#include "gtest/gtest.h"

namespace skerry::engine {
namespace {

std::vector<skerry::v1::TaskResult> Results(int n) {
  return std::vector<skerry::v1::TaskResult>(n);
}

TEST(GroupCommitTest, CallersGetTheOutcomeApplySet) {
  GroupCommit::Callbacks cb;
  cb.apply = [](absl::Span<ReportJob* const> jobs,
                const std::function<void()>& answer) {
    for (ReportJob* j : jobs) {
      j->outcome.accepted = static_cast<uint32_t>(j->results->size());
    }
    answer();
  };
  cb.idle = [] {};
  GroupCommit gc(std::move(cb), Clock::Real(), absl::Milliseconds(10));
  gc.Start();
  const auto results = Results(3);
  absl::StatusOr<ReportOutcome> out = gc.Submit(7, results);
  ASSERT_TRUE(out.ok()) << out.status();
  EXPECT_EQ(out->accepted, 3u);
}

TEST(GroupCommitTest, AFailedApplyIsUnavailableToTheCaller) {
  GroupCommit::Callbacks cb;
  cb.apply = [](absl::Span<ReportJob* const> jobs,
                const std::function<void()>& answer) {
    for (ReportJob* j : jobs) j->status = absl::UnavailableError("disk full");
    answer();
  };
  cb.idle = [] {};
  GroupCommit gc(std::move(cb), Clock::Real(), absl::Milliseconds(10));
  gc.Start();
  const auto results = Results(1);
  absl::StatusOr<ReportOutcome> out = gc.Submit(1, results);
  EXPECT_TRUE(absl::IsUnavailable(out.status())) << out.status();
}

// While one batch is being applied, the calls that arrive wait and are then
// applied in one batch together.
TEST(GroupCommitTest, CallsArrivingDuringACommitAreAppliedTogether) {
  absl::Notification first_entered, release_first;
  std::atomic<int> batches{0};
  std::vector<size_t> sizes;  // written on the committer thread only
  GroupCommit::Callbacks cb;
  cb.apply = [&](absl::Span<ReportJob* const> jobs,
                 const std::function<void()>& answer) {
    sizes.push_back(jobs.size());
    if (batches.fetch_add(1) == 0) {
      first_entered.Notify();
      release_first.WaitForNotification();
    }
    answer();
  };
  cb.idle = [] {};
  GroupCommit gc(std::move(cb), Clock::Real(), absl::Milliseconds(10));
  gc.Start();
  const auto results = Results(1);
  std::thread first([&] { EXPECT_TRUE(gc.Submit(1, results).ok()); });
  ASSERT_TRUE(first_entered.WaitForNotificationWithTimeout(absl::Seconds(30)));
  std::vector<std::thread> later;
  for (int i = 0; i < 3; ++i) {
    later.emplace_back([&] { EXPECT_TRUE(gc.Submit(2, results).ok()); });
  }
  // Let the three queue up behind the first (bounded: 30 s at most).
  for (int i = 0; i < 3000; ++i) {
    absl::SleepFor(absl::Milliseconds(10));
    if (gc.WaitingForTest() == 3) break;
  }
  EXPECT_EQ(gc.WaitingForTest(), 3u);
  release_first.Notify();
  first.join();
  for (std::thread& t : later) t.join();
  gc.Shutdown();
  ASSERT_EQ(sizes.size(), 2u);
  EXPECT_EQ(sizes[0], 1u);
  EXPECT_EQ(sizes[1], 3u);
}

TEST(GroupCommitTest, AnApplyThatForgetsToAnswerStillReleasesCallers) {
  GroupCommit::Callbacks cb;
  cb.apply = [](absl::Span<ReportJob* const>, const std::function<void()>&) {};
  cb.idle = [] {};
  GroupCommit gc(std::move(cb), Clock::Real(), absl::Milliseconds(10));
  gc.Start();
  const auto results = Results(1);
  EXPECT_TRUE(gc.Submit(1, results).ok());
}

TEST(GroupCommitTest, IdleRunsWithoutReportsAndSubmitAfterShutdownFails) {
  absl::Notification idled;
  std::atomic<bool> notified{false};
  GroupCommit::Callbacks cb;
  cb.apply = [](absl::Span<ReportJob* const>,
                const std::function<void()>& answer) { answer(); };
  cb.idle = [&] {
    if (!notified.exchange(true)) idled.Notify();
  };
  GroupCommit gc(std::move(cb), Clock::Real(), absl::Milliseconds(1));
  gc.Start();
  EXPECT_TRUE(idled.WaitForNotificationWithTimeout(absl::Seconds(30)));
  gc.Shutdown();
  const auto results = Results(1);
  EXPECT_TRUE(absl::IsUnavailable(gc.Submit(1, results).status()));
}

// A commit that hangs (a stuck disk) does not hold a shutdown forever: after
// the grace the committer is interrupted (the store's sqlite3_interrupt, in
// the engine), its callers are told to report again, and Shutdown returns.
TEST(GroupCommitTest, ShutdownInterruptsACommitThatDoesNotEnd) {
  absl::Notification applying, interrupted;
  GroupCommit::Callbacks cb;
  cb.apply = [&](absl::Span<ReportJob* const> jobs,
                 const std::function<void()>& answer) {
    applying.Notify();
    // Bounded: a broken interrupt fails the test instead of hanging it.
    const bool ok =
        interrupted.WaitForNotificationWithTimeout(absl::Seconds(60));
    for (ReportJob* j : jobs) {
      j->status =
          absl::UnavailableError(ok ? "interrupted" : "never interrupted");
    }
    answer();
  };
  cb.idle = [] {};
  std::atomic<int> interrupts{0};
  cb.interrupt = [&] {
    if (interrupts.fetch_add(1) == 0) interrupted.Notify();
  };
  GroupCommit gc(std::move(cb), Clock::Real(), absl::Milliseconds(10),
                 absl::Milliseconds(50));
  gc.Start();
  const auto results = Results(1);
  absl::StatusOr<ReportOutcome> out;
  std::thread caller([&] { out = gc.Submit(1, results); });
  ASSERT_TRUE(applying.WaitForNotificationWithTimeout(absl::Seconds(30)));
  gc.Shutdown();
  caller.join();
  EXPECT_GE(interrupts.load(), 1);
  EXPECT_TRUE(absl::IsUnavailable(out.status())) << out.status();
  EXPECT_EQ(out.status().message(), "interrupted");
}

// The coordinator's main thread and the engine's destructor may both shut
// down: both return, the committer joined once.
TEST(GroupCommitTest, ShutdownFromTwoThreadsAtOnceReturnsInBoth) {
  GroupCommit::Callbacks cb;
  cb.apply = [](absl::Span<ReportJob* const>,
                const std::function<void()>& answer) { answer(); };
  cb.idle = [] {};
  GroupCommit gc(std::move(cb), Clock::Real(), absl::Milliseconds(1));
  gc.Start();
  std::thread a([&] { gc.Shutdown(); });
  std::thread b([&] { gc.Shutdown(); });
  a.join();
  b.join();
  gc.Shutdown();  // and once more, after both
  const auto results = Results(1);
  EXPECT_TRUE(absl::IsUnavailable(gc.Submit(1, results).status()));
}

}  // namespace
}  // namespace skerry::engine
