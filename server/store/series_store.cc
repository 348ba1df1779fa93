// Seed series and run extension in the store (schema version 9). See
// series_store.h and the Store methods' comments in store.h.
#include "server/store/series_store.h"

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/row_sums.h"
#include "server/store/run_store.h"

namespace skerry::store {
namespace {

// The most series names UnusedSeriesName tries before giving up.
constexpr int kMaxNameTries = 1000;

bool TableExists(Connection* conn, const char* name) {
  absl::StatusOr<Statement> s = conn->Prepare(
      "SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = ?1");
  if (!s.ok()) return false;
  s->BindText(1, name);
  absl::StatusOr<bool> row = s->Step();
  return row.ok() && *row && s->ColumnInt(0) > 0;
}

}  // namespace

std::string SchemaSeries() {
  // Triggers as SchemaV6()'s: sum = skerry_row_sum(columns) on every insert
  // and every update of a hashed column.
  auto triggers = [](const char* table, const char* columns, const char* key) {
    const std::string set =
        absl::StrCat("UPDATE ", table, " SET sum = skerry_row_sum(", columns,
                     ") WHERE ", key, "; END;\n");
    return absl::StrCat(
        "CREATE TRIGGER ", table, "_sum_insert AFTER INSERT ON ", table,
        " BEGIN ", set, "CREATE TRIGGER ", table,
        "_sum_update AFTER UPDATE OF ", columns, " ON ", table, " BEGIN ", set);
  };
  return absl::StrCat(
      R"sql(
CREATE TABLE series (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL UNIQUE,
  owner TEXT NOT NULL,
  created_ms INTEGER NOT NULL,
  request_id TEXT,
  sum INTEGER
);
CREATE UNIQUE INDEX series_request ON series (owner, request_id)
  WHERE request_id IS NOT NULL;
CREATE TABLE series_runs (
  run_id INTEGER PRIMARY KEY,
  series_id INTEGER NOT NULL,
  position INTEGER NOT NULL,
  seed INTEGER NOT NULL,
  sum INTEGER
);
CREATE INDEX series_runs_series ON series_runs (series_id, position);
)sql",
      triggers("series", kSeriesSumColumns, "id = NEW.id"),
      triggers("series_runs", kSeriesRunSumColumns, "run_id = NEW.run_id"));
}

absl::Status CheckSeriesRows(Connection* conn,
                             std::vector<std::string>* problems) {
  if (!TableExists(conn, "series")) return absl::OkStatus();
  const std::string queries[] = {
      absl::StrCat("SELECT 'series ' || quote(name) || ': series row does not "
                   "match its checksum (damaged)' FROM series WHERE sum IS NOT "
                   "skerry_row_sum(",
                   kSeriesSumColumns, ") LIMIT 20"),
      absl::StrCat("SELECT 'run ' || run_id || ': series membership row does "
                   "not match its checksum (damaged)' FROM series_runs WHERE "
                   "sum IS NOT skerry_row_sum(",
                   kSeriesRunSumColumns, ") LIMIT 20"),
      "SELECT 'run ' || m.run_id || ': member of series ' || m.series_id || "
      "' but no such run' FROM series_runs m WHERE NOT EXISTS (SELECT 1 FROM "
      "runs r WHERE r.id = m.run_id) LIMIT 20",
      "SELECT 'run ' || m.run_id || ': member of series ' || m.series_id || "
      "', which does not exist' FROM series_runs m WHERE NOT EXISTS (SELECT 1 "
      "FROM series s WHERE s.id = m.series_id) LIMIT 20",
  };
  for (const std::string& q : queries) {
    SKERRY_ASSIGN_OR_RETURN(Statement s, conn->Prepare(q));
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
      if (!row) break;
      problems->push_back(s.ColumnText(0));
    }
  }
  return absl::OkStatus();
}

absl::Status RunStore::CreateSeries(
    SeriesRecord* series, std::vector<RunRecord>* runs,
    std::vector<std::vector<GenomeRecord>>* genomes,
    const std::vector<std::vector<std::string>>* strategy_states) {
  if (runs->size() != genomes->size() ||
      runs->size() != series->members.size()) {
    return absl::InternalError(
        "CreateSeries: runs, genomes and members differ");
  }
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  {
    SKERRY_ASSIGN_OR_RETURN(auto taken,
                            w->Prepare("SELECT 1 FROM series WHERE name = ?"));
    taken.BindText(1, series->name);
    SKERRY_ASSIGN_OR_RETURN(bool row, taken.Step());
    if (row) {
      return absl::AlreadyExistsError(
          absl::StrCat("a series named '", series->name,
                       "' exists already; choose another name"));
    }
  }
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto ins, w->Prepare("INSERT INTO series (name, owner, created_ms, "
                             "request_id) VALUES (?, ?, ?, ?)"));
    ins.BindText(1, series->name);
    ins.BindText(2, series->owner);
    ins.BindInt(3, series->created_ms);
    if (series->request_id.empty()) {
      ins.BindNull(4);
    } else {
      ins.BindText(4, series->request_id);
    }
    SKERRY_RETURN_IF_ERROR(ins.Run());
    series->id = w->LastInsertId();
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto member, w->Prepare("INSERT INTO series_runs (run_id, series_id, "
                              "position, seed) VALUES (?, ?, ?, ?)"));
  for (size_t i = 0; i < runs->size(); ++i) {
    SKERRY_RETURN_IF_ERROR(
        CreateRunIn(w, &(*runs)[i], &(*genomes)[i],
                    strategy_states != nullptr && i < strategy_states->size()
                        ? &(*strategy_states)[i]
                        : nullptr));
    series->members[i].first = (*runs)[i].id;
    member.Reset();
    member.BindInt(1, (*runs)[i].id);
    member.BindInt(2, series->id);
    member.BindInt(3, static_cast<int64_t>(i));
    member.BindInt(4, static_cast<int64_t>(series->members[i].second));
    SKERRY_RETURN_IF_ERROR(member.Run());
  }
  return txn.Commit();
}

absl::StatusOr<std::vector<std::pair<int64_t, uint64_t>>>
RunStore::SeriesMembers(Connection* conn, int64_t series_id) {
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn->PrepareCached(absl::StrCat(
          "SELECT run_id, seed, sum IS skerry_row_sum(", kSeriesRunSumColumns,
          ") FROM series_runs WHERE series_id = ? ORDER BY position")));
  s.BindInt(1, series_id);
  std::vector<std::pair<int64_t, uint64_t>> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    if (s.ColumnInt(2) != 1) {
      return DamagedRow(s.ColumnInt(0), "series membership row");
    }
    out.emplace_back(s.ColumnInt(0), static_cast<uint64_t>(s.ColumnInt(1)));
  }
  return out;
}

absl::StatusOr<std::optional<SeriesRecord>> RunStore::FindSeriesByRequest(
    const std::string& owner, const std::string& request_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT id, name, created_ms, sum IS skerry_row_sum(",
                  kSeriesSumColumns,
                  ") FROM series WHERE owner = ? AND request_id = ?")));
  s.BindText(1, owner);
  s.BindText(2, request_id);
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row) return std::optional<SeriesRecord>();
  SeriesRecord r;
  r.id = s.ColumnInt(0);
  r.name = s.ColumnText(1);
  r.created_ms = s.ColumnInt(2);
  r.owner = owner;
  r.request_id = request_id;
  if (s.ColumnInt(3) != 1) {
    return absl::DataLossError(
        absl::StrCat("series '", r.name,
                     "': its row does not match its checksum (damaged)"));
  }
  s = Statement();
  SKERRY_ASSIGN_OR_RETURN(r.members, SeriesMembers(reader.get(), r.id));
  return std::optional<SeriesRecord>(std::move(r));
}

absl::StatusOr<std::string> RunStore::UnusedSeriesName(
    const std::string& base) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached("SELECT 1 FROM series WHERE name = ?"));
  for (int n = 1; n <= kMaxNameTries; ++n) {
    std::string name = n == 1 ? base : absl::StrCat(base, "-", n);
    s.Reset();
    s.BindText(1, name);
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) return name;
  }
  return absl::AlreadyExistsError(
      absl::StrCat("series names '", base, "' to '", base, "-", kMaxNameTries,
                   "' are all taken; choose a name"));
}

absl::StatusOr<std::map<int64_t, std::string>> RunStore::SeriesOfRuns() {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT m.run_id, s.name, (m.sum IS skerry_row_sum(m.run_id, "
          "m.series_id, m.position, m.seed)) AND (s.sum IS "
          "skerry_row_sum(s.id, "
          "s.name, s.owner, s.created_ms, s.request_id)) FROM series_runs m "
          "JOIN series s ON s.id = m.series_id")));
  std::map<int64_t, std::string> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    if (s.ColumnInt(2) != 1) {
      return DamagedRow(s.ColumnInt(0), "series row or membership row");
    }
    out[s.ColumnInt(0)] = s.ColumnText(1);
  }
  return out;
}

absl::StatusOr<std::string> RunStore::SeriesOfRun(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(auto all, SeriesOfRuns());
  auto it = all.find(run_id);
  return it == all.end() ? std::string() : it->second;
}

absl::Status RunStore::ExtendRun(int64_t run_id,
                                 const skerry::v1::RunSpec& spec,
                                 int64_t now_ms,
                                 const std::vector<std::string>& states) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto s,
        w->Prepare(absl::StrCat("SELECT state, sum IS skerry_row_sum(",
                                kRunSumColumns, ") FROM runs WHERE id = ?")));
    s.BindInt(1, run_id);
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) return absl::NotFoundError(absl::StrCat("no run ", run_id));
    if (s.ColumnInt(1) != 1) return DamagedRun(run_id);
    const auto state = static_cast<skerry::v1::RunState>(s.ColumnInt(0));
    if (state != skerry::v1::FINISHED && state != skerry::v1::STOPPED) {
      return absl::FailedPreconditionError(
          absl::StrCat("run ", run_id, " is ", skerry::v1::RunState_Name(state),
                       "; only a FINISHED or STOPPED run can be extended"));
    }
  }
  const std::string statements[] = {
      "UPDATE runs SET spec = ?2, state = ?3, message = '', stop_generation = "
      "NULL, started_ms = ?4, updated_ms = ?4 WHERE id = ?1",
      "DELETE FROM generation_stats WHERE run_id = ?1 AND (island, generation) "
      "IN (SELECT idx, generation FROM islands WHERE run_id = ?1)",
      "UPDATE islands SET done = 0 WHERE run_id = ?1",
  };
  for (const std::string& sql : statements) {
    SKERRY_ASSIGN_OR_RETURN(auto s, w->Prepare(sql));
    s.BindInt(1, run_id);
    if (sql.find("?2") != std::string::npos) {
      s.BindBlob(2, spec.SerializeAsString());
      s.BindInt(3, skerry::v1::RUNNING);
      s.BindInt(4, now_ms);
    }
    SKERRY_RETURN_IF_ERROR(s.Run());
  }
  // Each island's state that produced the generation it is at (the engine's
  // StatesToGoOn), in place of one a generation trimmed at the finish may
  // have left behind.
  SKERRY_ASSIGN_OR_RETURN(
      auto put,
      w->Prepare("INSERT OR REPLACE INTO strategy_states (run_id, island, "
                 "generation, state) SELECT ?1, idx, generation, ?3 FROM "
                 "islands WHERE run_id = ?1 AND idx = ?2"));
  for (size_t i = 0; i < states.size(); ++i) {
    put.BindInt(1, run_id);
    put.BindInt(2, static_cast<int64_t>(i));
    put.BindBlob(3, states[i]);
    SKERRY_RETURN_IF_ERROR(put.Run());
  }
  return txn.Commit();
}

}  // namespace skerry::store
