// SQLite fault sweep over the store's commit points, in the manner of SQLite's
// own I/O-error tests (test/ioerr.test, test/*fault.test: fail the Nth I/O call
// for N = 1, 2, 3 ... until the operation completes without meeting the fault).
//
// For each commit point (CreateRun, CommitResults, CommitGeneration,
// SetRunState, FinishRun, CreateFork, DeleteRun, the delete of an archive,
// ImportRuns), each fault kind (I/O error, full disk, failed fsync,
// busy) and each mode (the Nth call only, or the Nth and every later one):
//   1. copy a prepared database and open it through the fault VFS;
//   2. arm the fault at N and run the operation: OK, or a clean non-OK Status;
//   3. disarm: the same Store must write again (ProbeWrite), and a second
//      connection must see the operation's effect all or nothing (all exactly
//      when the Status was OK);
//   4. a failed operation, retried on the same Store, succeeds;
//   5. close, then PRAGMA integrity_check is "ok" and CheckDatabase finds no
//      broken invariant.
// The sweep ends at the first N that the operation completes without reaching
// (bounded by kMaxFaultPoint).
#include <filesystem>
#include <functional>
#include <memory>
#include <string>
#include <tuple>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/breeder.h"
#include "server/store/backup.h"
#include "server/store/check.h"
#include "server/store/run_content.h"
#include "server/store/store.h"
#include "skerry/v1/strategy.pb.h"
#include "tests/fault/fault_vfs.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry::store {
namespace {

using skerry::testing::FaultKind;
using skerry::testing::FaultKindName;
using skerry::testing::FaultVfs;
using skerry::testing::QueryText;
using skerry::testing::TempDir;

constexpr int kMaxFaultPoint = 200;
constexpr uint32_t kPopulation = 4;
constexpr int64_t kNowMs = 1700000000000;

skerry::v1::RunSpec SweepSpec(uint32_t islands) {
  skerry::v1::RunSpec spec;
  spec.set_name("fault-sweep");
  spec.set_seed(4242);
  spec.set_genome_length(2);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(kPopulation);
  spec.mutable_ga()->set_elites(1);
  spec.mutable_islands()->set_count(islands);
  spec.mutable_stop()->set_max_generations(10);
  absl::StatusOr<skerry::v1::RunSpec> prepared = PrepareSpec(spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return prepared.ok() ? *prepared : spec;
}

// The run and generation 0 of every island, as the engine's Submit makes them.
struct NewRun {
  RunRecord run;
  std::vector<GenomeRecord> genomes;
};
NewRun MakeRun(uint32_t islands) {
  NewRun n;
  n.run.name = "fault-sweep";
  n.run.owner = "alice";
  n.run.spec = SweepSpec(islands);
  n.run.spec_text = "fault sweep";
  n.run.state = skerry::v1::RUNNING;
  n.run.created_ms = n.run.updated_ms = n.run.started_ms = kNowMs;
  for (uint32_t i = 0; i < islands; ++i) {
    std::vector<GenomeRecord> seeded = engine::Seed(n.run.spec, i).value();
    for (GenomeRecord& g : seeded) {
      n.genomes.push_back(std::move(g));
    }
  }
  return n;
}

// Sphere values (Jamil & Yang 2013, see REFERENCES.md) for a generation.
std::vector<ResultUpdate> Evaluate(const std::vector<GenomeRecord>& genomes,
                                   size_t count) {
  std::vector<ResultUpdate> out;
  for (size_t i = 0; i < count && i < genomes.size(); ++i) {
    ResultUpdate u;
    u.genome_id = genomes[i].id;
    u.run_id = genomes[i].run_id;
    u.state = skerry::v1::EVALUATED;
    for (double x : genomes[i].genes) u.score += x * x;
    u.attempts = 1;
    u.eval_seconds = 0.01;
    out.push_back(u);
  }
  return out;
}

// Generation g+1 of island 0 bred from generation g, ready to commit.
struct NextGeneration {
  StatsRecord stats;
  std::vector<GenomeRecord> next;
  std::pair<int64_t, double> champion;
};
NextGeneration Bred(Store& store, int64_t run_id, uint32_t g) {
  NextGeneration n;
  absl::StatusOr<RunRecord> run = store.runs().GetRun(run_id);
  absl::StatusOr<std::vector<GenomeRecord>> current =
      store.genomes().GetGeneration(run_id, 0, g);
  EXPECT_TRUE(run.ok() && current.ok());
  if (!run.ok() || !current.ok()) return n;
  n.stats = engine::ComputeStats(run->spec, *current);
  n.stats.run_id = run_id;
  n.stats.completed_ms = kNowMs;
  absl::StatusOr<std::vector<GenomeRecord>> next =
      engine::Breed(run->spec, 0, *current, {});
  EXPECT_TRUE(next.ok()) << next.status();
  if (next.ok()) n.next = std::move(*next);
  for (GenomeRecord& r : n.next) r.run_id = run_id;
  for (const GenomeRecord& r : *current) {
    if (r.score == n.stats.best) n.champion = {r.id, r.score};
  }
  return n;
}

absl::Status Commit(Store& store, int64_t run_id, NextGeneration* n) {
  GenerationCommit c;
  c.run_id = run_id;
  c.island = 0;
  c.completed = n->stats;
  c.next = &n->next;
  c.champion = n->champion;
  return store.runs().CommitGeneration(c);
}

// Reads through a connection of its own (not the Store under test).
long long Count(const std::string& db, const std::string& sql) {
  return std::stoll("0" + QueryText(db, sql));
}

// What a database shows of an operation: all of it, none of it, or (a bug)
// something in between.
enum class Effect { kNone, kAll, kPartial };
std::string EffectName(Effect e) {
  return e == Effect::kNone ? "none" : e == Effect::kAll ? "all" : "PARTIAL";
}
Effect Judge(bool all, bool none) {
  return all ? Effect::kAll : none ? Effect::kNone : Effect::kPartial;
}

// One commit point: how to prepare the database before it, run it, and judge
// its effect. Run ids and genome ids are the same in every copy of the
// prepared database.
struct CommitPoint {
  std::string name;
  std::function<void(Store&)> prepare;
  std::function<absl::Status(Store&)> run;
  std::function<Effect(const std::string& db)> effect;
};

constexpr int64_t kRun = 1;  // the first run of a fresh database

// A one-run export (store/backup.h) of a run of 2 islands, generation 0
// evaluated, made once on the default VFS, for ImportRuns.
const std::string& ExportFile() {
  static const std::string* path = [] {
    static TempDir* dir = new TempDir();
    const std::string src = dir->File("source.db");
    {
      absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(src);
      EXPECT_TRUE(s.ok()) << s.status();
      NewRun n = MakeRun(2);
      EXPECT_TRUE((*s)->runs().CreateRun(&n.run, &n.genomes).ok());
      EXPECT_TRUE((*s)->genomes()
                      .CommitResults(Evaluate(n.genomes, n.genomes.size()))
                      .ok());
    }
    auto* out = new std::string(dir->File("export.db"));
    absl::Status made = BackupDatabase(src, kRun, *out);
    EXPECT_TRUE(made.ok()) << made;
    return out;
  }();
  return *path;
}

std::vector<CommitPoint> CommitPoints() {
  std::vector<CommitPoint> out;
  out.push_back(
      {"CreateRun", [](Store&) {},
       [](Store& s) {
         NewRun n = MakeRun(2);
         return s.runs().CreateRun(&n.run, &n.genomes);
       },
       [](const std::string& db) {
         const long long runs = Count(db, "SELECT count(*) FROM runs");
         const long long islands = Count(db, "SELECT count(*) FROM islands");
         const long long genomes = Count(db, "SELECT count(*) FROM genomes");
         return Judge(runs == 1 && islands == 2 && genomes == 2 * kPopulation,
                      runs == 0 && islands == 0 && genomes == 0);
       }});
  out.push_back(
      {"CommitResults",
       [](Store& s) {
         NewRun n = MakeRun(1);
         ASSERT_TRUE(s.runs().CreateRun(&n.run, &n.genomes).ok());
       },
       [](Store& s) {
         absl::StatusOr<std::vector<GenomeRecord>> g0 =
             s.genomes().GetGeneration(kRun, 0, 0);
         if (!g0.ok()) return g0.status();
         return s.genomes().CommitResults(Evaluate(*g0, kPopulation - 1));
       },
       [](const std::string& db) {
         const long long evaluated =
             Count(db, "SELECT count(*) FROM genomes WHERE eval_state = 2");
         const long long counter =
             Count(db, "SELECT evaluations FROM runs WHERE id = 1");
         return Judge(
             evaluated == kPopulation - 1 && counter == kPopulation - 1,
             evaluated == 0 && counter == 0);
       }});
  auto evaluated_run = [](Store& s) {
    NewRun n = MakeRun(1);
    ASSERT_TRUE(s.runs().CreateRun(&n.run, &n.genomes).ok());
    ASSERT_TRUE(
        s.genomes().CommitResults(Evaluate(n.genomes, kPopulation)).ok());
  };
  out.push_back(
      {"CommitGeneration", evaluated_run,
       [](Store& s) {
         NextGeneration n = Bred(s, kRun, 0);
         return Commit(s, kRun, &n);
       },
       [](const std::string& db) {
         const long long next =
             Count(db, "SELECT count(*) FROM genomes WHERE generation = 1");
         const long long generation =
             Count(db, "SELECT generation FROM islands WHERE idx = 0");
         const long long stats =
             Count(db, "SELECT count(*) FROM generation_stats");
         const long long champion = Count(
             db, "SELECT count(*) FROM runs WHERE champion_id IS NOT NULL");
         return Judge(
             next == kPopulation && generation == 1 && stats == 1 &&
                 champion == 1,
             next == 0 && generation == 0 && stats == 0 && champion == 0);
       }});
  out.push_back(
      {"SetRunState", evaluated_run,
       [](Store& s) {
         return s.runs().SetRunState(kRun, skerry::v1::PAUSED,
                                     "paused by the sweep", kNowMs + 1);
       },
       [](const std::string& db) {
         const std::string state = QueryText(db, "SELECT state FROM runs");
         const std::string message = QueryText(db, "SELECT message FROM runs");
         return Judge(
             state == absl::StrCat(skerry::v1::PAUSED) &&
                 message == "paused by the sweep",
             state == absl::StrCat(skerry::v1::RUNNING) && message.empty());
       }});
  out.push_back(
      {"FinishRun",
       [evaluated_run](Store& s) {
         evaluated_run(s);
         NextGeneration n = Bred(s, kRun, 0);
         ASSERT_TRUE(Commit(s, kRun, &n).ok());
         std::vector<GenomeRecord> pending;  // elites keep their scores
         for (const GenomeRecord& g : n.next) {
           if (g.state == skerry::v1::PENDING) pending.push_back(g);
         }
         ASSERT_TRUE(
             s.genomes().CommitResults(Evaluate(pending, pending.size())).ok());
       },
       [](Store& s) {
         return s.runs().FinishRun(kRun, skerry::v1::FINISHED,
                                   "finished by the sweep",
                                   /*keep_through=*/0, kNowMs + 1);
       },
       [](const std::string& db) {
         const std::string state = QueryText(db, "SELECT state FROM runs");
         const long long gen1 =
             Count(db, "SELECT count(*) FROM genomes WHERE generation = 1");
         const long long generation =
             Count(db, "SELECT generation FROM islands WHERE idx = 0");
         const long long counter = Count(db, "SELECT evaluations FROM runs");
         const long long stored =
             Count(db, "SELECT count(*) FROM genomes WHERE attempts > 0");
         const std::string stop =
             QueryText(db, "SELECT stop_generation FROM runs");
         return Judge(
             state == absl::StrCat(skerry::v1::FINISHED) && gen1 == 0 &&
                 generation == 0 && stop == "0" && counter == kPopulation,
             state == absl::StrCat(skerry::v1::RUNNING) &&
                 gen1 == kPopulation && generation == 1 && stop.empty() &&
                 counter == stored && counter > kPopulation);
       }});
  // Run 1 with generation 1 bred (generation 0 evaluated, its statistics).
  auto bred_run = [evaluated_run](Store& s) {
    evaluated_run(s);
    NextGeneration n = Bred(s, kRun, 0);
    ASSERT_TRUE(Commit(s, kRun, &n).ok());
  };
  out.push_back(
      {"CreateFork", bred_run,
       [](Store& s) {
         absl::StatusOr<RunRecord> parent = s.runs().GetRun(kRun);
         absl::StatusOr<std::vector<GenomeRecord>> gen =
             s.genomes().GetGeneration(kRun, 0, 1);
         absl::StatusOr<std::vector<StatsRecord>> stats =
             s.runs().GetStats(kRun, std::nullopt);
         if (!parent.ok()) return parent.status();
         if (!gen.ok()) return gen.status();
         if (!stats.ok()) return stats.status();
         RunRecord fork = *parent;
         fork.id = 0;
         fork.parent_run = kRun;
         fork.parent_generation = 1;
         fork.request_id.clear();
         for (GenomeRecord& g : *gen) g.id = 0;
         skerry::v1::StrategyState state;  // a GA's, at the fork generation
         state.set_generation(1);
         state.mutable_ga();
         return s.runs().CreateFork(&fork, &*stats, &*gen,
                                    {state.SerializeAsString()});
       },
       [](const std::string& db) {
         const long long runs = Count(db, "SELECT count(*) FROM runs");
         const long long islands =
             Count(db, "SELECT count(*) FROM islands WHERE run_id = 2");
         const long long genomes =
             Count(db, "SELECT count(*) FROM genomes WHERE run_id = 2");
         const long long stats = Count(
             db, "SELECT count(*) FROM generation_stats WHERE run_id = 2");
         const long long states =
             Count(db, "SELECT count(*) FROM strategy_states WHERE run_id = 2");
         return Judge(runs == 2 && islands == 1 && genomes == kPopulation &&
                          stats == 1 && states == 1,
                      runs == 1 && islands == 0 && genomes == 0 && stats == 0 &&
                          states == 0);
       }});
  auto ended_run = [bred_run](Store& s) {
    bred_run(s);
    ASSERT_TRUE(s.runs()
                    .FinishRun(kRun, skerry::v1::STOPPED,
                               "stopped by the sweep",
                               /*keep_through=*/0, kNowMs + 1)
                    .ok());
  };
  auto deleted = [](const std::string& db) {
    long long rows = 0;
    for (const char* table :
         {"islands", "genomes", "generation_stats", "strategy_states"}) {
      rows += Count(db, absl::StrCat("SELECT count(*) FROM ", table));
    }
    const long long runs = Count(db, "SELECT count(*) FROM runs");
    const long long genomes = Count(db, "SELECT count(*) FROM genomes");
    const long long islands = Count(db, "SELECT count(*) FROM islands");
    return Judge(runs == 0 && rows == 0,
                 runs == 1 && islands == 1 && genomes == kPopulation);
  };
  out.push_back({"DeleteRun", ended_run,
                 [](Store& s) { return s.runs().DeleteRun(kRun).status(); },
                 deleted});
  // `skerry archive`'s delete: the export (on the default VFS), its content
  // digest, and the delete that holds the run to it.
  out.push_back({"ArchiveRun", ended_run,
                 [](Store& s) {
                   const std::string file = s.db().path() + ".export";
                   std::filesystem::remove(file);
                   absl::Status made =
                       BackupDatabase(s.db().path(), kRun, file);
                   if (!made.ok()) return made;
                   absl::StatusOr<std::string> content =
                       RunContentDigestOfFile(file, kRun);
                   std::filesystem::remove(file);
                   if (!content.ok()) return content.status();
                   return s.runs().DeleteRun(kRun, *content).status();
                 },
                 deleted});
  out.push_back(
      {"ImportRuns",
       [](Store& s) {
         ExportFile();  // made before any fault is armed
         NewRun n = MakeRun(1);
         ASSERT_TRUE(s.runs().CreateRun(&n.run, &n.genomes).ok());
       },
       [](Store& s) { return s.runs().ImportRuns(ExportFile()).status(); },
       [](const std::string& db) {
         const long long runs = Count(db, "SELECT count(*) FROM runs");
         const long long genomes = Count(db, "SELECT count(*) FROM genomes");
         const long long scored =
             Count(db, "SELECT count(*) FROM genomes WHERE eval_state = 2");
         return Judge(runs == 2 && genomes == 3 * kPopulation &&
                          scored == 2 * kPopulation,
                      runs == 1 && genomes == kPopulation && scored == 0);
       }});
  return out;
}

void ExpectConsistent(const std::string& db) {
  absl::StatusOr<CheckReport> report = CheckDatabase(db);
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_EQ(report->integrity, "ok");
  EXPECT_TRUE(report->problems.empty()) << report->ToString();
}

// A non-OK Status from a storage fault says what to do: retry (Unavailable),
// free space (ResourceExhausted), or look at the storage (Internal).
void ExpectCleanFailure(const absl::Status& s) {
  EXPECT_TRUE(s.code() == absl::StatusCode::kUnavailable ||
              s.code() == absl::StatusCode::kResourceExhausted ||
              s.code() == absl::StatusCode::kInternal)
      << s;
  EXPECT_FALSE(s.message().empty());
}

using SweepParam = std::tuple<int, FaultKind, bool>;

class StoreFaultSweep : public ::testing::TestWithParam<SweepParam> {};

TEST_P(StoreFaultSweep, EveryFaultPointEndsCleanAndAllOrNothing) {
  const CommitPoint point = CommitPoints()[std::get<0>(GetParam())];
  const FaultKind kind = std::get<1>(GetParam());
  const bool persistent = std::get<2>(GetParam());
  FaultVfs* vfs = FaultVfs::Install();
  TempDir dir;
  const std::string prepared = dir.File("prepared.db");
  {
    absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(prepared);
    ASSERT_TRUE(s.ok()) << s.status();
    point.prepare(**s);
    if (HasFatalFailure()) return;
  }
  ExpectConsistent(prepared);
  ASSERT_EQ(point.effect(prepared), Effect::kNone)
      << "the preparation is wrong";

  // A short busy timeout: the busy handler's retries meet the fault too.
  Store::Options options;
  options.vfs = FaultVfs::kName;
  options.busy_timeout_ms = 5;
  int faulted_points = 0;
  bool completed = false;
  for (int n = 1; n <= kMaxFaultPoint && !completed; ++n) {
    SCOPED_TRACE(absl::StrCat(point.name, " ", FaultKindName(kind),
                              persistent ? " from" : " at", " call ", n));
    const std::string db = dir.File(absl::StrCat("case-", n, ".db"));
    std::filesystem::copy_file(prepared, db);
    absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(db, options);
    ASSERT_TRUE(store.ok()) << store.status();

    vfs->Arm(kind, n, persistent);
    const absl::Status s = point.run(**store);
    const bool faulted = vfs->injected() > 0;
    vfs->Disarm();
    completed = !faulted;
    if (faulted) ++faulted_points;
    if (!faulted) {
      EXPECT_TRUE(s.ok()) << s;
    }
    if (!s.ok()) ExpectCleanFailure(s);

    // The Store writes again once the storage does.
    EXPECT_TRUE((*store)->db().ProbeWrite().ok()) << "store did not recover";
    const Effect seen = point.effect(db);
    EXPECT_EQ(seen, s.ok() ? Effect::kAll : Effect::kNone)
        << "effect " << EffectName(seen) << " after status " << s;
    if (!s.ok()) {
      const absl::Status retry = point.run(**store);
      EXPECT_TRUE(retry.ok()) << "retry after the fault: " << retry;
      EXPECT_EQ(point.effect(db), Effect::kAll);
    }
    store->reset();
    ExpectConsistent(db);
    EXPECT_EQ(point.effect(db), Effect::kAll) << "after reopening";
    std::filesystem::remove(db);
  }
  EXPECT_TRUE(completed) << point.name << " still met the fault at call "
                         << kMaxFaultPoint;
  std::printf("%s %s %s: %d fault points\n", point.name.c_str(),
              FaultKindName(kind).c_str(), persistent ? "persistent" : "once",
              faulted_points);
}

// Regression: ProbeWrite's "UPDATE schema_version SET version = version"
// rewrote a row with identical bytes, which SQLite does not even mark dirty, so
// its COMMIT wrote nothing and succeeded on a disk that fails every write; the
// engine then lifted its hold at once and failed again, over and over.
TEST(StoreProbeWriteTest, ProbeFailsWhileEveryWriteFails) {
  FaultVfs* vfs = FaultVfs::Install();
  TempDir dir;
  const std::string db = dir.File("probe.db");
  {
    absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(db);
    ASSERT_TRUE(s.ok()) << s.status();
  }
  Store::Options options;
  options.vfs = FaultVfs::kName;
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(db, options);
  ASSERT_TRUE(store.ok()) << store.status();
  for (FaultKind kind :
       {FaultKind::kIoErr, FaultKind::kFull, FaultKind::kFsync}) {
    SCOPED_TRACE(FaultKindName(kind));
    vfs->Arm(kind, 1, /*persistent=*/true);
    const absl::Status probe = (*store)->db().ProbeWrite();
    const int64_t injected = vfs->injected();
    vfs->Disarm();
    EXPECT_FALSE(probe.ok()) << "the probe wrote nothing to the disk";
    EXPECT_GT(injected, 0);
    EXPECT_TRUE((*store)->db().ProbeWrite().ok());
  }
}

// A run that changed after its export is not deleted by the archive's
// delete: FAILED_PRECONDITION (fix the state: export again), nothing gone.
TEST(StoreArchiveTest, DeleteHeldToAStaleContentDigestChangesNothing) {
  TempDir dir;
  const std::string db = dir.File("stale.db");
  absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(db);
  ASSERT_TRUE(s.ok()) << s.status();
  NewRun n = MakeRun(1);
  ASSERT_TRUE((*s)->runs().CreateRun(&n.run, &n.genomes).ok());
  ASSERT_TRUE((*s)->genomes().CommitResults(Evaluate(n.genomes, 1)).ok());
  ASSERT_TRUE((*s)->runs()
                  .FinishRun(kRun, skerry::v1::STOPPED, "stopped", 0, kNowMs)
                  .ok());
  const std::string file = dir.File("export.db");
  ASSERT_TRUE(BackupDatabase(db, kRun, file).ok());
  absl::StatusOr<std::string> exported = RunContentDigestOfFile(file, kRun);
  absl::StatusOr<std::string> live = RunContentDigestOfFile(db, kRun);
  ASSERT_TRUE(exported.ok() && live.ok());
  EXPECT_EQ(*exported, *live) << "an export holds the run's rows unchanged";
  // Changed after the export.
  ASSERT_TRUE((*s)->runs().SetRunPriority(kRun, 7, kNowMs + 5).ok());
  absl::StatusOr<RunStore::Deleted> refused =
      (*s)->runs().DeleteRun(kRun, *exported);
  EXPECT_TRUE(absl::IsFailedPrecondition(refused.status())) << refused.status();
  EXPECT_THAT(std::string(refused.status().message()),
              ::testing::HasSubstr("changed since it was exported"));
  EXPECT_EQ(Count(db, "SELECT count(*) FROM genomes"), kPopulation);
  absl::StatusOr<std::string> now = RunContentDigestOfFile(db, kRun);
  ASSERT_TRUE(now.ok());
  EXPECT_TRUE((*s)->runs().DeleteRun(kRun, *now).ok());
  EXPECT_EQ(Count(db, "SELECT count(*) FROM runs"), 0);
}

std::string SweepName(const ::testing::TestParamInfo<SweepParam>& info) {
  std::string kind = FaultKindName(std::get<1>(info.param));
  for (char& c : kind) {
    if (c == '_') c = 'x';
  }
  return absl::StrCat(CommitPoints()[std::get<0>(info.param)].name, "_", kind,
                      std::get<2>(info.param) ? "_Persistent" : "_Once");
}

INSTANTIATE_TEST_SUITE_P(
    CommitPoints, StoreFaultSweep,
    ::testing::Combine(::testing::Range(0, 9),
                       ::testing::Values(FaultKind::kIoErr, FaultKind::kFull,
                                         FaultKind::kFsync, FaultKind::kBusy),
                       ::testing::Bool()),
    SweepName);

}  // namespace
}  // namespace skerry::store
