// Tests for opening the store (server/store/store.h): schema versions, files
// that are not ours, and the pragmas the header promises.
#include <sqlite3.h>

#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/store/check.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "tests/support/process.h"
#include "tests/unit/server/sqlite_test_util.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using skerry::testing::Message;
using skerry::testing::RawExec;
using skerry::testing::RawQuery;
using skerry::testing::ReadFileBytes;
using skerry::testing::TempDir;
using skerry::testing::UndoSchemaTo;
using ::testing::HasSubstr;
using ::testing::Not;

// A fresh store in a temporary folder (store_fixture.h).
using StoreOpenTest = StoreTest;

// ---- Opening and schema versions ----

TEST_F(StoreOpenTest, ReopenedStoreHasCurrentSchemaVersion) {
  absl::StatusOr<int> v = store_->db().SchemaVersion();
  ASSERT_TRUE(v.ok()) << v.status();
  EXPECT_EQ(*v, Database::kSchemaVersion);
  store_.reset();
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  v = (*again)->db().SchemaVersion();
  ASSERT_TRUE(v.ok()) << v.status();
  EXPECT_EQ(*v, Database::kSchemaVersion);
  EXPECT_EQ((*again)->db().path(), path());
}

// A version-5 database gets its rows' checksums computed by the migration:
// its data reads back, and --check finds every row sound.
TEST_F(StoreOpenTest, Version5DatabaseGetsChecksumsInTheMigration) {
  RunRecord run = MakeRun(SmallSpec(2));
  std::vector<GenomeRecord> genomes = Generation0(2, 4);
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes).ok());
  store_.reset();
  RawExec(path(), UndoSchemaTo(5) +
                      "UPDATE genomes SET score = 7.5, eval_state = 2, "
                      "attempts = 1 WHERE slot = 1; ");
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(*(*again)->db().SchemaVersion(), Database::kSchemaVersion);
  absl::StatusOr<std::vector<GenomeRecord>> gen =
      (*again)->genomes().GetGeneration(run.id, 1, 0);
  ASSERT_TRUE(gen.ok()) << gen.status();
  EXPECT_EQ((*gen)[1].score, 7.5);
  EXPECT_TRUE((*again)->db().QuickCheck().ok());
  again->reset();
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(report->ToString(), Not(HasSubstr("checksum")));
}

// A version-1 database (as this project shipped it first) is migrated forward
// in place: the version becomes current and the indexes of versions 2 and 3
// and the validations table of version 4 appear, with the data kept.
TEST_F(StoreOpenTest, Version1DatabaseIsMigratedForwardKeepingItsData) {
  store_.reset();
  RawExec(path(),
          UndoSchemaTo(1) +
              "INSERT INTO workers (name, host, threads, evaluators, version, "
              "joined_ms, last_seen_ms) VALUES ('old', 'h', 1, '', '0', 1, 1)");
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  absl::StatusOr<int> v = (*again)->db().SchemaVersion();
  ASSERT_TRUE(v.ok()) << v.status();
  EXPECT_EQ(*v, Database::kSchemaVersion);
  EXPECT_EQ(RawQuery(path(),
                     "SELECT count(*) FROM sqlite_master WHERE "
                     "name IN ('genomes_parent_a', 'genomes_parent_b', "
                     "'genomes_failed', 'validations', "
                     "'validations_run', 'validations_pending')"),
            "6");
  EXPECT_EQ(RawQuery(path(), "SELECT name FROM workers"), "old");
}

// Version 7: a version-5 database gains workers.sandbox; workers that
// joined before it keep their rows with an empty sandbox.
TEST_F(StoreOpenTest, Version5DatabaseGainsTheWorkersSandboxColumn) {
  store_.reset();
  RawExec(path(),
          UndoSchemaTo(5) +
              "INSERT INTO workers (name, host, threads, evaluators, version, "
              "joined_ms, last_seen_ms) VALUES ('old', 'h', 1, '', '0', 1, 1)");
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(*(*again)->db().SchemaVersion(), Database::kSchemaVersion);
  EXPECT_EQ(RawQuery(path(), "SELECT name || '/' || sandbox FROM workers"),
            "old/");
  WorkerRecord w;
  w.name = "new";
  w.host = "h";
  w.threads = 2;
  w.sandbox = "bwrap";
  ASSERT_TRUE((*again)->fleet().RegisterWorker(w).ok());
  EXPECT_EQ(RawQuery(path(), "SELECT sandbox FROM workers WHERE name = 'new'"),
            "bwrap");
}

// A database of the version before the metrics migration gains the
// genome_metrics table and keeps its data.
TEST_F(StoreOpenTest, DatabaseBeforeMetricsGainsTheMetricsTable) {
  store_.reset();
  RawExec(
      path(),
      UndoSchemaTo(7) +
          "INSERT INTO workers (name, host, threads, evaluators, version, "
          "joined_ms, last_seen_ms) VALUES ('kept', 'h', 1, '', '0', 1, 1)");
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(*(*again)->db().SchemaVersion(), Database::kSchemaVersion);
  EXPECT_EQ(RawQuery(path(),
                     "SELECT count(*) FROM sqlite_master WHERE name IN "
                     "('genome_metrics', 'genome_metrics_run')"),
            "2");
  EXPECT_EQ(RawQuery(path(), "SELECT name FROM workers"), "kept");
}

// Regression: a flipped bit in the header's write version (byte 18) made
// SQLite open the file read-only without a word; every commit then failed and
// the coordinator held its work forever (found by the corruption sweep).
TEST_F(StoreOpenTest, HeaderThatForbidsWritingIsRefusedAtOpenNotAStall) {
  store_.reset();
  std::string bytes = ReadFileBytes(path());
  ASSERT_GT(bytes.size(), 100u);
  bytes[18] = 3;  // SQLite file format: write version 3 is read-only
  {
    std::ofstream out(path(), std::ios::binary | std::ios::trunc);
    out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  }
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path());
  EXPECT_TRUE(absl::IsFailedPrecondition(store.status())) << store.status();
  EXPECT_THAT(Message(store.status()), HasSubstr("can only be read"));
  EXPECT_EQ(ReadFileBytes(path()), bytes);  // nothing was changed
}

TEST_F(StoreOpenTest, NewerSchemaIsRefusedNamingBothVersionsAndLeftUnchanged) {
  store_.reset();
  const int newer = Database::kSchemaVersion + 1;
  RawExec(path(), absl::StrCat("UPDATE schema_version SET version = ", newer));
  const std::string before = ReadFileBytes(path());

  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path());
  ASSERT_FALSE(store.ok());
  EXPECT_EQ(store.status().code(), absl::StatusCode::kFailedPrecondition)
      << store.status();
  EXPECT_THAT(Message(store.status()),
              HasSubstr(absl::StrCat("version ", newer)));
  EXPECT_THAT(Message(store.status()),
              HasSubstr(absl::StrCat("version ", Database::kSchemaVersion)));
  EXPECT_THAT(Message(store.status()), HasSubstr(path()));

  EXPECT_EQ(RawQuery(path(), "SELECT max(version) FROM schema_version"),
            absl::StrCat(newer));
  EXPECT_TRUE(ReadFileBytes(path()) == before) << "the refused file changed";
}

// Found by UBSan in the corruption sweep: a flipped byte made the stored
// version -116, and the migration indexed its table with it. A version no
// Skerry writes (below 1) is damage: DataLoss, naming it, nothing changed.
TEST_F(StoreOpenTest, VersionNoSkerryWritesIsDamageAndLeftUnchanged) {
  store_.reset();
  for (const char* version : {"-116", "0"}) {
    RawExec(path(),
            absl::StrCat("UPDATE schema_version SET version = ", version));
    const std::string before = ReadFileBytes(path());
    absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path());
    ASSERT_FALSE(store.ok()) << version;
    EXPECT_TRUE(absl::IsDataLoss(store.status())) << store.status();
    EXPECT_THAT(Message(store.status()),
                HasSubstr(absl::StrCat("schema version ", version)));
    EXPECT_TRUE(ReadFileBytes(path()) == before) << "the refused file changed";
  }
}

// `--read-only` (Store::Options::read_only) never migrates: an older file is
// refused naming both versions and left byte for byte as it was.
TEST_F(StoreOpenTest, ReadOnlyOpenRefusesAnOlderSchemaAndChangesNothing) {
  store_.reset();
  RawExec(path(), UndoSchemaTo(7));
  const std::string before = ReadFileBytes(path());
  Store::Options read_only;
  read_only.read_only = true;
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path(), read_only);
  ASSERT_FALSE(store.ok());
  EXPECT_EQ(store.status().code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_THAT(Message(store.status()), HasSubstr("schema version 7"));
  EXPECT_THAT(
      Message(store.status()),
      HasSubstr(absl::StrCat("this program's is ", Database::kSchemaVersion)));
  EXPECT_TRUE(ReadFileBytes(path()) == before) << "the refused file changed";
}

TEST_F(StoreOpenTest, ReadOnlyStoreReadsAndEveryWriteFails) {
  RunRecord run = MakeRun(SmallSpec(1));
  std::vector<GenomeRecord> genomes = Generation0(1, 4);
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes).ok());
  store_.reset();
  const std::string before = ReadFileBytes(path());
  Store::Options read_only;
  read_only.read_only = true;
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path(), read_only);
  ASSERT_TRUE(store.ok()) << store.status();
  absl::StatusOr<RunRecord> got = (*store)->runs().GetRun(run.id);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_EQ(got->name, run.name);
  EXPECT_FALSE((*store)->db().ProbeWrite().ok());
  store->reset();
  EXPECT_TRUE(ReadFileBytes(path()) == before) << "a read-only store wrote";
}

TEST(StoreForeignFileTest, ReadOnlyOpenOfAMissingFileCreatesNothing) {
  TempDir dir;
  Store::Options read_only;
  read_only.read_only = true;
  absl::StatusOr<std::unique_ptr<Store>> store =
      Store::Open(dir.File("absent.db"), read_only);
  ASSERT_FALSE(store.ok());
  EXPECT_EQ(store.status().code(), absl::StatusCode::kNotFound);
  EXPECT_TRUE(ReadFileBytes(dir.File("absent.db")).empty());
  std::ifstream probe(dir.File("absent.db"));
  EXPECT_FALSE(probe.good());
}

TEST(StoreForeignFileTest, ForeignTablesWithoutSchemaVersionAreRefused) {
  TempDir dir;
  const std::string path = dir.File("other.db");
  RawExec(path,
          "CREATE TABLE inventory (item TEXT, count INTEGER);"
          "INSERT INTO inventory VALUES ('rope', 3);");
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path);
  ASSERT_FALSE(store.ok());
  EXPECT_EQ(store.status().code(), absl::StatusCode::kFailedPrecondition)
      << store.status();
  EXPECT_THAT(Message(store.status()), HasSubstr("schema_version"));
  EXPECT_THAT(Message(store.status()), HasSubstr(path));
  // The foreign data is still there and no table of ours was added.
  EXPECT_EQ(RawQuery(path, "SELECT count FROM inventory WHERE item = 'rope'"),
            "3");
  EXPECT_EQ(RawQuery(path, "SELECT count(*) FROM sqlite_master"), "1");
}

// Refusing a database that is not ours must not modify it in any way.
TEST(StoreForeignFileTest, ForeignDatabaseFileIsLeftByteForByteUnchanged) {
  TempDir dir;
  const std::string path = dir.File("other.db");
  RawExec(path,
          "CREATE TABLE inventory (item TEXT, count INTEGER);"
          "INSERT INTO inventory VALUES ('rope', 3);");
  const std::string before = ReadFileBytes(path);
  ASSERT_EQ(RawQuery(path, "PRAGMA journal_mode"), "delete");

  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path);
  ASSERT_FALSE(store.ok());

  EXPECT_EQ(RawQuery(path, "PRAGMA journal_mode"), "delete")
      << "Store::Open switched a database it refused to WAL mode";
  EXPECT_TRUE(ReadFileBytes(path) == before) << "the refused file changed";
}

TEST(StoreForeignFileTest, NonDatabaseFileIsRefusedWithClearError) {
  TempDir dir;
  const std::string path = dir.File("notes.txt");
  const std::string text =
      "These are the notes of a field trip, not a database. They go on for a "
      "while so that the file is longer than a database header would be.\n";
  {
    std::ofstream out(path, std::ios::binary);
    out << text << text << text;
  }
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path);
  ASSERT_FALSE(store.ok());
  EXPECT_NE(store.status().code(), absl::StatusCode::kInternal)
      << store.status();
  EXPECT_THAT(Message(store.status()), HasSubstr("not a database"));
  EXPECT_THAT(Message(store.status()), HasSubstr(path));
  EXPECT_TRUE(ReadFileBytes(path) == text + text + text)
      << "the refused file changed";
}

TEST(StoreForeignFileTest, MissingDirectoryIsRefusedNamingThePath) {
  TempDir dir;
  const std::string path = dir.File("no/such/dir/skerry.db");
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path);
  ASSERT_FALSE(store.ok());
  EXPECT_THAT(Message(store.status()), HasSubstr(path));
}

// ---- Pragmas ----

// Captures the handle of every connection opened in this process, so the test
// can ask the store's own connection for its per-connection pragmas.
std::vector<sqlite3*>* OpenedConnections() {
  static auto* v = new std::vector<sqlite3*>();
  return v;
}

int CaptureConnection(sqlite3* db, const char** /*err*/,
                      const sqlite3_api_routines* /*api*/) {
  OpenedConnections()->push_back(db);
  return SQLITE_OK;
}

TEST(StorePragmaTest, JournalModeIsWalAndSynchronousIsFull) {
  TempDir dir;
  const std::string path = dir.File("skerry.db");
  OpenedConnections()->clear();
  ASSERT_EQ(sqlite3_auto_extension(
                reinterpret_cast<void (*)(void)>(&CaptureConnection)),
            SQLITE_OK);
  absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path);
  sqlite3_cancel_auto_extension(
      reinterpret_cast<void (*)(void)>(&CaptureConnection));
  ASSERT_TRUE(store.ok()) << store.status();
  ASSERT_EQ(OpenedConnections()->size(), 1u);
  sqlite3* conn = OpenedConnections()->front();

  EXPECT_EQ(RawQuery(conn, "PRAGMA journal_mode"), "wal");
  // synchronous: 0 OFF, 1 NORMAL, 2 FULL, 3 EXTRA (sqlite.org/pragma.html).
  EXPECT_EQ(RawQuery(conn, "PRAGMA synchronous"), "2");
  EXPECT_EQ(RawQuery(conn, "PRAGMA busy_timeout"), "5000");
  EXPECT_EQ(RawQuery(conn, "PRAGMA foreign_keys"), "0");
  // WAL is a property of the file: a fresh connection sees it too.
  EXPECT_EQ(RawQuery(path, "PRAGMA journal_mode"), "wal");
}

}  // namespace
}  // namespace skerry::store
