// The engine's lock is not held across a result commit's fsync
// (server/engine/engine.h): a commit is held at its sync by the fault VFS's
// hook, and meanwhile a run's summary and the list of runs are answered. A
// stop asked for meanwhile waits for the commit (a writer), and once the sync
// is let go every result the commit carried is acknowledged, stored and kept.
//
// Bounded, not timed: the hook lets the sync go by itself after 60 s and
// records that it had to, which fails the test (a summary that waited for the
// commit would only return then).
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "common/clock.h"
#include "gtest/gtest.h"
#include "server/engine/engine.h"
#include "server/store/check.h"
#include "server/store/store.h"
#include "tests/fault/fault_vfs.h"
#include "tests/support/engine_harness.h"
#include "tests/support/process.h"

namespace skerry::engine {
namespace {

using skerry::testing::FaultVfs;
using skerry::testing::TempDir;
using skerry::v1::Task;

constexpr int64_t kWorker = 1;

// Holds the first sync it sees until Release(), or 60 s at most.
class SyncGate {
 public:
  void Hook() {
    absl::MutexLock l(&mu_);
    if (used_) return;  // only the first sync is held
    used_ = true;
    entered_ = true;
    if (!mu_.AwaitWithTimeout(absl::Condition(&released_), absl::Seconds(60))) {
      timed_out_ = true;
    }
  }
  bool AwaitEntered() {
    absl::MutexLock l(&mu_);
    return mu_.AwaitWithTimeout(absl::Condition(&entered_), absl::Seconds(60));
  }
  // True when the sync was still held (nothing waited for it to end).
  bool Release() {
    absl::MutexLock l(&mu_);
    released_ = true;
    return !timed_out_;
  }

 private:
  absl::Mutex mu_;
  bool used_ ABSL_GUARDED_BY(mu_) = false;
  bool entered_ ABSL_GUARDED_BY(mu_) = false;
  bool released_ ABSL_GUARDED_BY(mu_) = false;
  bool timed_out_ ABSL_GUARDED_BY(mu_) = false;
};

TEST(CommitLockTest, SummariesAreAnsweredWhileAResultCommitIsBeingSynced) {
  FaultVfs* vfs = FaultVfs::Install();
  FakeClock clock;
  TempDir dir;
  const std::string db = dir.File("lock.db");
  store::Store::Options options;
  options.vfs = FaultVfs::kName;
  absl::StatusOr<std::unique_ptr<skerry::testing::EngineHarness>> opened =
      skerry::testing::OpenEngineHarness(db, options, false, &clock);
  ASSERT_TRUE(opened.ok()) << opened.status();
  skerry::testing::EngineHarness& h = **opened;
  absl::StatusOr<store::RunRecord> run = h.engine->Submit(
      skerry::testing::SmallSphereSpec("commit-lock", 5), "spec", "alice");
  ASSERT_TRUE(run.ok()) << run.status();
  std::vector<Task> tasks =
      h.queue->Lease(kWorker, 1000, absl::Milliseconds(50));
  ASSERT_EQ(tasks.size(), 12u);  // two islands of 6

  SyncGate gate;
  vfs->SetSyncHook([&gate] { gate.Hook(); });
  std::optional<absl::StatusOr<ReportOutcome>> reported;
  std::thread reporter([&] {
    reported =
        h.engine->Report(kWorker, skerry::testing::SphereResults(tasks, 0.01));
  });
  ASSERT_TRUE(gate.AwaitEntered()) << "the commit never reached its sync";

  // The commit is held at its fsync: reads go on.
  absl::StatusOr<skerry::v1::RunSummary> summary = h.engine->Summary(run->id);
  absl::StatusOr<std::vector<skerry::v1::RunSummary>> list =
      h.engine->ListSummaries();
  // A writer asked for meanwhile waits for the commit, then stops the run.
  absl::Status stopped = absl::UnknownError("not run");
  std::thread stopper([&] { stopped = h.engine->Stop(run->id); });

  EXPECT_TRUE(gate.Release())
      << "the summary and the list waited for the commit's sync";
  reporter.join();
  stopper.join();
  vfs->SetSyncHook(nullptr);

  ASSERT_TRUE(summary.ok()) << summary.status();
  EXPECT_EQ(summary->state(), skerry::v1::RUNNING);
  ASSERT_TRUE(list.ok()) << list.status();
  EXPECT_EQ(list->size(), 1u);
  ASSERT_TRUE(reported.has_value());
  ASSERT_TRUE(reported->ok()) << reported->status();
  EXPECT_EQ((*reported)->accepted, 12u);
  EXPECT_EQ((*reported)->ignored, 0u);
  EXPECT_TRUE(stopped.ok()) << stopped;

  // Every acknowledged result is stored, and the file is consistent.
  absl::StatusOr<store::RunRecord> stored = h.store->runs().GetRun(run->id);
  ASSERT_TRUE(stored.ok()) << stored.status();
  EXPECT_EQ(stored->state, skerry::v1::STOPPED);
  EXPECT_EQ(stored->evaluations, 12u);
  absl::StatusOr<std::vector<store::GenomeRecord>> g0 =
      h.store->genomes().GetGeneration(run->id, 0, 0);
  ASSERT_TRUE(g0.ok()) << g0.status();
  for (const store::GenomeRecord& g : *g0) {
    EXPECT_EQ(g.state, skerry::v1::EVALUATED) << "genome " << g.id;
  }
  h.engine->Shutdown();
  absl::StatusOr<store::CheckReport> report = store::CheckDatabase(db);
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

}  // namespace
}  // namespace skerry::engine
