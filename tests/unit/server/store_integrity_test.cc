// Row checksums (server/store/row_sums.h), the content rules of `--check`
// (server/store/check.h), the file rule shared by Store::Open and `--check`,
// the one-owner lock on the file itself (owner_lock.h), and submit request ids.
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/store/backup.h"
#include "server/store/check.h"
#include "server/store/owner_lock.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "tests/unit/server/sqlite_test_util.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using ::testing::HasSubstr;

// A gene value whose 8 bytes appear once in the file.
constexpr double kMarkedGene = 1234.5678125;

std::string ReadBytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in),
                     std::istreambuf_iterator<char>());
}

void WriteBytes(const std::string& path, const std::string& bytes) {
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

// Flips one bit of the first copy of `value`'s bytes in the file; false when
// the bytes are not there.
bool FlipStoredDouble(const std::string& path, double value) {
  std::string needle(8, '\0');
  std::memcpy(needle.data(), &value, 8);
  std::string bytes = ReadBytes(path);
  size_t at = bytes.find(needle);  // a gene: little-endian (common/genes.h)
  if (at == std::string::npos) {
    // A REAL column: big-endian (SQLite's record format).
    std::reverse(needle.begin(), needle.end());
    at = bytes.find(needle);
  }
  if (at == std::string::npos) return false;
  bytes[at + 3] = static_cast<char>(bytes[at + 3] ^ 0x10);
  WriteBytes(path, bytes);
  return true;
}

class IntegrityTest : public StoreTest {
 protected:
  // A run of 2 islands, its genome (island 1, slot 2) given kMarkedGene, all
  // evaluated, and the store closed (the WAL folded into the file).
  int64_t MakeRunAndClose() {
    RunRecord run = MakeRun(SmallSpec(2));
    std::vector<GenomeRecord> genomes = Generation0(2, 4);
    genomes[6].genes = {kMarkedGene, 0.25};
    EXPECT_TRUE(store_->runs().CreateRun(&run, &genomes).ok());
    Evaluate(genomes, {1, 2, 3, 4, 5, 6, 7, 8});
    store_.reset();
    return run.id;
  }
};

TEST_F(IntegrityTest, FlippedGeneIsDataLossNamingRunIslandGenerationAndSlot) {
  const int64_t run = MakeRunAndClose();
  ASSERT_TRUE(FlipStoredDouble(path(), kMarkedGene));
  absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(path());
  ASSERT_TRUE(s.ok()) << s.status();  // the file's structure is sound
  absl::StatusOr<std::vector<GenomeRecord>> gen =
      (*s)->genomes().GetGeneration(run, 1, 0);
  ASSERT_TRUE(absl::IsDataLoss(gen.status())) << gen.status();
  EXPECT_THAT(
      std::string(gen.status().message()),
      HasSubstr(absl::StrCat("run ", run, " island 1 generation 0 slot 2")));
  EXPECT_THAT(std::string(gen.status().message()), HasSubstr("backup"));
  // The digest refuses too; the other island is still served.
  EXPECT_TRUE(absl::IsDataLoss((*s)->genomes().RunDigest(run).status()));
  EXPECT_TRUE((*s)->genomes().GetGeneration(run, 0, 0).ok());
}

TEST_F(IntegrityTest, CheckNamesAFlippedGeneThatIntegrityCheckMisses) {
  const int64_t run = MakeRunAndClose();
  ASSERT_TRUE(FlipStoredDouble(path(), kMarkedGene));
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_EQ(report->integrity, "ok");  // SQLite sees nothing wrong
  EXPECT_FALSE(report->ok());
  EXPECT_THAT(report->ToString(),
              HasSubstr(absl::StrCat("run ", run,
                                     ": genome content does not match its "
                                     "checksum (damaged) (island 1 "
                                     "generation 0 slot 2")));
}

TEST_F(IntegrityTest, CheckNamesAFlippedScore) {
  RunRecord run = MakeRun(SmallSpec(1));
  std::vector<GenomeRecord> genomes = Generation0(1, 4);
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes).ok());
  Evaluate(genomes, {1, 2, kMarkedGene, 4});
  store_.reset();
  ASSERT_TRUE(FlipStoredDouble(path(), kMarkedGene));
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(report->ToString(), HasSubstr("generation 0 slot 2"));
  absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(path());
  ASSERT_TRUE(s.ok()) << s.status();
  EXPECT_TRUE(absl::IsDataLoss((*s)->genomes().BestGenome(run.id).status()) ||
              (*s)->genomes().BestGenome(run.id).ok());
  EXPECT_TRUE(
      absl::IsDataLoss((*s)->genomes().GetGeneration(run.id, 0, 0).status()));
}

TEST_F(IntegrityTest, BackupOfADamagedRunIsRefusedNamingTheDamage) {
  const int64_t run = MakeRunAndClose();
  ASSERT_TRUE(FlipStoredDouble(path(), kMarkedGene));
  for (int64_t which : {run, int64_t{0}}) {
    const std::string copy = dir_.File(absl::StrCat("copy", which, ".db"));
    absl::Status s = BackupDatabase(path(), which, copy);
    EXPECT_TRUE(absl::IsDataLoss(s)) << s;
    EXPECT_THAT(std::string(s.message()),
                HasSubstr("island 1 generation 0 slot 2"));
    EXPECT_FALSE(std::filesystem::exists(copy));
  }
}

TEST_F(IntegrityTest, BackupOfAnUndamagedRunPassesCheck) {
  const int64_t run = MakeRunAndClose();
  const std::string copy = dir_.File("copy.db");
  absl::Status backup = BackupDatabase(path(), run, copy);
  ASSERT_TRUE(backup.ok()) << backup;
  absl::StatusOr<CheckReport> report = CheckDatabase(copy);
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

TEST_F(IntegrityTest, UndamagedDatabasePassesCheckWithChecksums) {
  MakeRunAndClose();
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

TEST_F(IntegrityTest, HandEditWithoutSkerrysConnectionIsRefused) {
  MakeRunAndClose();
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open(path().c_str(), &db), SQLITE_OK);
  char* err = nullptr;
  const int rc =
      sqlite3_exec(db, "UPDATE genomes SET score = 0", nullptr, nullptr, &err);
  EXPECT_NE(rc, SQLITE_OK);
  EXPECT_THAT(std::string(err != nullptr ? err : ""),
              HasSubstr("skerry_row_sum"));
  sqlite3_free(err);
  sqlite3_close(db);
}

// Content rules: edits made through a Skerry connection keep the checksums
// right, so only the rules can find them.
class ContentRuleTest : public IntegrityTest {
 protected:
  std::string CheckAfter(const std::string& sql) {
    MakeRunAndClose();
    auto conn = Connection::Open(path(), SQLITE_OPEN_READWRITE);
    EXPECT_TRUE(conn.ok());
    if (!conn.ok()) return "";
    EXPECT_TRUE((*conn)->Exec(sql).ok()) << sql;
    conn->reset();
    absl::StatusOr<CheckReport> report = CheckDatabase(path());
    EXPECT_TRUE(report.ok()) << report.status();
    return report.ok() ? report->ToString() : "";
  }
};

TEST_F(ContentRuleTest, CheckFindsAnEvaluatedGenomeWithNoScore) {
  EXPECT_THAT(CheckAfter("UPDATE genomes SET score = NULL WHERE slot = 1 AND "
                         "island = 0"),
              HasSubstr("evaluated genome has no score (island 0 generation "
                        "0 slot 1"));
}

TEST_F(ContentRuleTest, CheckFindsAFailedGenomeWithNoErrorText) {
  EXPECT_THAT(
      CheckAfter("UPDATE genomes SET eval_state = 3, score = NULL, error = '' "
                 "WHERE slot = 3 AND island = 1"),
      HasSubstr("failed genome has no error text (island 1 generation 0 slot "
                "3"));
}

TEST_F(ContentRuleTest, CheckFindsAnEliteWhoseGenesDifferFromItsParents) {
  // Generation 1 of island 0: slot 0 an elite of generation 0's slot 0 with
  // other genes.
  EXPECT_THAT(
      CheckAfter("INSERT INTO genomes (run_id, island, generation, slot, "
                 "origin, parent_a, genes, score, eval_state) SELECT run_id, "
                 "0, 1, 0, 2, id, zeroblob(16), score, 2 FROM genomes WHERE "
                 "island = 0 AND slot = 0"),
      HasSubstr("genome carried over unchanged differs from its parent "
                "(island 0 generation 1 slot 0"));
}

TEST_F(ContentRuleTest, CheckFindsAnEliteWhoseScoreDiffersFromItsParents) {
  EXPECT_THAT(
      CheckAfter("INSERT INTO genomes (run_id, island, generation, slot, "
                 "origin, parent_a, genes, score, eval_state) SELECT run_id, "
                 "0, 1, 0, 2, id, genes, score + 1, 2 FROM genomes WHERE "
                 "island = 0 AND slot = 0"),
      HasSubstr("genome carried over unchanged differs from its parent"));
}

// ---- The file rule: only an absent file becomes a new database ----

TEST(FileRuleTest, EmptyFileIsRefusedByTheStoreAndByCheckAlike) {
  TempDir dir;
  const std::string path = dir.File("empty.db");
  WriteBytes(path, "");
  absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(path);
  ASSERT_TRUE(absl::IsFailedPrecondition(s.status())) << s.status();
  EXPECT_THAT(std::string(s.status().message()), HasSubstr("file is empty"));
  EXPECT_EQ(ReadBytes(path), "");  // nothing was written
  absl::StatusOr<CheckReport> report = CheckDatabase(path);
  ASSERT_FALSE(report.ok());
  EXPECT_THAT(std::string(report.status().message()),
              HasSubstr("file is empty"));
}

TEST(FileRuleTest, ForeignSqliteFileIsRefusedByTheStoreAndByCheckAlike) {
  TempDir dir;
  const std::string path = dir.File("other.db");
  skerry::testing::RawExec(path,
                           "CREATE TABLE t (x); INSERT INTO t VALUES (1)");
  EXPECT_TRUE(absl::IsFailedPrecondition(Store::Open(path).status()));
  absl::StatusOr<CheckReport> report = CheckDatabase(path);
  ASSERT_FALSE(report.ok());
  EXPECT_THAT(std::string(report.status().message()),
              HasSubstr("not a Skerry database"));
}

TEST(FileRuleTest, MissingFileBecomesANewDatabaseAndCheckRefusesAMissingOne) {
  TempDir dir;
  EXPECT_FALSE(CheckDatabase(dir.File("absent.db")).ok());
  EXPECT_FALSE(std::filesystem::exists(dir.File("absent.db")));
  EXPECT_TRUE(Store::Open(dir.File("new.db")).ok());
}

TEST(FileRuleTest, MalformedFileFailsQuickCheck) {
  TempDir dir;
  const std::string path = dir.File("bad.db");
  {
    auto s = Store::Open(path);
    ASSERT_TRUE(s.ok());
    RunRecord run = MakeRun(SmallSpec(1));
    std::vector<GenomeRecord> genomes = Generation0(1, 4);
    ASSERT_TRUE((*s)->runs().CreateRun(&run, &genomes).ok());
  }
  std::string bytes = ReadBytes(path);
  const size_t page = (static_cast<unsigned char>(bytes[16]) << 8) |
                      static_cast<unsigned char>(bytes[17]);
  ASSERT_GT(bytes.size(), 3 * page);
  // Page 3's b-tree header: its page type byte becomes nonsense.
  bytes[2 * page] = 0x77;
  WriteBytes(path, bytes);
  absl::StatusOr<std::unique_ptr<Store>> s = Store::Open(path);
  if (s.ok()) {
    absl::Status q = (*s)->db().QuickCheck();
    EXPECT_TRUE(absl::IsDataLoss(q)) << q;
    EXPECT_THAT(std::string(q.message()), HasSubstr("malformed"));
  }
  absl::StatusOr<CheckReport> report = CheckDatabase(path);
  EXPECT_TRUE(!report.ok() || !report->ok());
}

// ---- One owner per file, whatever the name ----

class OwnerLockTest : public ::testing::Test {
 protected:
  void SetUp() override {
    ASSERT_TRUE(Store::Open(db()).ok());
    ASSERT_EQ(chdir(dir_.path().c_str()), 0);
  }
  std::string db() const { return dir_.File("skerry.db"); }
  TempDir dir_;
};

TEST_F(OwnerLockTest, SecondOwnerThroughASymlinkIsRefused) {
  const std::string link = dir_.File("link.db");
  std::filesystem::create_symlink(db(), link);
  auto first = OwnerLock::Acquire(db());
  ASSERT_TRUE(first.ok()) << first.status();
  auto second = OwnerLock::Acquire(link);
  ASSERT_TRUE(absl::IsFailedPrecondition(second.status())) << second.status();
  EXPECT_THAT(std::string(second.status().message()),
              HasSubstr(absl::StrCat("pid ", getpid())));
}

TEST_F(OwnerLockTest, SecondOwnerThroughAHardLinkIsRefused) {
  const std::string link = dir_.File("hard.db");
  std::filesystem::create_hard_link(db(), link);
  auto first = OwnerLock::Acquire(link);
  ASSERT_TRUE(first.ok()) << first.status();
  EXPECT_TRUE(absl::IsFailedPrecondition(OwnerLock::Acquire(db()).status()));
}

TEST_F(OwnerLockTest, SecondOwnerThroughADotPathIsRefused) {
  auto first = OwnerLock::Acquire(db());
  ASSERT_TRUE(first.ok()) << first.status();
  EXPECT_TRUE(
      absl::IsFailedPrecondition(OwnerLock::Acquire("./skerry.db").status()));
  EXPECT_TRUE(
      absl::IsFailedPrecondition(
          OwnerLock::Acquire(dir_.path() + "/./sub/../skerry.db").status()) ||
      !std::filesystem::exists(dir_.path() + "/sub"));
}

TEST_F(OwnerLockTest, ReleasedLockLeavesNoFileBesideTheDatabase) {
  { ASSERT_TRUE(OwnerLock::Acquire(db()).ok()); }
  EXPECT_FALSE(std::filesystem::exists(db() + ".owner"));
  EXPECT_TRUE(OwnerLock::Acquire("./skerry.db").ok());
}

// ---- Submit request ids ----

TEST_F(StoreTest, RequestIdFindsTheRunItMadeForItsOwnerOnly) {
  RunRecord run = MakeRun(SmallSpec(1));
  run.request_id = "req-1";
  std::vector<GenomeRecord> genomes = Generation0(1, 4);
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes).ok());
  auto found = store_->runs().FindRunByRequest("alice", "req-1");
  ASSERT_TRUE(found.ok()) << found.status();
  ASSERT_TRUE(found->has_value());
  EXPECT_EQ(**found, run.id);
  EXPECT_FALSE(store_->runs().FindRunByRequest("bob", "req-1")->has_value());
  // A second run with the same owner and id is refused by the store.
  RunRecord again = MakeRun(SmallSpec(1));
  again.request_id = "req-1";
  std::vector<GenomeRecord> more = Generation0(1, 4);
  EXPECT_FALSE(store_->runs().CreateRun(&again, &more).ok());
}

}  // namespace
}  // namespace skerry::store
