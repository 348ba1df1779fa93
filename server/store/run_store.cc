// RunStore (run_store.h): runs, islands, statistics and strategy states.
#include "server/store/run_store.h"

#include <algorithm>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/status_macros.h"
#include "server/store/genome_store.h"
#include "server/store/row_sums.h"
#include "server/store/validation_store.h"

namespace skerry::store {
namespace {

using skerry::v1::RunState;

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

}  // namespace

absl::Status RunStore::CreateRun(
    RunRecord* run, std::vector<GenomeRecord>* genomes,
    const std::vector<std::string>* strategy_states) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_RETURN_IF_ERROR(CreateRunIn(w, run, genomes, strategy_states));
  return txn.Commit();
}

absl::Status RunStore::InsertRunRow(Database::Writer& w, RunRecord* run,
                                    int64_t parent_run,
                                    uint32_t parent_generation,
                                    int64_t evaluations) {
  SKERRY_ASSIGN_OR_RETURN(const int64_t largest, Database::LargestRunId(w));
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      w->Prepare(
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
  run->id = w->LastInsertId();
  run->parent_run = parent_run;
  run->parent_generation = parent_generation;
  run->evaluations = evaluations;
  return absl::OkStatus();
}

absl::Status RunStore::InsertStrategyStates(
    Database::Writer& w, int64_t run_id, uint32_t count, uint32_t generation,
    const std::vector<std::string>* states) {
  SKERRY_ASSIGN_OR_RETURN(
      auto st, w->Prepare("INSERT INTO strategy_states (run_id, island, "
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

absl::Status RunStore::CreateRunIn(
    Database::Writer& w, RunRecord* run, std::vector<GenomeRecord>* genomes,
    const std::vector<std::string>* strategy_states) {
  SKERRY_RETURN_IF_ERROR(InsertRunRow(w, run, 0, 0, 0));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto isl, w->Prepare("INSERT INTO islands (run_id, idx, generation, "
                             "done) VALUES (?, ?, 0, 0)"));
    const uint32_t count = std::max<uint32_t>(1, run->spec.islands().count());
    for (uint32_t i = 0; i < count; ++i) {
      isl.BindInt(1, run->id);
      isl.BindInt(2, i);
      SKERRY_RETURN_IF_ERROR(isl.Run());
    }
    SKERRY_RETURN_IF_ERROR(
        InsertStrategyStates(w, run->id, count, 0, strategy_states));
  }
  for (GenomeRecord& g : *genomes) g.run_id = run->id;
  return GenomeStore::Insert(w, genomes);
}

absl::Status RunStore::InsertStats(Database::Writer& w, const StatsRecord& s) {
  SKERRY_ASSIGN_OR_RETURN(
      auto ins, w->Prepare("INSERT OR REPLACE INTO generation_stats (run_id, "
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

absl::Status RunStore::CommitGeneration(const GenerationCommit& c) {
  Database::Writer w = db_->Write();
  // Not synced (see "Pragmas" in database.h): a generation is never
  // acknowledged to anyone, can be bred again from the one before, and the next
  // synced commit makes it durable, since the WAL is synced in order.
  SKERRY_RETURN_IF_ERROR(w->Exec("PRAGMA synchronous=NORMAL"));
  absl::Status s = CommitGenerationIn(w, c);
  absl::Status restore = w->Exec("PRAGMA synchronous=FULL");
  return s.ok() ? restore : s;
}

absl::Status RunStore::CommitGenerationIn(Database::Writer& w,
                                          const GenerationCommit& c) {
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_RETURN_IF_ERROR(InsertStats(w, c.completed));
  uint32_t generation = c.completed.generation;
  if (c.next != nullptr && !c.next->empty()) {
    generation = c.next->front().generation;
    SKERRY_RETURN_IF_ERROR(GenomeStore::Insert(w, c.next));
  }
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto upd, w->Prepare("UPDATE islands SET generation = ?, done = ? "
                             "WHERE run_id = ? AND idx = ?"));
    upd.BindInt(1, generation);
    upd.BindInt(2, c.island_done ? 1 : 0);
    upd.BindInt(3, c.run_id);
    upd.BindInt(4, c.island);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  if (c.strategy_state.has_value()) {
    SKERRY_ASSIGN_OR_RETURN(
        auto st, w->Prepare("INSERT OR REPLACE INTO strategy_states (run_id, "
                            "island, generation, state) VALUES (?, ?, ?, ?)"));
    st.BindInt(1, c.run_id);
    st.BindInt(2, c.island);
    st.BindInt(3, generation);
    st.BindBlob(4, *c.strategy_state);
    SKERRY_RETURN_IF_ERROR(st.Run());
  }
  if (c.champion.has_value()) {
    SKERRY_ASSIGN_OR_RETURN(
        auto upd, w->Prepare("UPDATE runs SET champion_id = ?, best_score = ? "
                             "WHERE id = ?"));
    upd.BindInt(1, c.champion->first);
    upd.BindDouble(2, c.champion->second);
    upd.BindInt(3, c.run_id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  if (c.champion_genome != nullptr) {
    SKERRY_RETURN_IF_ERROR(GenomeStore::KeepWhole(w, *c.champion_genome));
  }
  if (c.validate.has_value()) {
    SKERRY_RETURN_IF_ERROR(ValidationStore::Request(w, *c.validate).status());
  }
  if (c.stop_generation.has_value()) {
    SKERRY_ASSIGN_OR_RETURN(auto upd,
                            w->Prepare("UPDATE runs SET stop_generation = "
                                       "min(coalesce(stop_generation, ?1), ?1) "
                                       "WHERE id = ?2"));
    upd.BindInt(1, *c.stop_generation);
    upd.BindInt(2, c.run_id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  return txn.Commit();
}

absl::Status RunStore::SetRunState(int64_t run_id, RunState state,
                                   const std::string& message, int64_t now_ms) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto upd,
                          w->Prepare("UPDATE runs SET state = ?, message = ?, "
                                     "updated_ms = ? WHERE id = ?"));
  upd.BindInt(1, state);
  upd.BindText(2, message);
  upd.BindInt(3, now_ms);
  upd.BindInt(4, run_id);
  SKERRY_RETURN_IF_ERROR(upd.Run());
  if (w->Changes() != 1) {
    return absl::NotFoundError(
        absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  }
  return absl::OkStatus();
}

absl::Status RunStore::SetRunStarted(int64_t run_id, int64_t now_ms) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, w->Prepare("UPDATE runs SET started_ms = ?, updated_ms = ? "
                           "WHERE id = ? AND started_ms = 0"));
  upd.BindInt(1, now_ms);
  upd.BindInt(2, now_ms);
  upd.BindInt(3, run_id);
  return upd.Run();
}

absl::Status RunStore::SetRunPriority(int64_t run_id, int32_t priority,
                                      int64_t now_ms) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, w->Prepare("UPDATE runs SET priority = ?, updated_ms = ? "
                           "WHERE id = ?"));
  upd.BindInt(1, priority);
  upd.BindInt(2, now_ms);
  upd.BindInt(3, run_id);
  SKERRY_RETURN_IF_ERROR(upd.Run());
  if (w->Changes() != 1) {
    return absl::NotFoundError(
        absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  }
  return absl::OkStatus();
}

absl::Status RunStore::FinishRun(int64_t run_id, RunState state,
                                 const std::string& message,
                                 std::optional<uint32_t> keep_through,
                                 int64_t now_ms) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  if (keep_through.has_value()) {
    // The trimmed genomes' ids (and their tasks' ids) are not given again.
    SKERRY_RETURN_IF_ERROR(Database::RaiseIdFloors(w));
    for (const char* sql :
         {"DELETE FROM genome_metrics WHERE run_id = ?1 AND genome_id IN "
          "(SELECT id FROM genomes WHERE run_id = ?1 AND generation > ?2)",
          "DELETE FROM genomes WHERE run_id = ?1 AND generation > ?2",
          "DELETE FROM generation_stats WHERE run_id = ?1 AND generation > ?2",
          "DELETE FROM validations WHERE run_id = ?1 AND generation > ?2",
          "UPDATE islands SET generation = min(generation, ?2) WHERE run_id = "
          "?1",
          "UPDATE runs SET stop_generation = ?2 WHERE id = ?1"}) {
      SKERRY_ASSIGN_OR_RETURN(auto st, w->Prepare(sql));
      st.BindInt(1, run_id);
      st.BindInt(2, *keep_through);
      SKERRY_RETURN_IF_ERROR(st.Run());
    }
  }
  {
    // An ended run has no live island (skerry-coordinator --check).
    SKERRY_ASSIGN_OR_RETURN(
        auto st, w->Prepare("UPDATE islands SET done = 1 WHERE run_id = ?1"));
    st.BindInt(1, run_id);
    SKERRY_RETURN_IF_ERROR(st.Run());
  }
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto st, w->Prepare("UPDATE runs SET evaluations = (SELECT count(*) "
                            "FROM genomes WHERE run_id = ?1 AND attempts > 0 "
                            "AND eval_state IN (2, 3)) WHERE id = ?1"));
    st.BindInt(1, run_id);
    SKERRY_RETURN_IF_ERROR(st.Run());
  }
  SKERRY_ASSIGN_OR_RETURN(auto best,
                          GenomeStore::BestGenomeOn(w.conn(), run_id));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto upd, w->Prepare("UPDATE runs SET state = ?, message = ?, "
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

absl::StatusOr<std::vector<RunRecord>> RunStore::ListRuns() {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
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

absl::StatusOr<std::optional<int64_t>> RunStore::FindRunByRequest(
    const std::string& owner, const std::string& request_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached("SELECT id FROM runs WHERE owner = ? AND "
                                    "request_id = ?"));
  s.BindText(1, owner);
  s.BindText(2, request_id);
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row) return std::optional<int64_t>();
  return std::optional<int64_t>(s.ColumnInt(0));
}

absl::StatusOr<RunRecord> RunStore::GetRun(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
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

absl::StatusOr<std::vector<IslandRecord>> RunStore::GetIslands(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
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

absl::StatusOr<std::map<uint32_t, std::string>> RunStore::GetStrategyStates(
    int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
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

absl::StatusOr<std::vector<StatsRecord>> RunStore::GetStats(
    int64_t run_id, std::optional<uint32_t> island) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
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

}  // namespace skerry::store
