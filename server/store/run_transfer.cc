// RunStore::ImportRuns (run_store.h): the runs of another coordinator's
// database file, exported with `skerry backup`, merged into this one.
//
// The file is checked before anything is written: it must be a Skerry
// database of this schema version, pass SQLite's quick_check, have this
// version's schema, and every row must match its checksum (schema 6). A fork
// whose parent run the file does not hold is refused: its first generation
// links to genomes the file does not have (export the whole database instead).
//
// Ids are remapped by offsets: every run, genome and validation id of the file
// is raised past the largest id of its table here, and every link (parent
// links, champion, parent run, a validation's genome and copy source, metric
// rows) by the same offset, so links inside the file stay links. The new rows
// get their checksums from the insert triggers. One transaction.
#include "server/store/run_transfer.h"

#include <memory>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "common/status_macros.h"
#include "server/store/check.h"
#include "server/store/owner_lock.h"
#include "server/store/store.h"

namespace skerry::store {
namespace {

absl::StatusOr<int64_t> One(Connection* c, const std::string& sql) {
  SKERRY_ASSIGN_OR_RETURN(Statement s, c->Prepare(sql));
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  return row && !s.ColumnIsNull(0) ? s.ColumnInt(0) : 0;
}

// Everything that can be said about the file without writing anything.
absl::Status CheckFile(const std::string& file) {
  SKERRY_ASSIGN_OR_RETURN(auto src,
                          Connection::Open(file, SQLITE_OPEN_READONLY));
  SKERRY_ASSIGN_OR_RETURN(int64_t has_version,
                          One(src.get(),
                              "SELECT count(*) FROM sqlite_master WHERE type = "
                              "'table' AND name = 'schema_version'"));
  if (has_version == 0) {
    return absl::FailedPreconditionError(
        "not a Skerry database (no schema_version table)");
  }
  {
    SKERRY_ASSIGN_OR_RETURN(Statement q, src->Prepare("PRAGMA quick_check"));
    SKERRY_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row || q.ColumnText(0) != "ok") {
      return absl::DataLossError(
          absl::StrCat("the file is damaged: SQLite's quick_check says ",
                       row ? q.ColumnText(0) : std::string("nothing")));
    }
  }
  SKERRY_ASSIGN_OR_RETURN(
      int64_t version,
      One(src.get(), "SELECT max(version) FROM schema_version"));
  if (version > Database::kSchemaVersion) {
    return absl::FailedPreconditionError(absl::StrCat(
        "the file's schema version ", version,
        " is newer than this program's version ", Database::kSchemaVersion,
        "; import it with a newer Skerry"));
  }
  if (version < Database::kSchemaVersion) {
    return absl::FailedPreconditionError(absl::StrCat(
        "the file's schema version ", version,
        " is older than this program's version ", Database::kSchemaVersion,
        "; start a skerry-coordinator of this version on a copy of it once "
        "(it migrates the file), then import the copy"));
  }
  if (absl::Status s = VerifySchema(src.get()); !s.ok()) {
    return absl::DataLossError(
        absl::StrCat("the file is damaged: ", s.message()));
  }
  if (absl::Status s = VerifyRowSums(src.get(), 0); !s.ok()) {
    return absl::DataLossError(
        absl::StrCat("the file is damaged: ", s.message()));
  }
  // A fork needs its parent: its first generation links into it.
  SKERRY_ASSIGN_OR_RETURN(
      Statement orphans,
      src->Prepare("SELECT f.id, f.parent_run FROM runs f WHERE f.parent_run "
                   "IS NOT NULL AND NOT EXISTS (SELECT 1 FROM runs p WHERE "
                   "p.id = f.parent_run) ORDER BY f.id LIMIT 1"));
  SKERRY_ASSIGN_OR_RETURN(bool orphan, orphans.Step());
  if (orphan) {
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", orphans.ColumnInt(0), " of the file is a fork of run ",
        orphans.ColumnInt(1),
        ", which the file does not hold: its first generation links to "
        "genomes of that run. Export both (`skerry backup all`), or import "
        "it into a coordinator started on the file itself"));
  }
  return absl::OkStatus();
}

}  // namespace

absl::StatusOr<RunStore::Imported> RunStore::ImportRuns(
    const std::string& file) {
  auto named = [&file](const absl::Status& s) {
    return absl::Status(s.code(), absl::StrCat(file, ": ", s.message()));
  };
  if (absl::Status s = CheckFile(file); !s.ok()) return named(s);
  Database::Writer w = db_->Write();
  {
    // Finalised before the DETACH below, which an open statement would block.
    SKERRY_ASSIGN_OR_RETURN(Statement attach,
                            w->Prepare("ATTACH ? AS import_src"));
    attach.BindText(1, file);
    SKERRY_RETURN_IF_ERROR(attach.Run());
  }
  Imported out;
  absl::Status copied = [&]() -> absl::Status {
    SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
    // Above every run id ever given, a deleted one's included.
    SKERRY_ASSIGN_OR_RETURN(int64_t run_off, Database::LargestRunId(w));
    SKERRY_ASSIGN_OR_RETURN(
        int64_t genome_off,
        Database::LargestId(w, Database::IdTable::kGenomes));
    SKERRY_ASSIGN_OR_RETURN(
        int64_t validation_off,
        Database::LargestId(w, Database::IdTable::kValidations));
    // ?1 the run offset, ?2 the genome offset, ?3 the validation offset.
    // request_id is dropped: it is unique per owner on this coordinator.
    const char* kCopies[] = {
        "INSERT INTO main.runs (id, name, owner, spec, spec_text, seed, state, "
        "priority, message, created_ms, updated_ms, started_ms, parent_run, "
        "parent_generation, evaluations, champion_id, best_score, "
        "stop_generation) SELECT id + ?1, name, owner, spec, spec_text, seed, "
        "state, priority, message, created_ms, updated_ms, started_ms, "
        "parent_run + ?1, parent_generation, evaluations, champion_id + ?2, "
        "best_score, stop_generation FROM import_src.runs ORDER BY id",
        "INSERT INTO main.islands (run_id, idx, generation, done) SELECT "
        "run_id + ?1, idx, generation, done FROM import_src.islands",
        "INSERT INTO main.genomes (id, run_id, island, generation, slot, "
        "origin, parent_a, parent_b, genes, score, eval_state, attempts, "
        "error, eval_seconds) SELECT id + ?2, run_id + ?1, island, "
        "generation, slot, origin, parent_a + ?2, parent_b + ?2, genes, "
        "score, eval_state, attempts, error, eval_seconds FROM "
        "import_src.genomes ORDER BY id",
        "INSERT INTO main.generation_stats (run_id, island, generation, best, "
        "mean, worst, diversity, evaluations, failed, eval_seconds, "
        "completed_ms) SELECT run_id + ?1, island, generation, best, mean, "
        "worst, diversity, evaluations, failed, eval_seconds, completed_ms "
        "FROM import_src.generation_stats",
        "INSERT INTO main.validations (id, run_id, genome_id, generation, "
        "reason, state, score, cases, attempts, error, requested_by, "
        "requested_ms, completed_ms, copied_from) SELECT id + ?3, run_id + "
        "?1, genome_id + ?2, generation, reason, state, score, cases, "
        "attempts, error, requested_by, requested_ms, completed_ms, "
        "copied_from + ?3 FROM import_src.validations ORDER BY id",
        "INSERT INTO main.genome_metrics (run_id, genome_id, name, value) "
        "SELECT run_id + ?1, genome_id + ?2, name, value FROM "
        "import_src.genome_metrics",
        "INSERT INTO main.strategy_states (run_id, island, generation, state) "
        "SELECT run_id + ?1, island, generation, state FROM "
        "import_src.strategy_states",
    };
    for (const char* sql : kCopies) {
      SKERRY_ASSIGN_OR_RETURN(Statement st, w->Prepare(sql));
      // Every bind is checked (sqlite.h): bind only the offsets used.
      const int64_t offsets[] = {run_off, genome_off, validation_off};
      for (int i = 0; i < 3; ++i) {
        if (absl::StrContains(sql, absl::StrCat("?", i + 1))) {
          st.BindInt(i + 1, offsets[i]);
        }
      }
      SKERRY_RETURN_IF_ERROR(st.Run());
    }
    SKERRY_ASSIGN_OR_RETURN(
        Statement ids,
        w->Prepare("SELECT id FROM import_src.runs ORDER BY id"));
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, ids.Step());
      if (!row) break;
      out.runs.emplace_back(ids.ColumnInt(0), ids.ColumnInt(0) + run_off);
    }
    SKERRY_ASSIGN_OR_RETURN(
        int64_t genomes,
        One(w.conn(), "SELECT count(*) FROM import_src.genomes"));
    out.genomes = static_cast<uint64_t>(genomes);
    return txn.Commit();
  }();
  w->Exec("DETACH import_src").IgnoreError();
  if (!copied.ok()) return named(copied);
  return out;
}

absl::StatusOr<std::string> ImportIntoDatabase(const std::string& db_path,
                                               const std::string& file) {
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<OwnerLock> owner,
                          OwnerLock::Acquire(db_path));
  Store::Options open;
  open.initialise_empty_file = owner->created();
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<Store> store,
                          Store::Open(db_path, open));
  SKERRY_ASSIGN_OR_RETURN(RunStore::Imported imported,
                          store->runs().ImportRuns(file));
  std::vector<std::string> runs;
  for (const auto& [from, to] : imported.runs) {
    runs.push_back(absl::StrCat("run ", from, " as run ", to));
  }
  return absl::StrCat("imported ",
                      runs.empty() ? "no run" : absl::StrJoin(runs, ", "), " (",
                      imported.genomes, " genomes) from ", file, "\n");
}

}  // namespace skerry::store
