#include "server/store/store.h"

#include <sys/stat.h>

#include <algorithm>
#include <cstring>
#include <map>
#include <tuple>
#include <utility>

#include "absl/container/flat_hash_map.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/genes.h"
#include "common/sample_recipe.h"
#include "common/sha256.h"
#include "common/status_macros.h"
#include "server/store/access_schema.h"
#include "server/store/row_sums.h"
#include "server/store/series_store.h"

namespace skerry::store {
namespace {

using skerry::v1::EvalState;
using skerry::v1::RunState;

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

// Version 11: the fleet key (Store::FleetKey): worker secrets and lease proofs
// (server/auth/fleet_seal.h) outlive a coordinator restart.
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
              Store::kSchemaVersion);

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

// Selected after a table's columns: 1 when the row matches its checksum.
std::string SumMatches(const char* columns) {
  return absl::StrCat("(sum IS skerry_row_sum(", columns, "))");
}

const std::string& RunColumns() {
  static const std::string* columns = new std::string(absl::StrCat(
      "id, name, owner, spec, spec_text, state, priority, message, "
      "created_ms, updated_ms, started_ms, evaluations, champion_id, "
      "best_score, stop_generation, ",
      SumMatches(kRunSumColumns),
      ", coalesce(request_id, ''), parent_run, parent_generation"));
  return *columns;
}

// A damaged row comes back with `damage` set (see ListRuns); GetRun turns it
// into an error.
RunRecord ReadRun(const Statement& s) {
  RunRecord r;
  r.id = s.ColumnInt(0);
  if (s.ColumnInt(15) != 1) r.damage = DamagedRun(r.id);
  r.name = s.ColumnText(1);
  r.owner = s.ColumnText(2);
  if (!r.spec.ParseFromString(s.ColumnBlob(3)) && r.damage.ok()) {
    r.damage = absl::DataLossError(
        absl::StrCat("run ", r.id, ": stored spec does not parse"));
  }
  r.spec_text = s.ColumnText(4);
  r.state = static_cast<RunState>(s.ColumnInt(5));
  r.priority = static_cast<int32_t>(s.ColumnInt(6));
  r.message = s.ColumnText(7);
  r.created_ms = s.ColumnInt(8);
  r.updated_ms = s.ColumnInt(9);
  r.started_ms = s.ColumnInt(10);
  r.evaluations = s.ColumnInt(11);
  r.champion_id = s.ColumnIsNull(12) ? 0 : s.ColumnInt(12);
  if (!s.ColumnIsNull(13)) r.best_score = s.ColumnDouble(13);
  if (!s.ColumnIsNull(14)) {
    r.stop_generation = static_cast<uint32_t>(s.ColumnInt(14));
  }
  r.request_id = s.ColumnText(16);
  if (!s.ColumnIsNull(17)) r.parent_run = s.ColumnInt(17);
  if (!s.ColumnIsNull(18)) {
    r.parent_generation = static_cast<uint32_t>(s.ColumnInt(18));
  }
  return r;
}

const std::string& GenomeColumns() {
  static const std::string* columns = new std::string(absl::StrCat(
      "id, run_id, island, generation, slot, origin, parent_a, parent_b, "
      "genes, score, eval_state, attempts, error, eval_seconds, ",
      SumMatches(kGenomeSumColumns)));
  return *columns;
}

absl::StatusOr<GenomeRecord> ReadGenome(const Statement& s) {
  GenomeRecord g;
  g.id = s.ColumnInt(0);
  g.run_id = s.ColumnInt(1);
  g.island = static_cast<uint32_t>(s.ColumnInt(2));
  g.generation = static_cast<uint32_t>(s.ColumnInt(3));
  g.slot = static_cast<uint32_t>(s.ColumnInt(4));
  if (s.ColumnInt(14) != 1) {
    return DamagedGenome(g.run_id, g.island, g.generation, g.slot, g.id);
  }
  g.origin = static_cast<skerry::v1::Origin>(s.ColumnInt(5));
  g.parent_a = s.ColumnIsNull(6) ? 0 : s.ColumnInt(6);
  g.parent_b = s.ColumnIsNull(7) ? 0 : s.ColumnInt(7);
  const std::string blob = s.ColumnBlob(8);
  if (IsChildRecipe(blob)) {
    // A GA genome kept as its recipe (with its genes when a keyframe):
    // RebuildChildren makes the genes of the others.
    absl::StatusOr<UnpackedChild> child = UnpackChildRecipe(blob);
    if (!child.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", child.status().message()));
    }
    g.child_recipe = child->recipe;
    if (child->genes.has_value()) {
      g.genes = *std::move(child->genes);
      g.keyframe = true;
    }
  } else if (IsRecipe(blob)) {
    // A natural ES sample: RebuildSamples makes its genes.
    absl::StatusOr<SampleRecipe> recipe = UnpackRecipe(blob);
    if (!recipe.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", recipe.status().message()));
    }
    g.recipe = *recipe;
  } else {
    absl::StatusOr<std::vector<double>> genes = UnpackGenes(blob);
    if (!genes.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", genes.status().message()));
    }
    g.genes = std::move(*genes);
  }
  g.score = s.ColumnIsNull(9) ? 0.0 : s.ColumnDouble(9);
  g.state = static_cast<EvalState>(s.ColumnInt(10));
  g.attempts = static_cast<uint32_t>(s.ColumnInt(11));
  g.error = s.ColumnText(12);
  g.eval_seconds = s.ColumnDouble(13);
  return g;
}

// The float64 bytes of the genes of sample `id`, stored as `recipe`, from
// its distribution genome `parent`: in `centres` when the digest read it
// just before, else read here (a fork's copied sample names its parent
// run's).
absl::StatusOr<std::string> SampleBytes(
    Connection* conn, int64_t id, const std::string& recipe, int64_t parent,
    absl::flat_hash_map<int64_t, std::vector<double>>* centres) {
  auto it = centres->find(parent);
  if (it == centres->end()) {
    GenomeRecord sample;
    sample.id = id;
    sample.parent_a = parent;
    SKERRY_ASSIGN_OR_RETURN(sample.recipe, UnpackRecipe(recipe));
    std::vector<GenomeRecord> one = {std::move(sample)};
    SKERRY_RETURN_IF_ERROR(Store::RebuildSamples(conn, &one));
    return Float64Bytes(PackGenes(one.front().genes));
  }
  SKERRY_ASSIGN_OR_RETURN(SampleRecipe r, UnpackRecipe(recipe));
  SKERRY_ASSIGN_OR_RETURN(std::vector<double> genes,
                          BuildSample(r, it->second));
  return Float64Bytes(PackGenes(genes));
}

// The genes of the GA genomes kept as recipes that the digest reads, in
// (island, generation, slot) order: each is built from its parents, held
// here for the island's newest two generations (an elite's or a child's
// parents are in the generation before it); a migrant's parent, of another
// island, is replayed from its own ancestry (Store::RebuildChildren).
class DigestChildren {
 public:
  absl::StatusOr<std::string> Bytes(Connection* conn, int64_t id,
                                    const std::string& blob, int64_t parent_a,
                                    int64_t parent_b, uint32_t island,
                                    uint32_t generation) {
    if (island != island_ || generation != generation_)
      Advance(island, generation);
    GenomeRecord g;
    g.id = id;
    g.parent_a = parent_a;
    g.parent_b = parent_b;
    SKERRY_ASSIGN_OR_RETURN(UnpackedChild child, UnpackChildRecipe(blob));
    g.child_recipe = child.recipe;
    if (child.genes.has_value()) g.genes = *std::move(child.genes);
    std::vector<GenomeRecord> one = {std::move(g)};
    SKERRY_RETURN_IF_ERROR(Store::RebuildChildren(conn, &one, &known_));
    auto genes =
        std::make_shared<const std::vector<double>>(std::move(one[0].genes));
    known_[id] = genes;
    newest_.push_back(id);
    return Float64Bytes(PackGenes(*genes));
  }

 private:
  void Advance(uint32_t island, uint32_t generation) {
    for (int64_t id : older_) known_.erase(id);
    older_.clear();
    if (island == island_ && generation == generation_ + 1) {
      older_.swap(newest_);
    } else {
      for (int64_t id : newest_) known_.erase(id);
      newest_.clear();
    }
    island_ = island;
    generation_ = generation;
  }

  uint32_t island_ = 0;
  uint32_t generation_ = 0;
  GeneCache known_;
  std::vector<int64_t> newest_;  // ids of generation_'s genomes held
  std::vector<int64_t> older_;   // ids of generation_ - 1's
};

}  // namespace

std::string IsChildRecipeSql(absl::string_view column) {
  return absl::StrCat(
      "(length(", column, ") >= ", kChildRecipeBytes, " AND substr(", column,
      ", 1, 1) = x'",
      absl::Hex(static_cast<int>(kChildRecipeTag), absl::kZeroPad2), "')");
}

absl::StatusOr<std::unique_ptr<Store>> Store::Open(const std::string& path) {
  return Open(path, Options());
}

absl::Status Store::ProbeWrite() {
  absl::MutexLock l(&mu_);
  // It must really write a page: SQLite skips an UPDATE that changes nothing.
  // PRAGMA user_version (unused otherwise) lives in the header page.
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  SKERRY_ASSIGN_OR_RETURN(auto read, conn_->Prepare("PRAGMA user_version"));
  SKERRY_ASSIGN_OR_RETURN(bool row, read.Step());
  const int64_t next = row ? (read.ColumnInt(0) + 1) % 1000000 : 1;
  read = Statement();
  SKERRY_RETURN_IF_ERROR(
      conn_->Exec(absl::StrCat("PRAGMA user_version = ", next)));
  return txn.Commit();
}

absl::StatusOr<std::unique_ptr<Store>> Store::Open(const std::string& path,
                                                   const Options& options) {
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
  std::unique_ptr<Store> store(new Store(path, std::move(*conn)));
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

absl::StatusOr<int> Store::StoredVersion() {
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

absl::Status Store::Migrate(int version) {
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
  for (int v = 0; v < Store::kSchemaVersion; ++v) {
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

absl::Status Store::QuickCheck() {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto s, conn_->Prepare("PRAGMA quick_check(20)"));
  SKERRY_RETURN_IF_ERROR(QuickCheckRows(&s, path_));
  return SchemaCheck(conn_.get(), path_);
}

absl::Status Store::QuickCheckAtStart() {
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

absl::Status Store::FullCheckWhileServing() {
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

void Store::InterruptFullCheck() {
  absl::MutexLock l(&check_mu_);
  check_interrupted_ = true;
  if (checking_ != nullptr) sqlite3_interrupt(checking_);
}

void Store::StopWrites(const absl::Status& why) {
  absl::MutexLock l(&mu_);
  conn_->StopWrites(why).IgnoreError();  // Begin refuses even if this fails
}

absl::StatusOr<int> Store::SchemaVersion() {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto s, conn_->Prepare("SELECT max(version) FROM schema_version"));
  SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
  return row ? static_cast<int>(s.ColumnInt(0)) : 0;
}

absl::Status Store::InsertGenomes(std::vector<GenomeRecord>* genomes) {
  // The id is chosen here, as SQLite would (the largest rowid plus one; the
  // table has no AUTOINCREMENT), because the row's sum covers it and is
  // computed in the INSERT itself (schema version 12, SchemaV12).
  // Above every id ever given, a deleted genome's included (id_floors).
  SKERRY_ASSIGN_OR_RETURN(int64_t next_id, LargestIdLocked(IdTable::kGenomes));
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      conn_->PrepareCached(
          "INSERT INTO genomes (id, run_id, island, generation, slot, origin, "
          "parent_a, parent_b, genes, score, eval_state, attempts, error, "
          "eval_seconds, sum) VALUES (?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,"
          "?13,?14,skerry_row_sum(?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,?13,"
          "?14))"));
  // Ids of the batch's rows by key, for links into their own generation
  // (GenomeRecord::parent_a_slot); kept only when a row has such a link.
  using Key = std::tuple<int64_t, uint32_t, uint32_t, uint32_t>;
  const bool linked =
      std::any_of(genomes->begin(), genomes->end(),
                  [](const GenomeRecord& g) { return g.parent_a_slot >= 0; });
  absl::flat_hash_map<Key, int64_t> inserted;
  for (GenomeRecord& g : *genomes) {
    if (g.parent_a_slot >= 0) {
      auto parent = inserted.find(Key{g.run_id, g.island, g.generation,
                                      static_cast<uint32_t>(g.parent_a_slot)});
      if (parent == inserted.end()) {
        return absl::InternalError(absl::StrCat(
            "run ", g.run_id, " island ", g.island, " generation ",
            g.generation, " slot ", g.slot, ": its parent at slot ",
            g.parent_a_slot, " is not inserted before it"));
      }
      g.parent_a = parent->second;
    }
    ins.BindInt(1, ++next_id);
    ins.BindInt(2, g.run_id);
    ins.BindInt(3, g.island);
    ins.BindInt(4, g.generation);
    ins.BindInt(5, g.slot);
    ins.BindInt(6, g.origin);
    ins.BindIdOrNull(7, g.parent_a);
    ins.BindIdOrNull(8, g.parent_b);
    if (g.recipe.has_value()) {
      ins.BindBlob(9, PackRecipe(*g.recipe));
    } else if (g.child_recipe.has_value()) {
      ins.BindBlob(9, g.keyframe ? PackChildRecipe(*g.child_recipe, g.genes)
                                 : PackChildRecipe(*g.child_recipe));
    } else {
      ins.BindBlob(9, PackGenes(g.genes));
    }
    if (g.state == skerry::v1::PENDING) {
      ins.BindNull(10);
    } else {
      ins.BindDouble(10, g.score);
    }
    ins.BindInt(11, g.state);
    ins.BindInt(12, g.attempts);
    ins.BindText(13, g.error);
    ins.BindDouble(14, g.eval_seconds);
    SKERRY_RETURN_IF_ERROR(ins.Run());
    g.id = next_id;
    if (linked) inserted[Key{g.run_id, g.island, g.generation, g.slot}] = g.id;
  }
  return absl::OkStatus();
}

absl::Status Store::CreateRun(RunRecord* run,
                              std::vector<GenomeRecord>* genomes,
                              const std::vector<std::string>* strategy_states) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  SKERRY_RETURN_IF_ERROR(CreateRunLocked(run, genomes, strategy_states));
  return txn.Commit();
}

namespace {

// The fixed statements of LargestIdLocked and RaiseIdFloorsLocked, one per
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

absl::StatusOr<int64_t> Store::LargestIdLocked(IdTable table) {
  SKERRY_ASSIGN_OR_RETURN(
      auto top,
      conn_->PrepareCached(kIdTableSql[static_cast<int>(table)].largest));
  SKERRY_ASSIGN_OR_RETURN(bool row, top.Step());
  return row ? top.ColumnInt(0) : 0;
}

absl::Status Store::RaiseIdFloorsLocked() {
  for (const IdTableSql& sql : kIdTableSql) {
    SKERRY_ASSIGN_OR_RETURN(auto up, conn_->PrepareCached(sql.raise_floor));
    SKERRY_RETURN_IF_ERROR(up.Run());
  }
  return absl::OkStatus();
}

absl::StatusOr<int64_t> Store::LargestRunIdLocked() {
  SKERRY_ASSIGN_OR_RETURN(const int64_t stored,
                          LargestIdLocked(IdTable::kRuns));
  // A run deleted before version 13 kept no floor; its id is still named by
  // the audit log's entries of calls that succeeded on it.
  SKERRY_ASSIGN_OR_RETURN(
      auto audited,
      conn_->PrepareCached("SELECT coalesce(max(run_id), 0) FROM main.audit "
                           "WHERE run_id IS NOT NULL AND code = 0"));
  SKERRY_ASSIGN_OR_RETURN(bool row, audited.Step());
  return std::max(stored, row ? audited.ColumnInt(0) : int64_t{0});
}

absl::Status Store::InsertRunRow(RunRecord* run, int64_t parent_run,
                                 uint32_t parent_generation,
                                 int64_t evaluations) {
  SKERRY_ASSIGN_OR_RETURN(const int64_t largest, LargestRunIdLocked());
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      conn_->Prepare(
          "INSERT INTO runs (name, owner, spec, spec_text, seed, state, "
          "priority, message, created_ms, updated_ms, started_ms, "
          "request_id, parent_run, parent_generation, evaluations, id) VALUES "
          "(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)"));
  ins.BindInt(16, largest + 1);
  ins.BindText(1, run->name);
  ins.BindText(2, run->owner);
  ins.BindBlob(3, run->spec.SerializeAsString());
  ins.BindText(4, run->spec_text);
  ins.BindInt(5, static_cast<int64_t>(run->spec.seed()));
  ins.BindInt(6, run->state);
  ins.BindInt(7, run->priority);
  ins.BindText(8, run->message);
  ins.BindInt(9, run->created_ms);
  ins.BindInt(10, run->updated_ms);
  ins.BindInt(11, run->started_ms);
  if (run->request_id.empty()) {
    ins.BindNull(12);
  } else {
    ins.BindText(12, run->request_id);
  }
  if (parent_run == 0) {  // not a fork: no parent, no fork generation
    ins.BindNull(13);
    ins.BindNull(14);
  } else {
    ins.BindInt(13, parent_run);
    ins.BindInt(14, parent_generation);
  }
  ins.BindInt(15, evaluations);
  SKERRY_RETURN_IF_ERROR(ins.Run());
  run->id = conn_->LastInsertId();
  run->parent_run = parent_run;
  run->parent_generation = parent_generation;
  run->evaluations = evaluations;
  return absl::OkStatus();
}

absl::Status Store::InsertStrategyStates(
    int64_t run_id, uint32_t count, uint32_t generation,
    const std::vector<std::string>* states) {
  SKERRY_ASSIGN_OR_RETURN(
      auto st, conn_->Prepare("INSERT INTO strategy_states (run_id, island, "
                              "generation, state) VALUES (?, ?, ?, ?)"));
  for (uint32_t i = 0; i < count; ++i) {
    st.BindInt(1, run_id);
    st.BindInt(2, i);
    st.BindInt(3, generation);
    st.BindBlob(4, states != nullptr && i < states->size() ? (*states)[i]
                                                           : std::string());
    SKERRY_RETURN_IF_ERROR(st.Run());
  }
  return absl::OkStatus();
}

absl::Status Store::CreateRunLocked(
    RunRecord* run, std::vector<GenomeRecord>* genomes,
    const std::vector<std::string>* strategy_states) {
  SKERRY_RETURN_IF_ERROR(InsertRunRow(run, 0, 0, 0));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto isl,
        conn_->Prepare("INSERT INTO islands (run_id, idx, generation, "
                       "done) VALUES (?, ?, 0, 0)"));
    const uint32_t count = std::max<uint32_t>(1, run->spec.islands().count());
    for (uint32_t i = 0; i < count; ++i) {
      isl.BindInt(1, run->id);
      isl.BindInt(2, i);
      SKERRY_RETURN_IF_ERROR(isl.Run());
    }
    SKERRY_RETURN_IF_ERROR(
        InsertStrategyStates(run->id, count, 0, strategy_states));
  }
  for (GenomeRecord& g : *genomes) g.run_id = run->id;
  return InsertGenomes(genomes);
}

absl::Status Store::CommitResults(
    absl::Span<const ResultUpdate> results,
    absl::Span<const ValidationUpdate> validations) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  SKERRY_ASSIGN_OR_RETURN(
      auto upd,
      conn_->PrepareCached(
          "UPDATE genomes SET eval_state = ?1, score = ?2, attempts = ?3, "
          "error = ?4, eval_seconds = ?5, sum = skerry_row_sum(id, run_id, "
          "island, generation, slot, origin, parent_a, parent_b, genes, ?2, "
          "?1, ?3, ?4, ?5) WHERE id = ?6 AND eval_state = 1"));
  std::map<int64_t, int64_t> finished_per_run;
  for (const ResultUpdate& r : results) {
    upd.BindInt(1, r.state);
    if (r.state == skerry::v1::EVALUATED) {
      upd.BindDouble(2, r.score);
    } else {
      upd.BindNull(2);
    }
    upd.BindInt(3, r.attempts);
    upd.BindText(4, r.error);
    upd.BindDouble(5, r.eval_seconds);
    upd.BindInt(6, r.genome_id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
    if (conn_->Changes() != 1) {
      return absl::FailedPreconditionError(absl::StrCat(
          "genome ", r.genome_id, " is not pending; batch not applied"));
    }
    if (r.state != skerry::v1::PENDING) ++finished_per_run[r.run_id];
    if (r.state == skerry::v1::EVALUATED && !r.metrics.empty()) {
      SKERRY_RETURN_IF_ERROR(InsertMetricsLocked(r));
    }
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto cnt, conn_->Prepare("UPDATE runs SET evaluations = evaluations + ? "
                               "WHERE id = ?"));
  for (const auto& [run_id, n] : finished_per_run) {
    cnt.BindInt(1, n);
    cnt.BindInt(2, run_id);
    SKERRY_RETURN_IF_ERROR(cnt.Run());
  }
  SKERRY_RETURN_IF_ERROR(ApplyValidationsLocked(validations));
  return txn.Commit();
}

absl::Status Store::InsertStats(const StatsRecord& s) {
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      conn_->Prepare("INSERT OR REPLACE INTO generation_stats (run_id, "
                     "island, generation, best, mean, worst, diversity, "
                     "evaluations, failed, eval_seconds, completed_ms) "
                     "VALUES (?,?,?,?,?,?,?,?,?,?,?)"));
  ins.BindInt(1, s.run_id);
  ins.BindInt(2, s.island);
  ins.BindInt(3, s.generation);
  ins.BindDouble(4, s.best);
  ins.BindDouble(5, s.mean);
  ins.BindDouble(6, s.worst);
  ins.BindDouble(7, s.diversity);
  ins.BindInt(8, s.evaluations);
  ins.BindInt(9, s.failed);
  ins.BindDouble(10, s.eval_seconds);
  ins.BindInt(11, s.completed_ms);
  return ins.Run();
}

absl::Status Store::CommitGeneration(const GenerationCommit& c) {
  absl::MutexLock l(&mu_);
  // Not synced (see "Pragmas" in store.h): a generation is never acknowledged
  // to anyone, can be bred again from the one before, and the next synced
  // commit makes it durable, since the WAL is synced in order.
  SKERRY_RETURN_IF_ERROR(conn_->Exec("PRAGMA synchronous=NORMAL"));
  absl::Status s = CommitGenerationLocked(c);
  absl::Status restore = conn_->Exec("PRAGMA synchronous=FULL");
  return s.ok() ? restore : s;
}

absl::Status Store::CommitGenerationLocked(const GenerationCommit& c) {
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  SKERRY_RETURN_IF_ERROR(InsertStats(c.completed));
  uint32_t generation = c.completed.generation;
  if (c.next != nullptr && !c.next->empty()) {
    generation = c.next->front().generation;
    SKERRY_RETURN_IF_ERROR(InsertGenomes(c.next));
  }
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto upd, conn_->Prepare("UPDATE islands SET generation = ?, done = ? "
                                 "WHERE run_id = ? AND idx = ?"));
    upd.BindInt(1, generation);
    upd.BindInt(2, c.island_done ? 1 : 0);
    upd.BindInt(3, c.run_id);
    upd.BindInt(4, c.island);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  if (c.strategy_state.has_value()) {
    SKERRY_ASSIGN_OR_RETURN(
        auto st,
        conn_->Prepare("INSERT OR REPLACE INTO strategy_states (run_id, "
                       "island, generation, state) VALUES (?, ?, ?, ?)"));
    st.BindInt(1, c.run_id);
    st.BindInt(2, c.island);
    st.BindInt(3, generation);
    st.BindBlob(4, *c.strategy_state);
    SKERRY_RETURN_IF_ERROR(st.Run());
  }
  if (c.champion.has_value()) {
    SKERRY_ASSIGN_OR_RETURN(
        auto upd,
        conn_->Prepare("UPDATE runs SET champion_id = ?, best_score = ? "
                       "WHERE id = ?"));
    upd.BindInt(1, c.champion->first);
    upd.BindDouble(2, c.champion->second);
    upd.BindInt(3, c.run_id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  if (c.champion_genome != nullptr && c.champion_genome->child_recipe) {
    // The champion kept as its recipe becomes a keyframe: its recipe and
    // then its genes (common/child_recipe.h), so that exporting or
    // validating it replays nothing.
    SKERRY_ASSIGN_OR_RETURN(
        auto keep, conn_->PrepareCached(absl::StrCat(
                       "UPDATE genomes SET genes = ?2 WHERE id = ?1 AND ",
                       IsChildRecipeSql("genes"),
                       " AND length(genes) = ", kChildRecipeBytes)));
    keep.BindInt(1, c.champion_genome->id);
    keep.BindBlob(2, PackChildRecipe(*c.champion_genome->child_recipe,
                                     c.champion_genome->genes));
    SKERRY_RETURN_IF_ERROR(keep.Run());
  }
  if (c.validate.has_value()) {
    SKERRY_RETURN_IF_ERROR(RequestValidationLocked(*c.validate).status());
  }
  if (c.stop_generation.has_value()) {
    SKERRY_ASSIGN_OR_RETURN(
        auto upd, conn_->Prepare("UPDATE runs SET stop_generation = "
                                 "min(coalesce(stop_generation, ?1), ?1) "
                                 "WHERE id = ?2"));
    upd.BindInt(1, *c.stop_generation);
    upd.BindInt(2, c.run_id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  return txn.Commit();
}

absl::Status Store::SetRunState(int64_t run_id, RunState state,
                                const std::string& message, int64_t now_ms) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, conn_->Prepare("UPDATE runs SET state = ?, message = ?, "
                               "updated_ms = ? WHERE id = ?"));
  upd.BindInt(1, state);
  upd.BindText(2, message);
  upd.BindInt(3, now_ms);
  upd.BindInt(4, run_id);
  SKERRY_RETURN_IF_ERROR(upd.Run());
  if (conn_->Changes() != 1) {
    return absl::NotFoundError(
        absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  }
  return absl::OkStatus();
}

absl::Status Store::SetRunStarted(int64_t run_id, int64_t now_ms) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, conn_->Prepare("UPDATE runs SET started_ms = ?, updated_ms = ? "
                               "WHERE id = ? AND started_ms = 0"));
  upd.BindInt(1, now_ms);
  upd.BindInt(2, now_ms);
  upd.BindInt(3, run_id);
  return upd.Run();
}

absl::Status Store::SetRunPriority(int64_t run_id, int32_t priority,
                                   int64_t now_ms) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, conn_->Prepare("UPDATE runs SET priority = ?, updated_ms = ? "
                               "WHERE id = ?"));
  upd.BindInt(1, priority);
  upd.BindInt(2, now_ms);
  upd.BindInt(3, run_id);
  SKERRY_RETURN_IF_ERROR(upd.Run());
  if (conn_->Changes() != 1) {
    return absl::NotFoundError(
        absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  }
  return absl::OkStatus();
}

absl::Status Store::FinishRun(int64_t run_id, RunState state,
                              const std::string& message,
                              std::optional<uint32_t> keep_through,
                              int64_t now_ms) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  if (keep_through.has_value()) {
    // The trimmed genomes' ids (and their tasks' ids) are not given again.
    SKERRY_RETURN_IF_ERROR(RaiseIdFloorsLocked());
    for (const char* sql :
         {"DELETE FROM genome_metrics WHERE run_id = ?1 AND genome_id IN "
          "(SELECT id FROM genomes WHERE run_id = ?1 AND generation > ?2)",
          "DELETE FROM genomes WHERE run_id = ?1 AND generation > ?2",
          "DELETE FROM generation_stats WHERE run_id = ?1 AND generation > ?2",
          "DELETE FROM validations WHERE run_id = ?1 AND generation > ?2",
          "UPDATE islands SET generation = min(generation, ?2) WHERE run_id = "
          "?1",
          "UPDATE runs SET stop_generation = ?2 WHERE id = ?1"}) {
      SKERRY_ASSIGN_OR_RETURN(auto st, conn_->Prepare(sql));
      st.BindInt(1, run_id);
      st.BindInt(2, *keep_through);
      SKERRY_RETURN_IF_ERROR(st.Run());
    }
  }
  {
    // An ended run has no live island (skerry-coordinator --check).
    SKERRY_ASSIGN_OR_RETURN(
        auto st,
        conn_->Prepare("UPDATE islands SET done = 1 WHERE run_id = ?1"));
    st.BindInt(1, run_id);
    SKERRY_RETURN_IF_ERROR(st.Run());
  }
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto st,
        conn_->Prepare("UPDATE runs SET evaluations = (SELECT count(*) "
                       "FROM genomes WHERE run_id = ?1 AND attempts > 0 "
                       "AND eval_state IN (2, 3)) WHERE id = ?1"));
    st.BindInt(1, run_id);
    SKERRY_RETURN_IF_ERROR(st.Run());
  }
  SKERRY_ASSIGN_OR_RETURN(auto best, BestGenomeOn(conn_.get(), run_id));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto upd,
        conn_->Prepare("UPDATE runs SET state = ?, message = ?, "
                       "updated_ms = ?, champion_id = ?, best_score = ? "
                       "WHERE id = ?"));
    upd.BindInt(1, state);
    upd.BindText(2, message);
    upd.BindInt(3, now_ms);
    if (best.has_value()) {
      upd.BindInt(4, best->id);
      upd.BindDouble(5, best->score);
    } else {
      upd.BindNull(4);
      upd.BindNull(5);
    }
    upd.BindInt(6, run_id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  return txn.Commit();
}

absl::StatusOr<int64_t> Store::RegisterWorker(const WorkerRecord& w) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      conn_->Prepare("INSERT INTO workers (name, host, threads, "
                     "evaluators, version, joined_ms, last_seen_ms, sandbox) "
                     "VALUES (?,?,?,?,?,?,?,?)"));
  ins.BindText(1, w.name);
  ins.BindText(2, w.host);
  ins.BindInt(3, w.threads);
  ins.BindText(4, w.evaluators);
  ins.BindText(5, w.version);
  ins.BindInt(6, w.joined_ms);
  ins.BindInt(7, w.last_seen_ms);
  ins.BindText(8, w.sandbox);
  SKERRY_RETURN_IF_ERROR(ins.Run());
  return conn_->LastInsertId();
}

absl::Status Store::TouchWorkers(absl::Span<const int64_t> ids,
                                 int64_t now_ms) {
  if (ids.empty()) return absl::OkStatus();
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  SKERRY_ASSIGN_OR_RETURN(
      auto upd,
      conn_->Prepare("UPDATE workers SET last_seen_ms = ? WHERE id = ?"));
  for (int64_t id : ids) {
    upd.BindInt(1, now_ms);
    upd.BindInt(2, id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  return txn.Commit();
}

absl::StatusOr<std::vector<RunRecord>> Store::ListRuns() {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat("SELECT ", RunColumns(),
                                                 " FROM runs ORDER BY id")));
  std::vector<RunRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
    if (!row) break;
    out.push_back(ReadRun(s));
  }
  return out;
}

absl::StatusOr<std::optional<int64_t>> Store::FindRunByRequest(
    const std::string& owner, const std::string& request_id) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto s, conn_->Prepare("SELECT id FROM runs WHERE owner = ? AND "
                             "request_id = ?"));
  s.BindText(1, owner);
  s.BindText(2, request_id);
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row) return std::optional<int64_t>();
  return std::optional<int64_t>(s.ColumnInt(0));
}

absl::StatusOr<RunRecord> Store::GetRun(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat("SELECT ", RunColumns(),
                                                 " FROM runs WHERE id = ?")));
  s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
  if (!row)
    return absl::NotFoundError(
        absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  RunRecord r = ReadRun(s);
  if (!r.damage.ok()) return r.damage;
  return r;
}

absl::Status Store::VerifyActiveRun(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(RunRecord run, GetRun(run_id));
  SKERRY_ASSIGN_OR_RETURN(std::vector<IslandRecord> islands,
                          GetIslands(run_id));
  SKERRY_RETURN_IF_ERROR(GetStats(run_id, std::nullopt).status());
  SKERRY_RETURN_IF_ERROR(GetStrategyStates(run_id).status());
  for (const IslandRecord& i : islands) {
    SKERRY_RETURN_IF_ERROR(
        GetGeneration(run_id, i.index, i.generation).status());
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<IslandRecord>> Store::GetIslands(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT idx, generation, done, ", SumMatches(kIslandSumColumns),
          " FROM islands WHERE run_id = ? ORDER BY idx")));
  s.BindInt(1, run_id);
  std::vector<IslandRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
    if (!row) break;
    IslandRecord r;
    r.run_id = run_id;
    r.index = static_cast<uint32_t>(s.ColumnInt(0));
    r.generation = static_cast<uint32_t>(s.ColumnInt(1));
    r.done = s.ColumnInt(2) != 0;
    if (s.ColumnInt(3) != 1) {
      return DamagedRow(run_id, absl::StrCat("island ", r.index));
    }
    out.push_back(r);
  }
  return out;
}

absl::StatusOr<std::map<uint32_t, std::string>> Store::GetStrategyStates(
    int64_t run_id) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn_->Prepare(absl::StrCat(
          "SELECT island, state, ", SumMatches(kStrategyStateSumColumns),
          " FROM strategy_states WHERE run_id = ? ORDER BY island")));
  s.BindInt(1, run_id);
  std::map<uint32_t, std::string> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
    if (!row) break;
    const auto island = static_cast<uint32_t>(s.ColumnInt(0));
    if (s.ColumnInt(2) != 1) {
      return DamagedRow(run_id,
                        absl::StrCat("island ", island, " strategy state"));
    }
    out[island] = s.ColumnBlob(1);
  }
  return out;
}

absl::StatusOr<std::vector<GenomeRecord>> Store::QueryGenomes(Connection* conn,
                                                              Statement* s,
                                                              Genes genes) {
  std::vector<GenomeRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(auto row, s->Step());
    if (!row) break;
    SKERRY_ASSIGN_OR_RETURN(auto g, ReadGenome(*s));
    out.push_back(std::move(g));
  }
  if (genes == Genes::kAll) {
    SKERRY_RETURN_IF_ERROR(RebuildSamples(conn, &out));
  }
  if (genes != Genes::kStored) {
    SKERRY_RETURN_IF_ERROR(RebuildChildren(conn, &out));
  }
  return out;
}

absl::Status Store::RebuildChildren(Connection* conn,
                                    std::vector<GenomeRecord>* genomes,
                                    const GeneCache* known) {
  bool any = false;
  for (const GenomeRecord& g : *genomes) {
    any = any || (g.child_recipe.has_value() && g.genes.empty());
  }
  if (!any) return absl::OkStatus();
  SKERRY_ASSIGN_OR_RETURN(Statement by_id, conn->PrepareCached(absl::StrCat(
                                               "SELECT ", GenomeColumns(),
                                               " FROM genomes WHERE id = ?")));
  const GenomeReader read =
      [&by_id](int64_t id) -> absl::StatusOr<std::optional<GenomeRecord>> {
    by_id.Reset();
    by_id.BindInt(1, id);
    SKERRY_ASSIGN_OR_RETURN(bool row, by_id.Step());
    if (!row) return std::optional<GenomeRecord>();
    SKERRY_ASSIGN_OR_RETURN(GenomeRecord g, ReadGenome(by_id));
    return std::optional<GenomeRecord>(std::move(g));
  };
  absl::Status rebuilt = store::RebuildChildren(read, genomes, known);
  // The run the genomes are of, when the caller read them so: where the
  // damage is (the message names the genome and its parent).
  const int64_t run = genomes->front().run_id;
  if (rebuilt.ok() || run == 0) return rebuilt;
  for (const GenomeRecord& g : *genomes) {
    if (g.run_id != run) return rebuilt;
  }
  return absl::Status(rebuilt.code(),
                      absl::StrCat("run ", run, ": ", rebuilt.message()));
}

absl::StatusOr<std::vector<std::string>> Store::CheckKeyframes(Connection* conn,
                                                               int64_t run_id,
                                                               int sample) {
  SKERRY_ASSIGN_OR_RETURN(
      Statement s,
      conn->Prepare(absl::StrCat(
          "SELECT ", GenomeColumns(), " FROM genomes WHERE run_id = ? AND ",
          IsChildRecipeSql("genes"), " AND length(genes) > ", kChildRecipeBytes,
          " ORDER BY generation, island, slot LIMIT ?")));
  s.BindInt(1, run_id);
  s.BindInt(2, sample);
  std::vector<std::string> problems;
  std::vector<GenomeRecord> kept;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    absl::StatusOr<GenomeRecord> g = ReadGenome(s);
    if (!g.ok()) {
      problems.push_back(std::string(g.status().message()));
      continue;
    }
    kept.push_back(*std::move(g));
  }
  // The stored genes set aside, the records rebuilt as if they had none.
  std::vector<std::vector<double>> stored;
  for (GenomeRecord& g : kept) stored.push_back(std::exchange(g.genes, {}));
  if (absl::Status r = RebuildChildren(conn, &kept); !r.ok()) {
    problems.push_back(std::string(r.message()));
    return problems;
  }
  for (size_t i = 0; i < kept.size(); ++i) {
    if (kept[i].genes != stored[i]) {
      problems.push_back(absl::StrCat(
          "island ", kept[i].island, " generation ", kept[i].generation,
          " slot ", kept[i].slot, " genome ", kept[i].id,
          ": replaying its recipe does not give its stored genes"));
    }
  }
  return problems;
}

absl::Status Store::RebuildSamples(Connection* conn,
                                   std::vector<GenomeRecord>* genomes) {
  // The distribution genomes at hand (a generation read whole has its own
  // at slot 0), then those read here, by id.
  absl::flat_hash_map<int64_t, const std::vector<double>*> centres;
  std::vector<std::unique_ptr<GenomeRecord>> read;
  for (const GenomeRecord& g : *genomes) {
    if (g.origin == skerry::v1::DISTRIBUTION) centres[g.id] = &g.genes;
  }
  std::optional<Statement> parent;
  for (GenomeRecord& g : *genomes) {
    if (!g.recipe.has_value() || !g.genes.empty()) continue;
    auto it = centres.find(g.parent_a);
    if (it == centres.end()) {
      if (!parent.has_value()) {
        SKERRY_ASSIGN_OR_RETURN(parent, conn->PrepareCached(absl::StrCat(
                                            "SELECT ", GenomeColumns(),
                                            " FROM genomes WHERE id = ?")));
      }
      parent->Reset();
      parent->BindInt(1, g.parent_a);
      SKERRY_ASSIGN_OR_RETURN(bool row, parent->Step());
      if (!row) {
        return absl::DataLossError(absl::StrCat(
            "genome ", g.id, ": its distribution genome #", g.parent_a,
            " is not in the database, so its genes cannot be rebuilt"));
      }
      SKERRY_ASSIGN_OR_RETURN(GenomeRecord p, ReadGenome(*parent));
      read.push_back(std::make_unique<GenomeRecord>(std::move(p)));
      it = centres.emplace(read.back()->id, &read.back()->genes).first;
      if (read.back()->origin != skerry::v1::DISTRIBUTION) {
        return absl::DataLossError(absl::StrCat(
            "genome ", g.id, ": its parent #", g.parent_a,
            " is not a distribution genome, so its genes cannot be rebuilt"));
      }
    }
    absl::StatusOr<std::vector<double>> genes =
        BuildSample(*g.recipe, *it->second);
    if (!genes.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", genes.status().message()));
    }
    g.genes = *std::move(genes);
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<GenomeRecord>> Store::GetGeneration(
    int64_t run_id, uint32_t island, uint32_t generation, Genes genes) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT ", GenomeColumns(),
          " FROM genomes WHERE run_id = ? AND island = ? AND generation = ? "
          "ORDER BY slot")));
  s.BindInt(1, run_id);
  s.BindInt(2, island);
  s.BindInt(3, generation);
  return QueryGenomes(reader.get(), &s, genes);
}

absl::StatusOr<GenomeRecord> Store::GetGenome(int64_t genome_id, Genes genes) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT ", GenomeColumns(), " FROM genomes WHERE id = ?")));
  s.BindInt(1, genome_id);
  SKERRY_ASSIGN_OR_RETURN(std::vector<GenomeRecord> rows,
                          QueryGenomes(reader.get(), &s, genes));
  if (rows.empty()) {
    return absl::NotFoundError(absl::StrCat(
        "genome ", static_cast<uint64_t>(genome_id), " not found"));
  }
  return std::move(rows.front());
}

absl::StatusOr<std::vector<StatsRecord>> Store::GetStats(
    int64_t run_id, std::optional<uint32_t> island) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT island, generation, best, mean, worst, "
                  "diversity, evaluations, failed, eval_seconds, "
                  "completed_ms, ",
                  SumMatches(kStatsSumColumns),
                  " FROM generation_stats WHERE run_id = ?1 AND "
                  "(?2 < 0 OR island = ?2) ORDER BY island, generation")));
  s.BindInt(1, run_id);
  s.BindInt(2, island.has_value() ? static_cast<int64_t>(*island) : -1);
  std::vector<StatsRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
    if (!row) break;
    StatsRecord r;
    r.run_id = run_id;
    r.island = static_cast<uint32_t>(s.ColumnInt(0));
    r.generation = static_cast<uint32_t>(s.ColumnInt(1));
    r.best = s.ColumnDouble(2);
    r.mean = s.ColumnDouble(3);
    r.worst = s.ColumnDouble(4);
    r.diversity = s.ColumnDouble(5);
    r.evaluations = static_cast<uint32_t>(s.ColumnInt(6));
    r.failed = static_cast<uint32_t>(s.ColumnInt(7));
    r.eval_seconds = s.ColumnDouble(8);
    r.completed_ms = s.ColumnInt(9);
    if (s.ColumnInt(10) != 1) {
      return DamagedRow(run_id,
                        absl::StrCat("island ", r.island, " generation ",
                                     r.generation, " statistics"));
    }
    out.push_back(r);
  }
  return out;
}

absl::StatusOr<std::optional<GenomeRecord>> Store::BestGenomeOn(
    Connection* conn, int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(auto run_s,
                          conn->Prepare("SELECT spec FROM runs WHERE id = ?"));
  run_s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(auto run_row, run_s.Step());
  if (!run_row)
    return absl::NotFoundError(
        absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  skerry::v1::RunSpec spec;
  if (!spec.ParseFromString(run_s.ColumnBlob(0))) {
    return absl::DataLossError(
        absl::StrCat("run ", run_id, ": stored spec does not parse"));
  }
  const bool maximize = spec.objective() == skerry::v1::MAXIMIZE;
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn->Prepare(absl::StrCat(
          "SELECT ", GenomeColumns(),
          " FROM genomes WHERE run_id = ? AND eval_state = 2 ORDER BY score ",
          maximize ? "DESC" : "ASC", ", generation, island, slot LIMIT 1")));
  s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(auto rows, QueryGenomes(conn, &s));
  if (rows.empty()) return std::optional<GenomeRecord>();
  return std::optional<GenomeRecord>(std::move(rows.front()));
}

absl::StatusOr<std::optional<GenomeRecord>> Store::BestGenome(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  return BestGenomeOn(reader.get(), run_id);
}

absl::StatusOr<int> Store::CountWorkersSeenSince(int64_t since_ms) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn_->Prepare("SELECT count(*) FROM workers WHERE last_seen_ms >= ?"));
  s.BindInt(1, since_ms);
  SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
  return row ? static_cast<int>(s.ColumnInt(0)) : 0;
}

absl::StatusOr<std::vector<GenomeRecord>> Store::FailedGenomes(int64_t run_id,
                                                               int limit) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT ", GenomeColumns(),
                  " FROM genomes WHERE run_id = ? AND eval_state = 3 "
                  "ORDER BY id DESC LIMIT ?")));
  s.BindInt(1, run_id);
  s.BindInt(2, limit);
  return QueryGenomes(reader.get(), &s, Genes::kStored);
}

absl::StatusOr<uint64_t> Store::CountFailed(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached("SELECT count(*) FROM genomes WHERE run_id = ? "
                            "AND eval_state = 3"));
  s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  return row ? static_cast<uint64_t>(s.ColumnInt(0)) : 0;
}

absl::StatusOr<Store::Digest> Store::RunDigest(int64_t run_id) {
  absl::StatusOr<Digest> d = RunDigestUnnamed(run_id);
  if (absl::IsDataLoss(d.status()) &&
      !absl::StartsWith(d.status().message(), absl::StrCat("run ", run_id))) {
    return absl::DataLossError(
        absl::StrCat("run ", run_id, " is damaged: ", d.status().message(),
                     "; `skerry-coordinator --check` lists the damage"));
  }
  return d;
}

absl::StatusOr<Store::Digest> Store::RunDigestUnnamed(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT g.island, g.generation, g.slot, g.origin, pa.island, "
          "pa.generation, pa.slot, pb.island, pb.generation, pb.slot, g.genes, "
          "g.eval_state, g.score, g.ok, g.id, g.origin, g.parent_a, "
          "g.parent_b FROM "
          "(SELECT *, ",
          SumMatches(kGenomeSumColumns),
          " AS ok FROM genomes WHERE run_id = ?1) g "
          "LEFT JOIN genomes pa ON pa.id = g.parent_a "
          "LEFT JOIN genomes pb ON pb.id = g.parent_b "
          "ORDER BY g.island, g.generation, g.slot")));
  s.BindInt(1, run_id);
  Sha256 h;
  Digest d;
  absl::flat_hash_map<int64_t, std::vector<double>> centres;
  DigestChildren children;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    if (s.ColumnInt(13) != 1) {
      return DamagedGenome(run_id, static_cast<uint32_t>(s.ColumnInt(0)),
                           static_cast<uint32_t>(s.ColumnInt(1)),
                           static_cast<uint32_t>(s.ColumnInt(2)),
                           s.ColumnInt(14));
    }
    for (int c = 0; c < 4; ++c)
      h.UpdateU32(static_cast<uint32_t>(s.ColumnInt(c)));
    for (int c = 4; c < 10; ++c) {
      h.UpdateU32(s.ColumnIsNull(c) ? 0xFFFFFFFFu
                                    : static_cast<uint32_t>(s.ColumnInt(c)));
    }
    // The float64 form, whichever encoding the row has (common/genes.h); a
    // sample kept as its recipe is hashed as the genes it rebuilds, so the
    // digest is that of the genomes evaluated, however they are stored.
    const std::string blob = s.ColumnBlob(10);
    if (s.ColumnInt(15) == skerry::v1::DISTRIBUTION) {
      centres.clear();  // one at a time: samples follow their own
      absl::StatusOr<std::vector<double>> c = UnpackGenes(blob);
      if (c.ok()) centres[s.ColumnInt(14)] = *std::move(c);
    }
    absl::StatusOr<std::string> genes =
        IsChildRecipe(blob)
            ? children.Bytes(reader.get(), s.ColumnInt(14), blob,
                             s.ColumnInt(16), s.ColumnInt(17),
                             static_cast<uint32_t>(s.ColumnInt(0)),
                             static_cast<uint32_t>(s.ColumnInt(1)))
        : IsRecipe(blob) ? SampleBytes(reader.get(), s.ColumnInt(14), blob,
                                       s.ColumnInt(16), &centres)
                         : Float64Bytes(blob);
    if (!genes.ok() && (IsChildRecipe(blob) || IsRecipe(blob))) {
      // A recipe that cannot be rebuilt (a parent missing, say): its own
      // reason, not a checksum's, with where it is.
      return absl::DataLossError(
          absl::StrCat("run ", run_id, " island ", s.ColumnInt(0),
                       " generation ", s.ColumnInt(1), " slot ", s.ColumnInt(2),
                       ": ", genes.status().message(),
                       "; `skerry-coordinator --check` lists the damage"));
    }
    if (!genes.ok()) {
      return DamagedGenome(run_id, static_cast<uint32_t>(s.ColumnInt(0)),
                           static_cast<uint32_t>(s.ColumnInt(1)),
                           static_cast<uint32_t>(s.ColumnInt(2)),
                           s.ColumnInt(14));
    }
    h.UpdateU32(static_cast<uint32_t>(genes->size() / 8));
    h.Update(*genes);
    h.UpdateU32(static_cast<uint32_t>(s.ColumnInt(11)));
    uint64_t bits = 0;
    if (!s.ColumnIsNull(12)) {
      const double score = s.ColumnDouble(12);
      std::memcpy(&bits, &score, 8);
    }
    h.UpdateU64(bits);
    ++d.genomes;
  }
  d.sha256 = h.FinishHex();
  return d;
}

}  // namespace skerry::store
