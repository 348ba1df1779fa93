// Reads off the writer (server/store/read_pool.h), statements cached and
// bindings checked (server/store/sqlite.h), and row sums written by the
// statements themselves (schema version 12, server/store/row_sums.h).
//
// Concurrency is tested with a blocking hook, not a timer: a read is held
// inside its snapshot while a commit runs, and the commit must finish before
// the read is let go. Every wait is bounded.
#include <atomic>
#include <filesystem>
#include <functional>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/synchronization/notification.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/store/check.h"
#include "server/store/row_sums.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "tests/unit/server/sqlite_test_util.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

// A bound, not a speed target: only a deadlock comes near it.
constexpr absl::Duration kBound = absl::Seconds(60);

// Holds the first read that takes a snapshot after Arm() until Release().
class HeldRead {
 public:
  explicit HeldRead(ReadPool* pool) : pool_(pool) {
    pool_->SetSnapshotHookForTest([this] {
      if (!armed_.exchange(false)) return;
      in_snapshot_.Notify();
      released_.WaitForNotificationWithTimeout(kBound);
    });
  }
  ~HeldRead() {
    if (!released_.HasBeenNotified()) released_.Notify();
    pool_->SetSnapshotHookForTest(nullptr);
  }
  void Arm() { armed_ = true; }
  bool WaitUntilInSnapshot() {
    return in_snapshot_.WaitForNotificationWithTimeout(kBound);
  }
  void Release() { released_.Notify(); }

 private:
  ReadPool* pool_;
  std::atomic<bool> armed_{false};
  absl::Notification in_snapshot_;
  absl::Notification released_;
};

std::vector<ResultUpdate> Scores(const std::vector<GenomeRecord>& genomes) {
  std::vector<ResultUpdate> out;
  for (const GenomeRecord& g : genomes) {
    ResultUpdate u;
    u.genome_id = g.id;
    u.run_id = g.run_id;
    u.state = skerry::v1::EVALUATED;
    u.score = 1.0 + g.slot;
    u.attempts = 1;
    out.push_back(u);
  }
  return out;
}

// Regression for "a result commit waited 356 ms behind a digest" (issue 14):
// reads shared the writer's connection and its mutex.
TEST_F(StoreTest, DigestHeldOpenAcrossAResultCommitDoesNotBlockIt) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  absl::StatusOr<GenomeStore::Digest> before =
      store_->genomes().RunDigest(run.id);
  ASSERT_TRUE(before.ok()) << before.status();

  HeldRead held(store_->db().readers());
  held.Arm();
  absl::StatusOr<GenomeStore::Digest> during;
  std::thread reader([&] { during = store_->genomes().RunDigest(run.id); });
  ASSERT_TRUE(held.WaitUntilInSnapshot());

  absl::Notification committed;
  absl::Status commit;
  std::thread writer([&] {
    commit = store_->genomes().CommitResults(Scores(genomes));
    committed.Notify();
  });
  // The digest is still inside its snapshot: the commit must not wait for it.
  const bool finished = committed.WaitForNotificationWithTimeout(kBound);
  held.Release();
  reader.join();
  writer.join();
  EXPECT_TRUE(finished) << "the result commit waited for a held read";
  ASSERT_TRUE(commit.ok()) << commit;

  // The held read answered from the snapshot it began on, the commit before.
  ASSERT_TRUE(during.ok()) << during.status();
  EXPECT_EQ(during->sha256, before->sha256);
  absl::StatusOr<GenomeStore::Digest> after =
      store_->genomes().RunDigest(run.id);
  ASSERT_TRUE(after.ok()) << after.status();
  EXPECT_NE(after->sha256, before->sha256);
}

TEST_F(StoreTest, HistoryHeldOpenAcrossAGenerationCommitDoesNotBlockIt) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {1, 2, 3, 4});

  HeldRead held(store_->db().readers());
  held.Arm();
  absl::StatusOr<std::vector<StatsRecord>> during;
  std::thread reader(
      [&] { during = store_->runs().GetStats(run.id, std::nullopt); });
  ASSERT_TRUE(held.WaitUntilInSnapshot());

  absl::Notification committed;
  absl::Status commit;
  std::vector<GenomeRecord> next;
  for (uint32_t s = 0; s < 4; ++s) next.push_back(MakeGenome(0, 1, s, 0.25));
  for (GenomeRecord& g : next) g.run_id = run.id;
  std::thread writer([&] {
    GenerationCommit c;
    c.run_id = run.id;
    c.island = 0;
    c.completed.run_id = run.id;
    c.completed.generation = 0;
    c.completed.best = 1;
    c.completed.evaluations = 4;
    c.next = &next;
    commit = store_->runs().CommitGeneration(c);
    committed.Notify();
  });
  const bool finished = committed.WaitForNotificationWithTimeout(kBound);
  held.Release();
  reader.join();
  writer.join();
  EXPECT_TRUE(finished) << "the generation commit waited for a held read";
  ASSERT_TRUE(commit.ok()) << commit;
  ASSERT_TRUE(during.ok()) << during.status();
  EXPECT_TRUE(during->empty());  // its snapshot predates the statistics
  absl::StatusOr<std::vector<StatsRecord>> after =
      store_->runs().GetStats(run.id, std::nullopt);
  ASSERT_TRUE(after.ok()) << after.status();
  EXPECT_EQ(after->size(), 1u);
}

// A pooled connection must end its snapshot when a read returns; a cached
// statement left unreset would keep the old one and answer stale forever.
// Every read of every store (store.h lists them) runs on the read pool, never
// on the writer: each one answers while the test holds the writer, as a
// result commit waiting for its fsync holds it. A read that took the writer
// would wait until the bound and fail here, naming itself. (Issue 14: reads
// on their own read-only connections; the store split per concern.)
TEST_F(StoreTest, EveryReadOfEveryStoreAnswersWhileTheWriterIsHeld) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  Evaluate(genomes, {1, 2, 3, 4, 5, 6, 7, 8});
  TokenRecord token;
  token.principal = "ana";
  token.role = 1;
  token.hash = std::string(64, 'a');
  ASSERT_TRUE(store_->access().CreateToken(&token).ok());
  AuditRecord audit;
  audit.principal = "ana";
  audit.method = "/skerry.v1.Runs/GetRun";
  ASSERT_TRUE(store_->access().BeginAudit(audit).ok());
  WorkerRecord worker;
  worker.name = "w1";
  ASSERT_TRUE(store_->fleet().RegisterWorker(worker).ok());
  ValidationRequest request;
  request.genome_id = genomes.front().id;
  request.cases = 3;
  ASSERT_TRUE(store_->validations().RequestValidation(request).ok());

  struct Read {
    const char* name;
    std::function<absl::Status()> call;
  };
  Store& s = *store_;
  const int64_t id = run.id;
  const int64_t genome = genomes.front().id;
  const std::vector<Read> reads = {
      {"RunStore::ListRuns", [&] { return s.runs().ListRuns().status(); }},
      {"RunStore::GetRun", [&] { return s.runs().GetRun(id).status(); }},
      {"RunStore::FindRunByRequest",
       [&] { return s.runs().FindRunByRequest("local", "r1").status(); }},
      {"RunStore::GetIslands",
       [&] { return s.runs().GetIslands(id).status(); }},
      {"RunStore::GetStrategyStates",
       [&] { return s.runs().GetStrategyStates(id).status(); }},
      {"RunStore::GetStats",
       [&] { return s.runs().GetStats(id, std::nullopt).status(); }},
      {"RunStore::FindSeriesByRequest",
       [&] { return s.runs().FindSeriesByRequest("local", "r1").status(); }},
      {"RunStore::UnusedSeriesName",
       [&] { return s.runs().UnusedSeriesName("s").status(); }},
      {"RunStore::SeriesOfRuns",
       [&] { return s.runs().SeriesOfRuns().status(); }},
      {"RunStore::SeriesOfRun",
       [&] { return s.runs().SeriesOfRun(id).status(); }},
      {"GenomeStore::GetGeneration",
       [&] { return s.genomes().GetGeneration(id, 0, 0).status(); }},
      {"GenomeStore::GetGenome",
       [&] { return s.genomes().GetGenome(genome).status(); }},
      {"GenomeStore::BestGenome",
       [&] { return s.genomes().BestGenome(id).status(); }},
      {"GenomeStore::FailedGenomes",
       [&] { return s.genomes().FailedGenomes(id, 10).status(); }},
      {"GenomeStore::CountFailed",
       [&] { return s.genomes().CountFailed(id).status(); }},
      {"GenomeStore::GetGenomeMetrics",
       [&] { return s.genomes().GetGenomeMetrics(genome).status(); }},
      {"GenomeStore::MetricMeans",
       [&] { return s.genomes().MetricMeans(id).status(); }},
      {"GenomeStore::MigrationCounts",
       [&] { return s.genomes().MigrationCounts(id).status(); }},
      {"GenomeStore::RunDigest",
       [&] { return s.genomes().RunDigest(id).status(); }},
      {"ValidationStore::PendingValidations",
       [&] { return s.validations().PendingValidations().status(); }},
      {"ValidationStore::GetValidation",
       [&] { return s.validations().GetValidation(genome).status(); }},
      {"ValidationStore::ChampionValidationScores",
       [&] { return s.validations().ChampionValidationScores(id).status(); }},
      {"ValidationStore::ListValidations",
       [&] { return s.validations().ListValidations(id, 10).status(); }},
      {"AccessStore::ListTokens",
       [&] { return s.access().ListTokens().status(); }},
      {"AccessStore::CountPrincipals",
       [&] { return s.access().CountPrincipals().status(); }},
      {"AccessStore::QueryAudit",
       [&] { return s.access().QueryAudit(AuditQuery()).status(); }},
      {"AccessStore::RunOwner",
       [&] { return s.access().RunOwner(id).status(); }},
      {"FleetStore::ListWorkers",
       [&] { return s.fleet().ListWorkers(10).status(); }},
      {"FleetStore::CountWorkersSeenSince",
       [&] { return s.fleet().CountWorkersSeenSince(0).status(); }},
      {"Store::VerifyActiveRun", [&] { return s.VerifyActiveRun(id); }},
  };

  // One thread holds the writer until released (bounded); another runs
  // every read. A read stuck on the writer goes on once it is released, so
  // the test ends either way.
  absl::Notification holding, release, done;
  std::thread holder([&] {
    Database::Writer held = s.db().Write();
    holding.Notify();
    release.WaitForNotificationWithTimeout(kBound);
  });
  ASSERT_TRUE(holding.WaitForNotificationWithTimeout(kBound));
  std::vector<absl::Status> results(reads.size());
  std::atomic<size_t> running{0};
  std::thread reader([&] {
    for (size_t i = 0; i < reads.size(); ++i) {
      running = i;
      results[i] = reads[i].call();
    }
    done.Notify();
  });
  const bool answered = done.WaitForNotificationWithTimeout(kBound);
  const size_t stuck = running;  // the read under way when the bound ran out
  release.Notify();
  reader.join();
  holder.join();
  EXPECT_TRUE(answered) << reads[stuck].name << " waited for the writer";
  for (size_t i = 0; i < reads.size(); ++i) {
    EXPECT_TRUE(results[i].ok()) << reads[i].name << ": " << results[i];
  }
}

TEST_F(StoreTest, EachReadSeesTheNewestCommit) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  for (int round = 0; round < 3; ++round) {
    absl::StatusOr<RunRecord> got = store_->runs().GetRun(run.id);
    ASSERT_TRUE(got.ok()) << got.status();
    EXPECT_EQ(got->evaluations, round);
    std::vector<ResultUpdate> one = Scores({genomes[round]});
    ASSERT_TRUE(store_->genomes().CommitResults(one).ok());
  }
}

// Regression: the read pool's connections outlived the writer, so the
// writer did not close last and left the WAL beside the file (a copy of the
// file alone then lacked the newest commits).
TEST_F(StoreTest, ClosingTheStoreAfterReadsFoldsTheWalIntoTheFile) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {1, 2, 3, 4});
  ASSERT_TRUE(
      store_->genomes().RunDigest(run.id).ok());  // leaves an idle reader
  ASSERT_TRUE(store_->runs().GetRun(run.id).ok());
  store_.reset();
  const std::string wal = path() + "-wal";
  EXPECT_FALSE(std::filesystem::exists(wal) &&
               std::filesystem::file_size(wal) > 0);
}

// Rows written by the genome insert and the result update carry sums they
// computed themselves; reads and `--check` accept them.
TEST_F(StoreTest, SumsComputedByTheStatementsPassReadsAndCheck) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  Evaluate(genomes, {3, 1, 4, 1, 5, 9, 2, 6});
  for (const GenomeRecord& g : genomes) {
    absl::StatusOr<GenomeRecord> read = store_->genomes().GetGenome(g.id);
    ASSERT_TRUE(read.ok()) << read.status();
    EXPECT_EQ(read->id, g.id);
    EXPECT_EQ(read->state, skerry::v1::EVALUATED);
  }
  store_.reset();
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

// Since version 12 the triggers leave alone a statement that writes the sum
// itself: a wrong one must still read as damage.
TEST_F(StoreTest, AStatementThatWritesAWrongSumReadsAsDamaged) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  store_.reset();
  {
    auto conn = Connection::Open(path(), SQLITE_OPEN_READWRITE);
    ASSERT_TRUE(conn.ok()) << conn.status();
    ASSERT_TRUE((*conn)
                    ->Exec(absl::StrCat("UPDATE genomes SET score = 7, sum = 1 "
                                        "WHERE id = ",
                                        genomes[2].id))
                    .ok());
  }
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  absl::StatusOr<GenomeRecord> read =
      (*again)->genomes().GetGenome(genomes[2].id);
  EXPECT_EQ(read.status().code(), absl::StatusCode::kDataLoss);
  EXPECT_THAT(skerry::testing::Message(read.status()),
              HasSubstr("island 0 generation 0 slot 2"));
  again->reset();
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_FALSE(report->ok());
}

// A version-11 database (triggers that always rewrite the row) gets the
// version-12 triggers, and its rows still verify.
TEST_F(StoreTest, Version11DatabaseGetsTriggersThatSparePrecomputedSums) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  store_.reset();
  std::string v9;
  const struct {
    const char* table;
    const char* columns;
    const char* key;
  } tables[] = {
      {"runs", kRunSumColumns, "id = NEW.id"},
      {"islands", kIslandSumColumns, "run_id = NEW.run_id AND idx = NEW.idx"},
      {"genomes", kGenomeSumColumns, "id = NEW.id"},
      {"generation_stats", kStatsSumColumns,
       "run_id = NEW.run_id AND island = NEW.island AND "
       "generation = NEW.generation"},
  };
  for (const auto& t : tables) {
    const std::string set =
        absl::StrCat("UPDATE ", t.table, " SET sum = skerry_row_sum(",
                     t.columns, ") WHERE ", t.key, "; END;");
    absl::StrAppend(&v9, "DROP TRIGGER ", t.table, "_sum_insert; DROP TRIGGER ",
                    t.table, "_sum_update; CREATE TRIGGER ", t.table,
                    "_sum_insert AFTER INSERT ON ", t.table, " BEGIN ", set,
                    " CREATE TRIGGER ", t.table, "_sum_update AFTER UPDATE OF ",
                    t.columns, " ON ", t.table, " BEGIN ", set, " ");
  }
  {
    auto conn = Connection::Open(path(), SQLITE_OPEN_READWRITE);
    ASSERT_TRUE(conn.ok()) << conn.status();
    ASSERT_TRUE(
        (*conn)
            ->Exec(absl::StrCat("DROP TABLE id_floors; ", v9,
                                "UPDATE schema_version SET version = 11;"))
            .ok());
  }
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(*(*again)->db().SchemaVersion(), Database::kSchemaVersion);
  EXPECT_TRUE((*again)->db().QuickCheck().ok());
  EXPECT_EQ(skerry::testing::RawQuery(
                path(),
                "SELECT count(*) FROM sqlite_master WHERE type = 'trigger' "
                "AND sql LIKE '%WHEN NEW.sum IS%'"),
            "8");
  ASSERT_TRUE((*again)->genomes().CommitResults(Scores(genomes)).ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen =
      (*again)->genomes().GetGeneration(run.id, 0, 0);
  ASSERT_TRUE(gen.ok()) << gen.status();
  EXPECT_EQ(gen->size(), 4u);
}

class SqliteStatementTest : public ::testing::Test {
 protected:
  void SetUp() override {
    auto conn = Connection::Open(dir_.File("t.db"),
                                 SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
    ASSERT_TRUE(conn.ok()) << conn.status();
    conn_ = std::move(*conn);
    ASSERT_TRUE(conn_
                    ->Exec("CREATE TABLE t (x INTEGER NOT NULL); "
                           "INSERT INTO t VALUES (1), (2), (3)")
                    .ok());
  }
  int64_t Count() {
    auto s = conn_->Prepare("SELECT count(*) FROM t");
    EXPECT_TRUE(s.ok());
    EXPECT_TRUE(*s->Step());
    return s->ColumnInt(0);
  }
  skerry::testing::TempDir dir_;
  std::unique_ptr<Connection> conn_;
};

// Regression: bind results were ignored, so a failed binding ran the
// statement with the parameter NULL.
TEST_F(SqliteStatementTest, FailedBindingIsReportedAndNothingRuns) {
  auto ins = conn_->Prepare("INSERT INTO t VALUES (?1)");
  ASSERT_TRUE(ins.ok());
  ins->BindInt(1, 4);
  ins->BindInt(2, 5);  // no parameter 2: SQLITE_RANGE
  absl::Status s = ins->Run();
  EXPECT_FALSE(s.ok());
  EXPECT_THAT(skerry::testing::Message(s), HasSubstr("binding parameter 2"));
  EXPECT_EQ(Count(), 3);
  // Reset forgets the failure; the statement is usable again.
  ins->Reset();
  ins->BindInt(1, 4);
  EXPECT_TRUE(ins->Run().ok());
  EXPECT_EQ(Count(), 4);
}

TEST_F(SqliteStatementTest, CachedStatementInUseIsNotLentTwice) {
  const char* sql = "SELECT x FROM t ORDER BY x";
  auto outer = conn_->PrepareCached(sql);
  ASSERT_TRUE(outer.ok());
  ASSERT_TRUE(*outer->Step());
  EXPECT_EQ(outer->ColumnInt(0), 1);
  {
    auto inner = conn_->PrepareCached(sql);  // nested: a cursor of its own
    ASSERT_TRUE(inner.ok());
    ASSERT_TRUE(*inner->Step());
    EXPECT_EQ(inner->ColumnInt(0), 1);
    ASSERT_TRUE(*inner->Step());
    EXPECT_EQ(inner->ColumnInt(0), 2);
  }
  ASSERT_TRUE(*outer->Step());
  EXPECT_EQ(outer->ColumnInt(0), 2);
}

TEST_F(SqliteStatementTest, CachedStatementComesBackResetAndUnbound) {
  const char* sql = "SELECT x FROM t WHERE x >= ?1 ORDER BY x";
  {
    auto s = conn_->PrepareCached(sql);
    ASSERT_TRUE(s.ok());
    s->BindInt(1, 2);
    ASSERT_TRUE(*s->Step());
    EXPECT_EQ(s->ColumnInt(0), 2);
  }  // handed back mid-result
  auto again = conn_->PrepareCached(sql);
  ASSERT_TRUE(again.ok());
  // Unbound: x >= NULL matches nothing, so the old binding did not survive.
  EXPECT_FALSE(*again->Step());
}

}  // namespace
}  // namespace skerry::store
