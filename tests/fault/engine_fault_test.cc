// Storage failure under a running engine (server/engine/engine.h, "Storage
// trouble"): the engine's store is opened through the fault VFS, the test plays
// the fleet (Lease and Report on the engine and its task queue, as
// tests/unit/server/engine_test.cc does) and makes every write fail part-way
// through a run. While the writes fail: Report answers Unavailable and nothing
// it carried is stored, no work is handed out, every summary names the
// problem, reads keep working, and a Submit is refused and stores nothing.
// Once the disk works again the committer's probe (every second of real time)
// lifts the hold by itself, the results reported again are accepted, and the
// run ends with the same digest as an uninterrupted run of the same spec.
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "common/clock.h"
#include "gtest/gtest.h"
#include "server/engine/engine.h"
#include "server/scheduler/task_queue.h"
#include "server/store/check.h"
#include "server/store/store.h"
#include "sqlite3.h"
#include "tests/fault/fault_vfs.h"
#include "tests/support/db_check.h"
#include "tests/support/engine_harness.h"
#include "tests/support/process.h"

namespace skerry::engine {
namespace {

using skerry::testing::FaultKind;
using skerry::testing::FaultKindName;
using skerry::testing::FaultVfs;
using skerry::testing::QueryText;
using skerry::testing::TempDir;
using skerry::v1::RunSpec;
using skerry::v1::Task;
using skerry::v1::TaskResult;

constexpr int64_t kWorker = 1;
constexpr int kMaxFaultPoint = 60;

using Harness = skerry::testing::EngineHarness;

RunSpec SmallSpec() {
  return skerry::testing::SmallSphereSpec("engine-fault", 77);
}

std::unique_ptr<Harness> OpenHarness(const std::string& path, bool faulty,
                                     Clock* clock) {
  store::Store::Options options;
  if (faulty) options.vfs = FaultVfs::kName;
  absl::StatusOr<std::unique_ptr<Harness>> h =
      skerry::testing::OpenEngineHarness(path, options, /*quick_check=*/false,
                                         clock);
  EXPECT_TRUE(h.ok()) << h.status();
  if (!h.ok()) return nullptr;
  return *std::move(h);
}

std::vector<TaskResult> Score(const std::vector<Task>& tasks) {
  return skerry::testing::SphereResults(tasks, 0.01);
}

bool Active(Harness& h, int64_t run_id) {
  absl::StatusOr<skerry::v1::RunSummary> s = h.engine->Summary(run_id);
  EXPECT_TRUE(s.ok()) << s.status();
  return s.ok() && (s->state() == skerry::v1::RUNNING ||
                    s->state() == skerry::v1::QUEUED);
}

std::string Problem(Harness& h, int64_t run_id) {
  absl::StatusOr<skerry::v1::RunSummary> s = h.engine->Summary(run_id);
  EXPECT_TRUE(s.ok()) << s.status();
  return s.ok() ? s->coordinator_problem() : "summary failed";
}

// Everything ready to lease, waiting (real time, bounded) for the committer to
// breed the next generation after a Report.
std::vector<Task> LeaseReady(Harness& h) {
  for (int i = 0; i < 40; ++i) {
    std::vector<Task> tasks =
        h.queue->Lease(kWorker, 1000, absl::Milliseconds(50));
    if (!tasks.empty()) return tasks;
  }
  return {};
}

// Moves the engine's clock a second at a time, so that the committer's tick
// probes the database, until the hold is lifted (bounded: 200 ticks); true
// when it was.
bool WaitUntilWritable(Harness& h, FakeClock& clock, int64_t run_id) {
  for (int i = 0; i < 200; ++i) {
    if (Problem(h, run_id).empty()) return true;
    clock.Advance(absl::Seconds(1));
    absl::SleepFor(absl::Milliseconds(10));  // let the woken tick run
  }
  return false;
}

void DriveToEnd(Harness& h, int64_t run_id) {
  for (int round = 0; round < 100; ++round) {
    if (!Active(h, run_id)) return;
    std::vector<Task> tasks = LeaseReady(h);
    ASSERT_FALSE(tasks.empty()) << "run " << run_id << " is active, no tasks";
    absl::StatusOr<ReportOutcome> out = h.engine->Report(kWorker, Score(tasks));
    ASSERT_TRUE(out.ok()) << out.status();
  }
  FAIL() << "run " << run_id << " did not finish in 100 rounds";
}

int64_t Submit(Harness& h) {
  absl::StatusOr<store::RunRecord> run =
      h.engine->Submit(SmallSpec(), "spec text", "alice");
  EXPECT_TRUE(run.ok()) << run.status();
  return run.ok() ? run->id : 0;
}

std::string Digest(store::Store& s, int64_t run_id) {
  absl::StatusOr<store::GenomeStore::Digest> d = s.genomes().RunDigest(run_id);
  EXPECT_TRUE(d.ok()) << d.status();
  return d.ok() ? absl::StrCat(d->sha256, " (", d->genomes, " genomes)") : "";
}

void ExpectConsistent(const std::string& db) {
  absl::StatusOr<store::CheckReport> report = store::CheckDatabase(db);
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

long long Count(const std::string& db, const std::string& sql) {
  return std::stoll("0" + QueryText(db, sql));
}

// Runs `sql` on the database file through a connection of the test's own.
void ExecSql(const std::string& db, const std::string& sql) {
  sqlite3* conn = nullptr;
  ASSERT_EQ(sqlite3_open(db.c_str(), &conn), SQLITE_OK);
  sqlite3_busy_timeout(conn, 5000);
  char* error = nullptr;
  const int rc = sqlite3_exec(conn, sql.c_str(), nullptr, nullptr, &error);
  EXPECT_EQ(rc, SQLITE_OK) << (error != nullptr ? error : "") << " in " << sql;
  sqlite3_free(error);
  sqlite3_close(conn);
}

// A trigger that makes SQLite fail the statement that fires it with a
// runtime error of its own (SQLITE_ERROR, which the store maps to INTERNAL:
// neither storage trouble nor damage). abs() of the smallest 64-bit integer
// is "integer overflow" (SQLite's documentation of abs(X)).
std::string PoisonTrigger(const std::string& name, const std::string& event,
                          const std::string& when) {
  return absl::StrCat("CREATE TRIGGER ", name, " BEFORE ", event,
                      " ON genomes WHEN ", when,
                      " BEGIN SELECT abs(-9223372036854775807 - 1); END;");
}

class EngineFaultTest : public ::testing::Test {
 protected:
  void SetUp() override {
    vfs_ = FaultVfs::Install();
    std::unique_ptr<Harness> h =
        OpenHarness(ref_dir_.File("ref.db"), false, &clock_);
    ASSERT_NE(h, nullptr);
    const int64_t run = Submit(*h);
    DriveToEnd(*h, run);
    reference_ = Digest(*h->store, run);
  }

  // A database at `path` whose run (*run) has generation 0 evaluated and
  // generation 1 bred, its tasks not yet leased.
  void PrepareGeneration1(const std::string& path, int64_t* run) {
    std::unique_ptr<Harness> h = OpenHarness(path, false, &clock_);
    ASSERT_NE(h, nullptr);
    *run = Submit(*h);
    ASSERT_TRUE(h->engine->Report(kWorker, Score(LeaseReady(*h))).ok());
    ASSERT_FALSE(LeaseReady(*h).empty());  // generation 1 has been bred
  }

  FaultVfs* vfs_ = nullptr;
  FakeClock clock_;
  TempDir ref_dir_;
  TempDir dir_;
  std::string reference_;  // digest of the uninterrupted run
};

TEST_F(EngineFaultTest, FailingDiskHoldsWorkKeepsResultsAndResumesByItself) {
  const std::string db = dir_.File("faulty.db");
  std::unique_ptr<Harness> h = OpenHarness(db, true, &clock_);
  ASSERT_NE(h, nullptr);
  const int64_t run = Submit(*h);
  // Generation 0 of both islands, then generation 1 leased.
  ASSERT_TRUE(h->engine->Report(kWorker, Score(LeaseReady(*h))).ok());
  // Settle: the committer queues both islands' generation 1 under the engine's
  // lock, which ListSummaries waits for.
  ASSERT_TRUE(h->engine->ListSummaries().ok());
  // Lease every pending task of generation 1 (both islands), however the
  // committer's breeding interleaves with these calls (bounded).
  std::vector<Task> leased;
  long long pending_before = 0;
  for (int i = 0; i < 40; ++i) {
    for (Task& t : LeaseReady(*h)) leased.push_back(std::move(t));
    pending_before =
        Count(db, "SELECT count(*) FROM genomes WHERE eval_state = 1");
    if (!leased.empty() &&
        pending_before == static_cast<long long>(leased.size())) {
      break;
    }
  }
  ASSERT_FALSE(leased.empty());
  const std::vector<TaskResult> results = Score(leased);
  ASSERT_EQ(pending_before, static_cast<long long>(leased.size()));

  vfs_->Arm(FaultKind::kIoErr, 1, /*persistent=*/true);
  absl::StatusOr<ReportOutcome> refused = h->engine->Report(kWorker, results);
  ASSERT_FALSE(refused.ok());
  EXPECT_EQ(refused.status().code(), absl::StatusCode::kUnavailable)
      << refused.status();
  EXPECT_NE(refused.status().message().find("report them again"),
            std::string::npos)
      << refused.status();
  // Nothing of the refused report is stored.
  EXPECT_EQ(Count(db, "SELECT count(*) FROM genomes WHERE eval_state = 1"),
            pending_before);
  EXPECT_EQ(Count(db, "SELECT evaluations FROM runs"), 12);

  // Held: no work, the problem in every summary, reads still answered.
  EXPECT_TRUE(h->queue->Lease(kWorker, 1000, absl::ZeroDuration()).empty());
  EXPECT_NE(Problem(*h, run), "");
  absl::StatusOr<std::vector<skerry::v1::RunSummary>> all =
      h->engine->ListSummaries();
  ASSERT_TRUE(all.ok()) << all.status();
  ASSERT_EQ(all->size(), 1u);
  EXPECT_NE((*all)[0].coordinator_problem(), "");

  // The probe keeps failing while the disk does (bounded wait for one probe).
  const int64_t counted = vfs_->counted();
  for (int i = 0; i < 100 && vfs_->counted() == counted; ++i) {
    clock_.Advance(absl::Seconds(1));  // the committer's tick probes
    absl::SleepFor(absl::Milliseconds(10));
  }
  EXPECT_GT(vfs_->counted(), counted) << "the committer never probed";
  EXPECT_TRUE(h->queue->Lease(kWorker, 1000, absl::ZeroDuration()).empty());
  EXPECT_NE(Problem(*h, run), "");

  vfs_->Disarm();
  ASSERT_TRUE(WaitUntilWritable(*h, clock_, run))
      << "the hold was never lifted";
  // The same results, reported again, are taken.
  absl::StatusOr<ReportOutcome> again = h->engine->Report(kWorker, results);
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(again->accepted, results.size());
  EXPECT_EQ(again->ignored, 0u);
  DriveToEnd(*h, run);
  EXPECT_EQ(Digest(*h->store, run), reference_);
  h.reset();
  ExpectConsistent(db);
}

TEST_F(EngineFaultTest, SubmitWhileDiskIsFullIsRefusedAndStoresNothing) {
  const std::string db = dir_.File("full.db");
  std::unique_ptr<Harness> h = OpenHarness(db, true, &clock_);
  ASSERT_NE(h, nullptr);
  const int64_t run = Submit(*h);
  vfs_->Arm(FaultKind::kFull, 1, /*persistent=*/true);
  absl::StatusOr<store::RunRecord> refused =
      h->engine->Submit(SmallSpec(), "spec text", "bob");
  vfs_->Disarm();
  ASSERT_FALSE(refused.ok());
  EXPECT_EQ(refused.status().code(), absl::StatusCode::kResourceExhausted)
      << refused.status();
  EXPECT_NE(refused.status().message().find("full"), std::string::npos)
      << refused.status();
  EXPECT_EQ(Count(db, "SELECT count(*) FROM runs"), 1);
  EXPECT_EQ(Count(db, "SELECT count(*) FROM genomes WHERE run_id != 1"), 0);
  absl::StatusOr<std::vector<skerry::v1::RunSummary>> all =
      h->engine->ListSummaries();
  ASSERT_TRUE(all.ok()) << all.status();
  EXPECT_EQ(all->size(), 1u);
  // The first run is untouched and finishes as if nothing happened.
  ASSERT_TRUE(WaitUntilWritable(*h, clock_, run));
  DriveToEnd(*h, run);
  EXPECT_EQ(Digest(*h->store, run), reference_);
  h.reset();
  ExpectConsistent(db);
}

// Regression: an INTERNAL error from the store (a bug, or a value it will not
// take) was taken for storage trouble and held the whole fleet, and one such
// result failed every other result committed with it, every time it was
// sent again.
TEST_F(EngineFaultTest,
       InternalErrorInAResultCommitHoldsNothingAndFailsOnlyThatResult) {
  const std::string db = dir_.File("internal.db");
  std::unique_ptr<Harness> h = OpenHarness(db, false, &clock_);
  ASSERT_NE(h, nullptr);
  const int64_t run = Submit(*h);
  ExecSql(db, PoisonTrigger("poison", "UPDATE",
                            "NEW.eval_state = 2 AND NEW.score = 12345.5"));
  std::vector<Task> tasks = LeaseReady(*h);
  ASSERT_GT(tasks.size(), 1u);
  std::vector<TaskResult> results = Score(tasks);
  results[0].set_score(12345.5);  // finite and valid: only the store balks
  const int64_t poisoned = static_cast<int64_t>(tasks[0].task_id());

  absl::StatusOr<ReportOutcome> out = h->engine->Report(kWorker, results);
  ASSERT_TRUE(out.ok()) << out.status();
  EXPECT_EQ(out->accepted, results.size());
  EXPECT_EQ(out->ignored, 0u);
  // Nothing held: no problem named, and the poisoned genome is offered again.
  EXPECT_EQ(Problem(*h, run), "");
  EXPECT_EQ(Count(db, "SELECT count(*) FROM genomes WHERE eval_state = 2"),
            static_cast<long long>(results.size() - 1));
  const std::string where = absl::StrCat(" FROM genomes WHERE id = ", poisoned);
  EXPECT_EQ(Count(db, "SELECT eval_state" + where), 1) << "pending again";
  EXPECT_EQ(Count(db, "SELECT attempts" + where), 1);
  EXPECT_TRUE(absl::StrContains(QueryText(db, "SELECT error" + where),
                                "could not store this result"))
      << QueryText(db, "SELECT error" + where);
  std::vector<Task> again = LeaseReady(*h);
  ASSERT_EQ(again.size(), 1u);
  EXPECT_EQ(static_cast<int64_t>(again[0].task_id()), poisoned);
  EXPECT_EQ(again[0].attempt(), 2u);
  // Its honest score is taken, and the run ends as an undisturbed one does.
  ASSERT_TRUE(h->engine->Report(kWorker, Score(again)).ok());
  DriveToEnd(*h, run);
  EXPECT_EQ(Digest(*h->store, run), reference_);
}

// Regression: an INTERNAL error while breeding held the fleet (and, once not
// held, would fail again every tick). Only the run that met it ends, failed
// with the error; the other run goes on to the end.
TEST_F(EngineFaultTest,
       InternalErrorWhileBreedingFailsThatRunAloneAndHoldsNothing) {
  const std::string db = dir_.File("breeding.db");
  std::unique_ptr<Harness> h = OpenHarness(db, false, &clock_);
  ASSERT_NE(h, nullptr);
  const int64_t doomed = Submit(*h);
  const int64_t healthy = Submit(*h);
  ExecSql(db, PoisonTrigger("poison", "INSERT",
                            absl::StrCat("NEW.run_id = ", doomed,
                                         " AND NEW.generation = 1")));
  for (int round = 0; round < 100 && Active(*h, healthy); ++round) {
    std::vector<Task> tasks = LeaseReady(*h);
    ASSERT_FALSE(tasks.empty()) << "run " << healthy << " has no tasks";
    ASSERT_TRUE(h->engine->Report(kWorker, Score(tasks)).ok());
    EXPECT_EQ(Problem(*h, healthy), "") << "the fleet was held";
  }
  absl::StatusOr<skerry::v1::RunSummary> ended = h->engine->Summary(doomed);
  ASSERT_TRUE(ended.ok()) << ended.status();
  EXPECT_EQ(ended->state(), skerry::v1::FAILED_RUN);
  EXPECT_TRUE(absl::StrContains(ended->message(), "integer overflow"))
      << ended->message();
  EXPECT_FALSE(Active(*h, healthy));
  EXPECT_EQ(Digest(*h->store, healthy).empty(), false);
  h.reset();
  ExecSql(db, "DROP TRIGGER poison");
  ExpectConsistent(db);
}

// Regression: when a probe write lifted the hold and the very next write
// failed again (the disk was full for the generation but not for the small
// probe, or a lock was taken in between), the engine waited a whole tick
// before trying again. It tries again at once.
TEST_F(EngineFaultTest, HoldSetAgainRightAfterAProbeIsRetriedAtOnce) {
  const std::string prepared = dir_.File("probe-prepared.db");
  int64_t run = 0;
  ASSERT_NO_FATAL_FAILURE(PrepareGeneration1(prepared, &run));
  // Find the write at which the results of generation 1 are stored but its
  // successor's breeding fails (bounded, as the sweep below).
  for (int n = 1; n <= kMaxFaultPoint; ++n) {
    SCOPED_TRACE(absl::StrCat("disk full from write ", n));
    const std::string db = dir_.File(absl::StrCat("probe-", n, ".db"));
    std::filesystem::copy_file(prepared, db);
    std::unique_ptr<Harness> h = OpenHarness(db, true, &clock_);
    ASSERT_NE(h, nullptr);
    const std::vector<TaskResult> results = Score(LeaseReady(*h));
    ASSERT_FALSE(results.empty());
    vfs_->Arm(FaultKind::kFull, n, /*persistent=*/true);
    absl::StatusOr<ReportOutcome> out = h->engine->Report(kWorker, results);
    // The committer has bred, probed (failing) and waits for its next tick.
    ASSERT_TRUE(clock_.AwaitWaiters(1));
    if (!out.ok() || Problem(*h, run).empty()) {
      vfs_->Disarm();
      ASSERT_TRUE(WaitUntilWritable(*h, clock_, run));
      continue;
    }
    // Held, generation 2 unbred. The next probe succeeds and the write after
    // it (the breeding's first) fails once.
    vfs_->Arm(FaultKind::kFull, int64_t{1} << 40, /*persistent=*/false);
    ASSERT_TRUE(h->store->db().ProbeWrite().ok());
    const int64_t probe_writes = vfs_->counted();
    vfs_->Arm(FaultKind::kFull, probe_writes + 1, /*persistent=*/false);
    clock_.Advance(absl::Seconds(1));  // one tick, and no more
    for (int i = 0;
         i < 300 && !(vfs_->injected() == 1 && Problem(*h, run).empty()); ++i) {
      absl::SleepFor(absl::Milliseconds(10));
    }
    EXPECT_EQ(vfs_->injected(), 1) << "the breeding after the probe never "
                                      "failed: the case was not made";
    EXPECT_EQ(Problem(*h, run), "") << "held until the next tick";
    vfs_->Disarm();
    DriveToEnd(*h, run);
    EXPECT_EQ(Digest(*h->store, run), reference_);
    return;
  }
  FAIL() << "no write point failed the breeding alone";
}

// Every write from the Nth on fails while the last results of generation 1
// are reported: depending on N the results' commit fails (the Report is
// refused and repeated), or the breeding of generation 2 does (the Report is
// answered, breeding waits for the disk). Either way the run ends as if
// nothing had happened.
class EngineFaultSweep : public EngineFaultTest,
                         public ::testing::WithParamInterface<FaultKind> {};

TEST_P(EngineFaultSweep, EveryFaultPointAtAGenerationEndRecoversToSameDigest) {
  const FaultKind kind = GetParam();
  const std::string prepared = dir_.File("prepared.db");
  int64_t run = 0;
  ASSERT_NO_FATAL_FAILURE(PrepareGeneration1(prepared, &run));
  bool completed = false;
  for (int n = 1; n <= kMaxFaultPoint && !completed; ++n) {
    SCOPED_TRACE(absl::StrCat(FaultKindName(kind), " from write ", n));
    const std::string db = dir_.File(absl::StrCat("case-", n, ".db"));
    std::filesystem::copy_file(prepared, db);
    std::unique_ptr<Harness> h = OpenHarness(db, true, &clock_);
    ASSERT_NE(h, nullptr);
    const std::vector<TaskResult> results = Score(LeaseReady(*h));
    ASSERT_FALSE(results.empty());

    vfs_->Arm(kind, n, /*persistent=*/true);
    absl::StatusOr<ReportOutcome> out = h->engine->Report(kWorker, results);
    // Settle: the committer holds the engine's lock while it breeds.
    ASSERT_TRUE(h->engine->ListSummaries().ok());
    completed = vfs_->injected() == 0;
    vfs_->Disarm();
    if (!out.ok()) {
      EXPECT_EQ(out.status().code(), absl::StatusCode::kUnavailable)
          << out.status();
      EXPECT_EQ(Count(db,
                      "SELECT count(*) FROM genomes WHERE generation = 1 "
                      "AND eval_state = 1"),
                static_cast<long long>(results.size()))
          << "a refused report changed the database";
    }
    ASSERT_TRUE(WaitUntilWritable(*h, clock_, run));
    if (!out.ok()) {
      absl::StatusOr<ReportOutcome> again = h->engine->Report(kWorker, results);
      ASSERT_TRUE(again.ok()) << again.status();
      EXPECT_EQ(again->accepted, results.size());
    }
    DriveToEnd(*h, run);
    EXPECT_EQ(Digest(*h->store, run), reference_);
    h.reset();
    ExpectConsistent(db);
    std::filesystem::remove(db);
  }
  EXPECT_TRUE(completed) << "still faulting at write " << kMaxFaultPoint;
}

INSTANTIATE_TEST_SUITE_P(WriteFaults, EngineFaultSweep,
                         ::testing::Values(FaultKind::kIoErr, FaultKind::kFull,
                                           FaultKind::kFsync),
                         [](const ::testing::TestParamInfo<FaultKind>& p) {
                           return p.param == FaultKind::kIoErr  ? "IoErr"
                                  : p.param == FaultKind::kFull ? "Full"
                                                                : "Fsync";
                         });

}  // namespace
}  // namespace skerry::engine
