// RunStore::DeleteRun (run_store.h): every row of an ended run, in one
// transaction, then the freed pages given back to the file system.
//
// A run's membership of a seed series goes with it, and a series left
// empty. Refused while the run is active (the engine holds it in memory) and
// while a fork of it exists: a fork's first generation links to this run's
// genomes (fork_store.cc), and deleting them would leave its lineage dangling.
// Audit rows naming the run stay: the audit log is the history of who did what.
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "common/status_macros.h"
#include "server/store/run_content.h"
#include "server/store/run_store.h"

namespace skerry::store {
namespace {

bool Ended(int64_t state) {
  return state == skerry::v1::FINISHED || state == skerry::v1::STOPPED ||
         state == skerry::v1::FAILED_RUN;
}

}  // namespace

absl::StatusOr<RunStore::Deleted> RunStore::DeleteRun(
    int64_t run_id, const std::string& expected_content) {
  Database::Writer w = db_->Write();
  Deleted out;
  {
    SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
    {
      // The state column is read without the checksum: a damaged run may be
      // deleted too (that is one way out of damage).
      SKERRY_ASSIGN_OR_RETURN(
          auto q, w->Prepare("SELECT state FROM runs WHERE id = ?1"));
      q.BindInt(1, run_id);
      SKERRY_ASSIGN_OR_RETURN(bool found, q.Step());
      if (!found) {
        return absl::NotFoundError(absl::StrCat("run ", run_id, " not found"));
      }
      const int64_t state = q.ColumnInt(0);
      if (!Ended(state)) {
        return absl::FailedPreconditionError(absl::StrCat(
            "run ", run_id, " is ",
            skerry::v1::RunState_Name(static_cast<skerry::v1::RunState>(state)),
            "; stop it first (`skerry stop ", run_id, "`), then delete it"));
      }
    }
    {
      SKERRY_ASSIGN_OR_RETURN(
          auto q, w->Prepare("SELECT id FROM runs WHERE parent_run = ?1 "
                             "ORDER BY id LIMIT 20"));
      q.BindInt(1, run_id);
      std::vector<int64_t> forks;
      while (true) {
        SKERRY_ASSIGN_OR_RETURN(bool row, q.Step());
        if (!row) break;
        forks.push_back(q.ColumnInt(0));
      }
      if (!forks.empty()) {
        return absl::FailedPreconditionError(absl::StrCat(
            "run ", run_id, " has forks (run", forks.size() > 1 ? "s " : " ",
            absl::StrJoin(forks, ", "),
            ") whose lineage leads into its genomes; delete them first"));
      }
    }
    if (!expected_content.empty()) {
      // In the delete's own transaction: nothing can change in between.
      SKERRY_ASSIGN_OR_RETURN(std::string now,
                              RunContentDigest(w.conn(), run_id));
      if (now != expected_content) {
        return absl::FailedPreconditionError(absl::StrCat(
            "run ", run_id,
            " changed since it was exported (its content digest is now ",
            now.substr(0, 12), "..., the export's ",
            expected_content.substr(0, 12),
            "...); nothing deleted: archive it again"));
      }
    }
    {
      SKERRY_ASSIGN_OR_RETURN(
          auto q, w->Prepare("SELECT count(*) FROM genomes WHERE run_id = ?1"));
      q.BindInt(1, run_id);
      SKERRY_ASSIGN_OR_RETURN(bool row, q.Step());
      if (row) out.genomes = static_cast<uint64_t>(q.ColumnInt(0));
    }
    // The run's ids (and its genomes' task ids) are not given again.
    SKERRY_RETURN_IF_ERROR(Database::RaiseIdFloors(w));
    for (const char* sql : {"DELETE FROM genome_metrics WHERE run_id = ?1",
                            "DELETE FROM strategy_states WHERE run_id = ?1",
                            "DELETE FROM validations WHERE run_id = ?1",
                            "DELETE FROM genomes WHERE run_id = ?1",
                            "DELETE FROM generation_stats WHERE run_id = ?1",
                            "DELETE FROM islands WHERE run_id = ?1",
                            // Its place in a seed series (series_store.h); a
                            // series left with no run goes too.
                            "DELETE FROM series_runs WHERE run_id = ?1",
                            "DELETE FROM series WHERE id NOT IN (SELECT "
                            "series_id FROM series_runs)",
                            "DELETE FROM runs WHERE id = ?1"}) {
      SKERRY_ASSIGN_OR_RETURN(auto st, w->Prepare(sql));
      // Every bind is checked (sqlite.h): bind only where there is a ?1.
      if (absl::string_view(sql).find("?1") != absl::string_view::npos) {
        st.BindInt(1, run_id);
      }
      SKERRY_RETURN_IF_ERROR(st.Run());
    }
    SKERRY_RETURN_IF_ERROR(txn.Commit());
  }
  // Outside the transaction: the rows are gone whatever happens here. With
  // auto_vacuum=NONE (a file made before this version) it does nothing, and
  // the free pages are reused by later rows instead.
  auto pages = [&w]() -> absl::StatusOr<int64_t> {
    SKERRY_ASSIGN_OR_RETURN(auto q, w->Prepare("PRAGMA page_count"));
    SKERRY_ASSIGN_OR_RETURN(bool row, q.Step());
    return row ? q.ColumnInt(0) : 0;
  };
  // The deletion is committed, so its answer is OK whatever the vacuum
  // meets: a failed vacuum gives nothing back now (bytes_freed 0), and the
  // next one gives back every free page, these too.
  auto vacuum = [&]() -> absl::StatusOr<uint64_t> {
    SKERRY_ASSIGN_OR_RETURN(int64_t before, pages());
    SKERRY_RETURN_IF_ERROR(w->Exec("PRAGMA incremental_vacuum"));
    SKERRY_ASSIGN_OR_RETURN(int64_t after, pages());
    SKERRY_ASSIGN_OR_RETURN(auto size, w->Prepare("PRAGMA page_size"));
    SKERRY_ASSIGN_OR_RETURN(bool size_row, size.Step());
    const int64_t page_size = size_row ? size.ColumnInt(0) : 0;
    return before > after ? static_cast<uint64_t>((before - after) * page_size)
                          : 0;
  };
  absl::StatusOr<uint64_t> freed = vacuum();
  out.bytes_freed = freed.ok() ? *freed : 0;
  return out;
}

}  // namespace skerry::store
