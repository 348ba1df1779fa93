// Database (database.h): opening, schema and migrations, checks, the writer
// and the id policy.
#include "server/store/database.h"

#include <sys/stat.h>

#include <algorithm>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/access_schema.h"
#include "server/store/row_sums.h"
#include "server/store/series_store.h"

namespace skerry::store {
namespace {

// Schema version 1. Later versions append a migration to kMigrations; never
// edit an applied one.
constexpr const char* kSchemaV1 = R"sql(
CREATE TABLE schema_version (version INTEGER NOT NULL);
CREATE TABLE runs (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL,
  owner TEXT NOT NULL,
  spec BLOB NOT NULL,
  spec_text TEXT NOT NULL,
  seed INTEGER NOT NULL,
  state INTEGER NOT NULL,
  priority INTEGER NOT NULL DEFAULT 1,
  message TEXT NOT NULL DEFAULT '',
  created_ms INTEGER NOT NULL,
  updated_ms INTEGER NOT NULL,
  started_ms INTEGER NOT NULL DEFAULT 0,
  parent_run INTEGER,
  parent_generation INTEGER,
  evaluations INTEGER NOT NULL DEFAULT 0,
  champion_id INTEGER,
  best_score REAL,
  stop_generation INTEGER
);
CREATE TABLE islands (
  run_id INTEGER NOT NULL,
  idx INTEGER NOT NULL,
  generation INTEGER NOT NULL,
  done INTEGER NOT NULL DEFAULT 0,
  PRIMARY KEY (run_id, idx)
) WITHOUT ROWID;
CREATE TABLE genomes (
  id INTEGER PRIMARY KEY,
  run_id INTEGER NOT NULL,
  island INTEGER NOT NULL,
  generation INTEGER NOT NULL,
  slot INTEGER NOT NULL,
  origin INTEGER NOT NULL,
  parent_a INTEGER,
  parent_b INTEGER,
  genes BLOB NOT NULL,
  score REAL,
  eval_state INTEGER NOT NULL,
  attempts INTEGER NOT NULL DEFAULT 0,
  error TEXT NOT NULL DEFAULT '',
  eval_seconds REAL NOT NULL DEFAULT 0,
  UNIQUE (run_id, island, generation, slot)
);
CREATE INDEX genomes_pending ON genomes (run_id) WHERE eval_state = 1;
CREATE TABLE generation_stats (
  run_id INTEGER NOT NULL,
  island INTEGER NOT NULL,
  generation INTEGER NOT NULL,
  best REAL NOT NULL,
  mean REAL NOT NULL,
  worst REAL NOT NULL,
  diversity REAL NOT NULL,
  evaluations INTEGER NOT NULL,
  failed INTEGER NOT NULL,
  eval_seconds REAL NOT NULL,
  completed_ms INTEGER NOT NULL,
  PRIMARY KEY (run_id, island, generation)
) WITHOUT ROWID;
CREATE TABLE workers (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL,
  host TEXT NOT NULL,
  threads INTEGER NOT NULL,
  evaluators TEXT NOT NULL,
  version TEXT NOT NULL,
  joined_ms INTEGER NOT NULL,
  last_seen_ms INTEGER NOT NULL
);
INSERT INTO schema_version (version) VALUES (1);
)sql";

// Version 2: indexes on parent links, so descendant queries cost in proportion
// to their answer.
constexpr const char* kSchemaV2 = R"sql(
CREATE INDEX genomes_parent_a ON genomes (parent_a) WHERE parent_a IS NOT NULL;
CREATE INDEX genomes_parent_b ON genomes (parent_b) WHERE parent_b IS NOT NULL;
)sql";

// Version 3: failed genomes per run, so `skerry show` counts them without
// scanning the run.
constexpr const char* kSchemaV3 = R"sql(
CREATE INDEX genomes_failed ON genomes (run_id) WHERE eval_state = 3;
)sql";

// Version 4: held-out validations (validation.proto), one per genome at most.
constexpr const char* kSchemaV4 = R"sql(
CREATE TABLE validations (
  id INTEGER PRIMARY KEY,
  run_id INTEGER NOT NULL,
  genome_id INTEGER NOT NULL UNIQUE,
  generation INTEGER NOT NULL,
  reason INTEGER NOT NULL,
  state INTEGER NOT NULL,
  score REAL,
  cases INTEGER NOT NULL,
  attempts INTEGER NOT NULL DEFAULT 0,
  error TEXT NOT NULL DEFAULT '',
  requested_by TEXT NOT NULL,
  requested_ms INTEGER NOT NULL,
  completed_ms INTEGER NOT NULL DEFAULT 0,
  copied_from INTEGER
);
CREATE INDEX validations_run ON validations (run_id, id);
CREATE INDEX validations_pending ON validations (id) WHERE state = 1;
)sql";

// Version 7: how each worker confines its evaluator programs (fleet.proto
// JoinRequest.sandbox), for the worker listing.
constexpr const char* kSchemaV7 = R"sql(
ALTER TABLE workers ADD COLUMN sandbox TEXT NOT NULL DEFAULT '';
)sql";

// Version 8: evaluator metrics per genome (TaskResult.metrics).
constexpr const char* kSchemaMetrics = R"sql(
CREATE TABLE genome_metrics (
  run_id INTEGER NOT NULL,
  genome_id INTEGER NOT NULL,
  name TEXT NOT NULL,
  value REAL NOT NULL,
  PRIMARY KEY (genome_id, name)
) WITHOUT ROWID;
CREATE INDEX genome_metrics_run ON genome_metrics (run_id);
)sql";

// Version 11: the fleet key (FleetStore::FleetKey): worker secrets and lease
// proofs (server/auth/fleet_seal.h) outlive a coordinator restart.
constexpr const char* kSchemaFleetKey = R"sql(
CREATE TABLE fleet_keys (
  name TEXT PRIMARY KEY,
  key BLOB NOT NULL
) WITHOUT ROWID;
)sql";

// Version 13: the largest id ever given to a run, genome and validation, as
// it was before rows were deleted (a run deleted, a generation trimmed at a
// finish). New ids go above it: an id is never given twice, so a late
// result for a discarded genome's task can never land on a new genome that
// took its id, and the audit log's run ids name one run each.
constexpr const char* kSchemaIdFloors = R"sql(
CREATE TABLE id_floors (
  name TEXT PRIMARY KEY,
  floor INTEGER NOT NULL
) WITHOUT ROWID;
)sql";

// kMigrations[v] takes a database from version v to v + 1 (index 0 creates).
// Version 5 (principals, tokens, audit) lives in access_schema.h; version 6
// (row checksums, submit request ids) is built by SchemaV6(); version 9
// (seed series) by SchemaSeries() (series_store.h), version 10 (strategy
// states, with their checksums) by SchemaV10(); version 11 is the fleet key;
// version 12 (row sums written by the hot statements) by SchemaV12().
constexpr const char* kMigrations[] = {
    kSchemaV1,       kSchemaV2, kSchemaV3,      kSchemaV4, kSchemaAccess,
    nullptr,         kSchemaV7, kSchemaMetrics, nullptr,   nullptr,
    kSchemaFleetKey, nullptr,   kSchemaIdFloors};
static_assert(sizeof(kMigrations) / sizeof(kMigrations[0]) ==
              Database::kSchemaVersion);

// The tables with a row checksum (row_sums.h): name, hashed columns, and the
// condition that matches the row a trigger fires for.
struct SumTable {
  const char* table;
  const char* columns;
  const char* key;
};
constexpr SumTable kSumTables[] = {
    {"runs", kRunSumColumns, "id = NEW.id"},
    {"islands", kIslandSumColumns, "run_id = NEW.run_id AND idx = NEW.idx"},
    {"genomes", kGenomeSumColumns, "id = NEW.id"},
    {"generation_stats", kStatsSumColumns,
     "run_id = NEW.run_id AND island = NEW.island AND "
     "generation = NEW.generation"},
};

// The triggers that keep `sum` = skerry_row_sum(columns) on every insert and
// update of `table` (row_sums.h), as version 6 made them: each rewrites the
// row it fired for. Version 12 (SchemaV12) replaces them.
std::string SumTriggers(const char* table, const char* columns, const char* key,
                        const char* insert_when = "",
                        const char* update_when = "") {
  const std::string set =
      absl::StrCat("UPDATE ", table, " SET sum = skerry_row_sum(", columns,
                   ") WHERE ", key, "; END;\n");
  return absl::StrCat("CREATE TRIGGER ", table, "_sum_insert AFTER INSERT ON ",
                      table, insert_when, " BEGIN ", set, "CREATE TRIGGER ",
                      table, "_sum_update AFTER UPDATE OF ", columns, " ON ",
                      table, update_when, " BEGIN ", set);
}

// Version 6: a checksum on every row of runs, islands, genomes and
// generation_stats (row_sums.h), computed here for the rows already stored;
// and the client's request id of a submitted run, unique per owner, so that a
// retried SubmitRun finds the run its first attempt made.
std::string SchemaV6() {
  std::string sql =
      "ALTER TABLE runs ADD COLUMN request_id TEXT;\n"
      "CREATE UNIQUE INDEX runs_request ON runs (owner, request_id) "
      "WHERE request_id IS NOT NULL;\n";
  for (const SumTable& t : kSumTables) {
    absl::StrAppend(&sql, "ALTER TABLE ", t.table,
                    " ADD COLUMN sum INTEGER;\nUPDATE ", t.table,
                    " SET sum = skerry_row_sum(", t.columns, ");\n",
                    SumTriggers(t.table, t.columns, t.key));
  }
  return sql;
}

// Version 10: each island's search strategy state (server/engine/strategy.h),
// with its row checksum kept like those of version 6. Runs stored before it
// are GA runs, whose state is empty.
std::string SchemaV10() {
  return absl::StrCat(
      "CREATE TABLE strategy_states (\n"
      "  run_id INTEGER NOT NULL,\n"
      "  island INTEGER NOT NULL,\n"
      "  generation INTEGER NOT NULL,\n"
      "  state BLOB NOT NULL,\n"
      "  sum INTEGER,\n"
      "  PRIMARY KEY (run_id, island)\n"
      ");\n",
      SumTriggers("strategy_states", kStrategyStateSumColumns,
                  "run_id = NEW.run_id AND island = NEW.island"),
      "INSERT INTO strategy_states (run_id, island, generation, state)\n"
      "  SELECT run_id, idx, generation, X'' FROM islands;\n");
}

// Version 12: the triggers write the sum only when the statement did not: an
// INSERT that leaves it NULL, an UPDATE that leaves it as it was. The hot
// statements (a generation's genome inserts, a group commit's result updates)
// compute it themselves, in the same statement, so each of those rows is
// written once instead of twice; every other writer is covered as before.
// The guarantee is unchanged: every row's sum is checked on every read and
// by `--check`, and a statement that sets a wrong sum makes its row read as
// damaged, as a hand edit would.
std::string SchemaV12() {
  std::string sql;
  for (const SumTable& t : kSumTables) {
    absl::StrAppend(
        &sql, "DROP TRIGGER ", t.table, "_sum_insert;\nDROP TRIGGER ", t.table,
        "_sum_update;\n",
        SumTriggers(t.table, t.columns, t.key, " WHEN NEW.sum IS NULL",
                    " WHEN NEW.sum IS OLD.sum"));
  }
  return sql;
}

std::string MigrationSql(int from_version) {
  if (from_version == 5) return SchemaV6();
  if (from_version == 8) return SchemaSeries();
  if (from_version == 9) return SchemaV10();
  if (from_version == 11) return SchemaV12();
  return kMigrations[from_version];
}

}  // namespace

// The lock is taken here and given back in ~Writer, across function
// boundaries the analysis cannot follow; conn_ is read while it is held.
Database::Writer::Writer(Database* db) ABSL_NO_THREAD_SAFETY_ANALYSIS
    : db_(db),
      conn_((db->mu_.Lock(), db->conn_.get())) {}

Database::Writer::~Writer() ABSL_NO_THREAD_SAFETY_ANALYSIS {
  db_->mu_.Unlock();
}

absl::Status Database::ProbeWrite() {
  Writer w = Write();
  // It must really write a page: SQLite skips an UPDATE that changes nothing.
  // PRAGMA user_version (unused otherwise) lives in the header page.
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_ASSIGN_OR_RETURN(auto read, w->Prepare("PRAGMA user_version"));
  SKERRY_ASSIGN_OR_RETURN(bool row, read.Step());
  const int64_t next = row ? (read.ColumnInt(0) + 1) % 1000000 : 1;
  read = Statement();
  SKERRY_RETURN_IF_ERROR(w->Exec(absl::StrCat("PRAGMA user_version = ", next)));
  return txn.Commit();
}

absl::StatusOr<std::unique_ptr<Database>> Database::Open(
    const std::string& path, const Options& options) {
  auto with_path = [&path](const absl::Status& s) {
    return absl::Status(s.code(), absl::StrCat(path, ": ", s.message()));
  };
  // The file rule, the same as `--check`'s (check.h): only an absent file
  // becomes a new database; an existing one must already be Skerry's.
  struct stat st;
  const bool existed = stat(path.c_str(), &st) == 0 &&
                       !(options.initialise_empty_file && st.st_size == 0);
  if (existed && S_ISREG(st.st_mode) && st.st_size == 0) {
    return with_path(absl::FailedPreconditionError(kEmptyFileMessage));
  }
  if (options.read_only && !existed) {
    return with_path(absl::NotFoundError(
        "no such database; --read-only serves an existing one and creates "
        "nothing"));
  }
  absl::StatusOr<std::unique_ptr<Connection>> conn = Connection::Open(
      path,
      (options.read_only ? SQLITE_OPEN_READONLY
                         : SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE) |
          SQLITE_OPEN_FULLMUTEX,
      options.vfs);
  if (!conn.ok()) return conn.status();  // already names the path
  sqlite3_busy_timeout((*conn)->raw(), options.busy_timeout_ms);
  std::unique_ptr<Database> store(new Database(path, std::move(*conn)));
  absl::MutexLock l(&store->mu_);
  // Check the file is ours and not newer before changing anything in it.
  absl::StatusOr<int> version = store->StoredVersion();
  if (!version.ok()) return with_path(version.status());
  if (existed && *version == 0) {
    return with_path(absl::FailedPreconditionError(
        "not a Skerry database: it has no schema_version table (nothing was "
        "changed; only a file that does not exist yet becomes a new "
        "database)"));
  }
  if (options.read_only) {
    if (*version != kSchemaVersion) {
      return with_path(absl::FailedPreconditionError(absl::StrCat(
          "schema version ", *version, ", this program's is ", kSchemaVersion,
          "; --read-only does not migrate: start a coordinator of this "
          "version once without --read-only (it migrates the file), or "
          "serve it with the version that wrote it")));
    }
    // The reads run on the read pool here too (its connections only read).
    ReadPool::Options read_options;
    read_options.busy_timeout_ms = options.busy_timeout_ms;
    store->readers_ = std::make_unique<ReadPool>(path, read_options);
    store->read_only_ = true;
    return store;
  }
  // SQLite opens a file it may not write read-only without an error (the
  // file's permissions; a header whose write version it does not know, as a
  // flipped bit makes it): every commit would then fail, and the coordinator
  // would hold its work forever. Refused here instead.
  if (existed && sqlite3_db_readonly(store->conn_->raw(), "main") == 1) {
    return with_path(absl::FailedPreconditionError(
        "the database can only be read, not written (the file's permissions, "
        "or a damaged file header; `skerry-coordinator --check` says more); "
        "nothing was changed"));
  }
  if (*version == 0) {
    // Before any table exists, or it has no effect: pages freed by deleting
    // a run (run_delete.cc) can then be given back to the file system.
    // Older files keep auto_vacuum=NONE (docs/operations.md).
    absl::Status av = store->conn_->Exec("PRAGMA auto_vacuum=INCREMENTAL");
    if (!av.ok()) return with_path(av);
  }
  // WAL is a property of the file and survives reopening.
  absl::StatusOr<Statement> wal =
      store->conn_->Prepare("PRAGMA journal_mode=WAL");
  if (!wal.ok()) return with_path(wal.status());
  absl::StatusOr<bool> row = wal->Step();
  if (!row.ok()) return with_path(row.status());
  if (!*row || wal->ColumnText(0) != "wal") {
    return absl::FailedPreconditionError(
        absl::StrCat(path, ": could not switch the database to WAL mode"));
  }
  *wal = Statement();
  absl::Status s = store->conn_->Exec("PRAGMA synchronous=FULL");
  if (s.ok()) s = store->Migrate(*version);
  if (!s.ok()) return with_path(s);
  // The readers use SQLite's default VFS even when the writer has another:
  // Options::vfs is how the fault tests fail the writer's commit points, and
  // it forwards to the default VFS, so both share the file's locks.
  ReadPool::Options read_options;
  read_options.busy_timeout_ms = options.busy_timeout_ms;
  store->readers_ = std::make_unique<ReadPool>(path, read_options);
  return store;
}

absl::StatusOr<int> Database::StoredVersion() {
  SKERRY_ASSIGN_OR_RETURN(
      auto probe, conn_->Prepare("SELECT count(*) FROM sqlite_master WHERE "
                                 "type = 'table' AND name = 'schema_version'"));
  SKERRY_ASSIGN_OR_RETURN(bool has_row, probe.Step());
  if (!has_row || probe.ColumnInt(0) == 0) {
    SKERRY_ASSIGN_OR_RETURN(
        auto any, conn_->Prepare("SELECT count(*) FROM sqlite_master"));
    SKERRY_ASSIGN_OR_RETURN(bool any_row, any.Step());
    if (any_row && any.ColumnInt(0) > 0) {
      return absl::FailedPreconditionError(
          "not a Skerry database: it has tables but no schema_version "
          "(nothing was changed)");
    }
    return 0;  // empty: a new database
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto v, conn_->Prepare("SELECT max(version) FROM schema_version"));
  SKERRY_ASSIGN_OR_RETURN(bool v_row, v.Step());
  if (!v_row || v.ColumnIsNull(0)) {
    return absl::DataLossError(
        "schema_version is empty: the database is damaged (nothing was "
        "changed)");
  }
  const int64_t version = v.ColumnInt(0);
  if (version > kSchemaVersion) {
    return absl::FailedPreconditionError(
        absl::StrCat("database schema version ", version,
                     " is newer than this program's version ", kSchemaVersion,
                     "; use a newer Skerry (nothing was changed)"));
  }
  if (version < 1) {
    // Found by UBSan under the corruption sweep: a flipped byte made the
    // version negative, and the migration loop indexed kMigrations with it.
    return absl::DataLossError(absl::StrCat(
        "database schema version ", version, " is not one Skerry writes (1 to ",
        kSchemaVersion, "): the database is damaged (nothing was changed)"));
  }
  return static_cast<int>(version);
}

absl::Status Database::Migrate(int version) {
  if (version == kSchemaVersion) return absl::OkStatus();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  for (int v = version; v < kSchemaVersion; ++v) {
    SKERRY_RETURN_IF_ERROR(conn_->Exec(MigrationSql(v)));
    if (v > 0) {
      SKERRY_RETURN_IF_ERROR(conn_->Exec(
          absl::StrCat("UPDATE schema_version SET version = ", v + 1)));
    }
  }
  return txn.Commit();
}

absl::Status VerifySchema(Connection* conn) {
  // The schema a fresh database of this version has, made in memory by the
  // same migrations: any difference in the file's is damage (or a hand edit).
  SKERRY_ASSIGN_OR_RETURN(auto fresh,
                          Connection::Open(":memory:", SQLITE_OPEN_READWRITE));
  for (int v = 0; v < Database::kSchemaVersion; ++v) {
    SKERRY_RETURN_IF_ERROR(fresh->Exec(MigrationSql(v)));
  }
  auto objects =
      [](Connection* c) -> absl::StatusOr<std::map<std::string, std::string>> {
    SKERRY_ASSIGN_OR_RETURN(
        auto s, c->Prepare("SELECT type || ' ' || name, coalesce(sql, '') "
                           "FROM sqlite_master WHERE name NOT LIKE "
                           "'sqlite_stat%'"));
    std::map<std::string, std::string> out;
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
      if (!row) break;
      out[s.ColumnText(0)] = s.ColumnText(1);
    }
    return out;
  };
  SKERRY_ASSIGN_OR_RETURN(auto want, objects(fresh.get()));
  SKERRY_ASSIGN_OR_RETURN(auto got, objects(conn));
  for (const auto& [name, sql] : want) {
    auto it = got.find(name);
    if (it == got.end() || it->second != sql) {
      return absl::DataLossError(absl::StrCat(
          "the database's schema is damaged: ", name,
          it == got.end() ? " is missing" : " differs from Skerry's"));
    }
  }
  for (const auto& [name, sql] : got) {
    if (want.count(name) == 0) {
      return absl::DataLossError(absl::StrCat(
          "the database's schema is damaged: ", name, " is not Skerry's"));
    }
  }
  return absl::OkStatus();
}

namespace {

// quick_check's rows: "ok" alone, or findings (OK, or DATA_LOSS naming them
// and `path`).
absl::Status QuickCheckRows(Statement* s, const std::string& path) {
  std::vector<std::string> lines;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s->Step());
    if (!row) break;
    lines.push_back(s->ColumnText(0));
  }
  if (lines.size() == 1 && lines[0] == "ok") return absl::OkStatus();
  std::string found;
  for (const std::string& line : lines) absl::StrAppend(&found, "; ", line);
  return absl::DataLossError(absl::StrCat(
      path, ": the database file is malformed (SQLite's quick_check", found,
      "); `skerry-coordinator --check` says more, docs/operations.md says how "
      "to restore from a backup"));
}

// VerifySchema's finding as the start reports it, naming `path`.
absl::Status SchemaCheck(Connection* conn, const std::string& path) {
  absl::Status schema = VerifySchema(conn);
  if (schema.ok()) return schema;
  return absl::DataLossError(
      absl::StrCat(path, ": ", schema.message(),
                   "; docs/operations.md says how to restore from a backup"));
}

}  // namespace

absl::Status Database::QuickCheck() {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto s, conn_->Prepare("PRAGMA quick_check(20)"));
  SKERRY_RETURN_IF_ERROR(QuickCheckRows(&s, path_));
  return SchemaCheck(conn_.get(), path_);
}

absl::Status Database::QuickCheckAtStart() {
  absl::MutexLock l(&mu_);
  std::vector<std::string> tables;
  {
    // Every table but those whose size grows with the evaluations.
    SKERRY_ASSIGN_OR_RETURN(
        auto list,
        conn_->Prepare("SELECT name FROM main.sqlite_schema WHERE type = "
                       "'table' AND name NOT IN ('genomes', 'genome_metrics') "
                       "ORDER BY name"));
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, list.Step());
      if (!row) break;
      // A name from the schema, never outside input; quoted all the same.
      tables.push_back(list.ColumnText(0));
    }
  }
  for (const std::string& t : tables) {
    SKERRY_ASSIGN_OR_RETURN(
        auto s,
        conn_->Prepare(absl::StrCat("PRAGMA main.quick_check(\"", t, "\")")));
    SKERRY_RETURN_IF_ERROR(QuickCheckRows(&s, path_));
  }
  return SchemaCheck(conn_.get(), path_);
}

absl::Status Database::FullCheckWhileServing() {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  {
    absl::MutexLock l(&check_mu_);
    if (check_interrupted_) return absl::CancelledError("interrupted");
    checking_ = reader->raw();
  }
  absl::Status result;
  {
    absl::StatusOr<Statement> s = reader->Prepare("PRAGMA quick_check(20)");
    result = s.ok() ? QuickCheckRows(&*s, path_) : s.status();
  }
  absl::MutexLock l(&check_mu_);
  checking_ = nullptr;
  if (check_interrupted_) return absl::CancelledError("interrupted");
  return result;
}

void Database::InterruptFullCheck() {
  absl::MutexLock l(&check_mu_);
  check_interrupted_ = true;
  if (checking_ != nullptr) sqlite3_interrupt(checking_);
}

void Database::StopWrites(const absl::Status& why) {
  absl::MutexLock l(&mu_);
  conn_->StopWrites(why).IgnoreError();  // Begin refuses even if this fails
}

absl::StatusOr<int> Database::SchemaVersion() {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto s, conn_->Prepare("SELECT max(version) FROM schema_version"));
  SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
  return row ? static_cast<int>(s.ColumnInt(0)) : 0;
}

namespace {

// The fixed statements of LargestId and RaiseIdFloors, one per
// table that keeps an id floor, so no SQL text is built at run time.
struct IdTableSql {
  const char* largest;
  const char* raise_floor;
};

#define SKERRY_ID_TABLE_SQL(table)                                           \
  IdTableSql {                                                               \
    "SELECT max(coalesce((SELECT max(id) FROM main." table                   \
    "), 0), coalesce((SELECT floor FROM main.id_floors WHERE name = '" table \
    "'), 0))",                                                               \
        "INSERT INTO main.id_floors (name, floor) SELECT '" table            \
        "', coalesce(max(id), 0) FROM main." table                           \
        " WHERE true ON CONFLICT (name) DO UPDATE SET floor = "              \
        "max(floor, excluded.floor)"                                         \
  }
constexpr IdTableSql kIdTableSql[] = {SKERRY_ID_TABLE_SQL("runs"),
                                      SKERRY_ID_TABLE_SQL("genomes"),
                                      SKERRY_ID_TABLE_SQL("validations")};
#undef SKERRY_ID_TABLE_SQL

}  // namespace

absl::StatusOr<int64_t> Database::LargestId(Writer& w, IdTable table) {
  SKERRY_ASSIGN_OR_RETURN(
      auto top, w->PrepareCached(kIdTableSql[static_cast<int>(table)].largest));
  SKERRY_ASSIGN_OR_RETURN(bool row, top.Step());
  return row ? top.ColumnInt(0) : 0;
}

absl::Status Database::RaiseIdFloors(Writer& w) {
  for (const IdTableSql& sql : kIdTableSql) {
    SKERRY_ASSIGN_OR_RETURN(auto up, w->PrepareCached(sql.raise_floor));
    SKERRY_RETURN_IF_ERROR(up.Run());
  }
  return absl::OkStatus();
}

absl::StatusOr<int64_t> Database::LargestRunId(Writer& w) {
  SKERRY_ASSIGN_OR_RETURN(const int64_t stored, LargestId(w, IdTable::kRuns));
  // A run deleted before version 13 kept no floor; its id is still named by
  // the audit log's entries of calls that succeeded on it.
  SKERRY_ASSIGN_OR_RETURN(
      auto audited,
      w->PrepareCached("SELECT coalesce(max(run_id), 0) FROM main.audit "
                       "WHERE run_id IS NOT NULL AND code = 0"));
  SKERRY_ASSIGN_OR_RETURN(bool row, audited.Step());
  return std::max(stored, row ? audited.ColumnInt(0) : int64_t{0});
}

}  // namespace skerry::store
