// Tests for the strategy states of server/store/store.h (schema version 10):
// stored with generation 0 and with each bred generation, in the same
// transaction, each row with its checksum (row_sums.h); migrated databases
// get an empty state; --check verifies them; a one-run backup carries them.
#include <sqlite3.h>

#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/store/backup.h"
#include "server/store/check.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "skerry/v1/strategy.pb.h"
#include "tests/unit/server/sqlite_test_util.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using skerry::testing::RawExec;
using skerry::testing::RawQuery;
using skerry::testing::ReadFileBytes;
using ::testing::HasSubstr;

using StrategyStateStoreTest = StoreTest;

std::string GaState(uint32_t generation) {
  skerry::v1::StrategyState s;
  s.set_generation(generation);
  s.mutable_ga();
  return s.SerializeAsString();
}

// Runs `sql` on a connection of Skerry's own, which keeps the row checksums
// right: an edit only the content rules can find.
void SkerryExec(const std::string& path, const std::string& sql) {
  absl::StatusOr<std::unique_ptr<Connection>> conn =
      Connection::Open(path, SQLITE_OPEN_READWRITE);
  ASSERT_TRUE(conn.ok()) << conn.status();
  EXPECT_TRUE((*conn)->Exec(sql).ok()) << sql;
}

// Generation 1 of island 0, four genomes made from `genomes` (generation 0).
std::vector<GenomeRecord> NextGeneration(const RunRecord& run) {
  std::vector<GenomeRecord> next;
  for (uint32_t s = 0; s < 4; ++s) {
    GenomeRecord g = MakeGenome(0, 1, s, 2.0 + s);
    g.run_id = run.id;
    g.origin = skerry::v1::SEEDED;  // no parent needed for the check
    next.push_back(g);
  }
  return next;
}

GenerationCommit Commit(const RunRecord& run, std::vector<GenomeRecord>* next,
                        std::string state) {
  GenerationCommit c;
  c.run_id = run.id;
  c.island = 0;
  c.completed.run_id = run.id;
  c.completed.generation = 0;
  c.completed.evaluations = 4;
  c.next = next;
  c.strategy_state = std::move(state);
  return c;
}

TEST_F(StrategyStateStoreTest, CreateRunStoresEachIslandsState) {
  RunRecord run = MakeRun(SmallSpec(2));
  std::vector<GenomeRecord> genomes = Generation0(2, 4);
  const std::vector<std::string> states = {GaState(0), "island one"};
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes, &states).ok());
  absl::StatusOr<std::map<uint32_t, std::string>> stored =
      store_->runs().GetStrategyStates(run.id);
  ASSERT_TRUE(stored.ok()) << stored.status();
  ASSERT_EQ(stored->size(), 2u);
  EXPECT_EQ(stored->at(0), GaState(0));
  EXPECT_EQ(stored->at(1), "island one");
}

TEST_F(StrategyStateStoreTest, CreateRunWithoutStatesStoresEmptyOnes) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  absl::StatusOr<std::map<uint32_t, std::string>> stored =
      store_->runs().GetStrategyStates(run.id);
  ASSERT_TRUE(stored.ok()) << stored.status();
  ASSERT_EQ(stored->size(), 2u);
  EXPECT_EQ(stored->at(0), "");
}

TEST_F(StrategyStateStoreTest, CommitGenerationReplacesTheIslandsState) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  std::vector<GenomeRecord> next = NextGeneration(run);
  ASSERT_TRUE(
      store_->runs().CommitGeneration(Commit(run, &next, GaState(1))).ok());
  absl::StatusOr<std::map<uint32_t, std::string>> stored =
      store_->runs().GetStrategyStates(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->at(0), GaState(1));
  EXPECT_EQ(RawQuery(path(), "SELECT generation FROM strategy_states"), "1");
}

TEST_F(StrategyStateStoreTest, FailedCommitGenerationKeepsTheOldState) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  std::vector<GenomeRecord> next = NextGeneration(run);
  next[2].slot = 1;  // slot 1 twice breaks the natural key: nothing commits
  EXPECT_FALSE(
      store_->runs().CommitGeneration(Commit(run, &next, GaState(1))).ok());
  absl::StatusOr<std::map<uint32_t, std::string>> stored =
      store_->runs().GetStrategyStates(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->at(0), "");
}

TEST_F(StrategyStateStoreTest, CommitWithoutAStateLeavesItAlone) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  GenerationCommit c = Commit(run, nullptr, "");
  c.strategy_state.reset();
  c.island_done = true;
  ASSERT_TRUE(store_->runs().CommitGeneration(c).ok());
  EXPECT_EQ(RawQuery(path(), "SELECT length(state) FROM strategy_states"), "0");
}

// A database of the version before (9) gets one empty state per island,
// at the island's generation, and passes the check.
TEST_F(StrategyStateStoreTest, OlderDatabaseGetsAnEmptyStatePerIsland) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  store_.reset();
  RawExec(path(), skerry::testing::UndoSchemaTo(9));
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(RawQuery(path(),
                     "SELECT count(*) FROM strategy_states WHERE "
                     "length(state) = 0 AND generation = 0"),
            "2");
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

TEST_F(StrategyStateStoreTest, CheckReportsAMissingState) {
  std::vector<GenomeRecord> genomes;
  CreateRun(2, &genomes);
  RawExec(path(), "DELETE FROM strategy_states WHERE island = 1");
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(report->ToString(),
              HasSubstr("run 1 island 1: no strategy state"));
}

TEST_F(StrategyStateStoreTest, CheckReportsAStateThatDoesNotParse) {
  std::vector<GenomeRecord> genomes;
  CreateRun(1, &genomes);
  SkerryExec(path(), "UPDATE strategy_states SET state = x'ffffffff'");
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(report->ToString(),
              HasSubstr("run 1 island 0: strategy state does not parse"));
}

// The state of an island still searching must be the one that produced its
// current generation: a state left behind (generation 0 while the island is
// at 1) means the two were not written together.
TEST_F(StrategyStateStoreTest, CheckReportsAStateOfAnotherGeneration) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  std::vector<GenomeRecord> next = NextGeneration(run);
  ASSERT_TRUE(
      store_->runs().CommitGeneration(Commit(run, &next, GaState(1))).ok());
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok());
  EXPECT_TRUE(report->ok()) << report->ToString();
  SkerryExec(path(),
             "UPDATE strategy_states SET generation = 0, state = x'1200'");
  report = CheckDatabase(path());
  ASSERT_TRUE(report.ok());
  EXPECT_THAT(report->ToString(),
              HasSubstr("run 1 island 0: strategy state is of generation 0, "
                        "the island is at 1"));
}

// Schema version 10 keeps a checksum on every state row: a flipped bit in a
// stored state is DATA_LOSS naming run and island where the engine reads it,
// and `--check` names it too.
TEST_F(StrategyStateStoreTest, FlippedStateBitIsDataLossOnReadAndInCheck) {
  RunRecord run = MakeRun(SmallSpec(2));
  std::vector<GenomeRecord> genomes = Generation0(2, 4);
  const std::string marked = "a state marked 5eb1a2c3 for finding";
  const std::vector<std::string> states = {"", marked};
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes, &states).ok());
  store_.reset();  // the WAL folds into the file
  std::string bytes = ReadFileBytes(path());
  const size_t at = bytes.find(marked);
  ASSERT_NE(at, std::string::npos);
  bytes[at + 3] = static_cast<char>(bytes[at + 3] ^ 0x10);
  {
    std::ofstream out(path(), std::ios::binary | std::ios::trunc);
    out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  }
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  absl::StatusOr<std::map<uint32_t, std::string>> read =
      (*again)->runs().GetStrategyStates(run.id);
  EXPECT_TRUE(absl::IsDataLoss(read.status())) << read.status();
  EXPECT_THAT(std::string(read.status().message()),
              HasSubstr("run 1 island 1 strategy state"));
  EXPECT_TRUE(absl::IsDataLoss((*again)->VerifyActiveRun(run.id)));
  again->reset();
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(report->ToString(),
              HasSubstr("run 1 island 1: strategy state does not match its "
                        "checksum (damaged)"));
}

TEST_F(StrategyStateStoreTest, HandEditOfAStateWithoutSkerrysConnectionFails) {
  std::vector<GenomeRecord> genomes;
  CreateRun(1, &genomes);
  store_.reset();
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open(path().c_str(), &db), SQLITE_OK);
  char* err = nullptr;
  EXPECT_NE(sqlite3_exec(db, "UPDATE strategy_states SET state = x'00'",
                         nullptr, nullptr, &err),
            SQLITE_OK);
  EXPECT_THAT(std::string(err != nullptr ? err : ""),
              HasSubstr("skerry_row_sum"));
  sqlite3_free(err);
  sqlite3_close(db);
}

// Regression: a backup of one run left its strategy states behind, so the
// copy failed `--check` ("no strategy state") and a run restored from it
// could not continue its CMA-ES.
TEST_F(StrategyStateStoreTest, BackupOfOneRunCarriesItsStrategyStates) {
  RunRecord run = MakeRun(SmallSpec(2));
  std::vector<GenomeRecord> genomes = Generation0(2, 4);
  const std::vector<std::string> states = {GaState(0), GaState(0)};
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes, &states).ok());
  store_.reset();
  const std::string copy = dir_.File("one-run.db");
  ASSERT_TRUE(BackupDatabase(path(), run.id, copy).ok());
  absl::StatusOr<CheckReport> report = CheckDatabase(copy);
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
  EXPECT_EQ(RawQuery(copy, "SELECT count(*) FROM strategy_states"), "2");
}

}  // namespace
}  // namespace skerry::store
