#include "server/store/check.h"

#include <sys/stat.h>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "common/strategy_spec.h"
#include "server/store/row_sums.h"
#include "server/store/series_store.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "skerry/v1/genome.pb.h"
#include "skerry/v1/runs.pb.h"
#include "skerry/v1/spec.pb.h"
#include "skerry/v1/strategy.pb.h"

namespace skerry::store {
namespace {

constexpr size_t kMaxProblems = 100;
// Keyframes per run that `--check` rebuilds from their recipes.
constexpr int kKeyframeSample = 8;

// One query's rows, each as text columns.
absl::StatusOr<std::vector<std::vector<std::string>>> Rows(
    Connection* c, const std::string& sql, int64_t bind = 0) {
  SKERRY_ASSIGN_OR_RETURN(Statement s, c->Prepare(sql));
  if (bind != 0) s.BindInt(1, bind);
  std::vector<std::vector<std::string>> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    std::vector<std::string> r;
    for (int i = 0; i < s.ColumnCount(); ++i) r.push_back(s.ColumnText(i));
    out.push_back(std::move(r));
  }
  return out;
}

class Checker {
 public:
  explicit Checker(Connection* c) : c_(c) {}

  void Problem(std::string p) {
    if (report.problems.size() < kMaxProblems)
      report.problems.push_back(std::move(p));
  }

  // Each query returns offending rows; `what` describes them.
  absl::Status Expect(int64_t run, const std::string& what,
                      const std::string& sql) {
    SKERRY_ASSIGN_OR_RETURN(auto rows, Rows(c_, sql, run));
    for (const auto& r : rows) {
      std::vector<std::string> cells;
      for (const auto& cell : r) {
        if (!cell.empty()) cells.push_back(cell);
      }
      Problem(absl::StrCat("run ", run, ": ", what, " (",
                           absl::StrJoin(cells, " "), ")"));
    }
    return absl::OkStatus();
  }

  absl::Status CheckRun(int64_t run, const skerry::v1::RunSpec& spec,
                        int state) {
    const bool reproducible = !spec.islands().asynchronous();
    // A fork's generations start where it left its parent, and the links of
    // its first generation name the parent's genomes (fork_store.cc).
    int64_t first_generation = 0;
    {
      SKERRY_ASSIGN_OR_RETURN(
          Statement f, c_->Prepare("SELECT coalesce(parent_generation, 0) "
                                   "FROM runs WHERE id = ?"));
      f.BindInt(1, run);
      SKERRY_ASSIGN_OR_RETURN(bool row, f.Step());
      if (row) first_generation = f.ColumnInt(0);
    }
    SKERRY_ASSIGN_OR_RETURN(
        Statement isl, c_->Prepare("SELECT idx, generation, done FROM islands "
                                   "WHERE run_id = ? ORDER BY idx"));
    isl.BindInt(1, run);
    const bool ended = state == skerry::v1::FINISHED ||
                       state == skerry::v1::STOPPED ||
                       state == skerry::v1::FAILED_RUN;
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, isl.Step());
      if (!row) break;
      const int64_t idx = isl.ColumnInt(0);
      const int64_t current = isl.ColumnInt(1);
      const bool done = isl.ColumnInt(2) != 0;
      const int64_t pop = IslandPopulation(spec, static_cast<uint32_t>(idx));
      SKERRY_ASSIGN_OR_RETURN(
          Statement gens,
          c_->Prepare("SELECT generation, count(*), sum(eval_state = 1) FROM "
                      "genomes WHERE run_id = ? AND island = ? GROUP BY "
                      "generation ORDER BY generation"));
      gens.BindInt(1, run);
      gens.BindInt(2, idx);
      int64_t expected = first_generation;
      while (true) {
        SKERRY_ASSIGN_OR_RETURN(bool g_row, gens.Step());
        if (!g_row) break;
        const int64_t g = gens.ColumnInt(0);
        const int64_t n = gens.ColumnInt(1);
        const int64_t pending = gens.ColumnInt(2);
        if (g != expected) {
          Problem(absl::StrCat("run ", run, " island ", idx, ": generation ",
                               expected, " is missing"));
        }
        expected = g + 1;
        if (n != pop) {
          Problem(absl::StrCat("run ", run, " island ", idx, " generation ", g,
                               ": ", n, " genomes, expected ", pop));
        }
        const bool may_pend = g == current && !done && !ended;
        if (pending > 0 && !may_pend && state != skerry::v1::STOPPED &&
            state != skerry::v1::FAILED_RUN) {
          Problem(absl::StrCat("run ", run, " island ", idx, " generation ", g,
                               ": ", pending, " genomes still pending"));
        }
        if (g > current) {
          Problem(absl::StrCat("run ", run, " island ", idx, ": generation ", g,
                               " is past the island's generation ", current));
        }
      }
      if (expected != current + 1) {
        Problem(absl::StrCat("run ", run, " island ", idx,
                             ": generations end at ", expected - 1,
                             ", island says ", current));
      }
    }
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "parent link does not resolve within the run",
        "SELECT 'genome', g.id, 'parent', p FROM (SELECT id, run_id, parent_a "
        "AS p "
        "FROM genomes WHERE run_id = ?1 AND parent_a IS NOT NULL UNION ALL "
        "SELECT id, run_id, parent_b FROM genomes WHERE run_id = ?1 AND "
        "parent_b "
        "IS NOT NULL) g LEFT JOIN genomes x ON x.id = g.p WHERE x.id IS NULL "
        "OR (x.run_id != g.run_id AND NOT EXISTS (SELECT 1 FROM runs r, "
        "genomes c WHERE r.id = ?1 AND c.id = g.id AND x.run_id = "
        "r.parent_run AND c.generation = r.parent_generation)) LIMIT 20"));
    SKERRY_RETURN_IF_ERROR(
        Expect(run,
               reproducible ? "parent is not of the previous generation"
                            : "parent is not of an earlier generation",
               absl::StrCat(
                   "SELECT 'genome', c.id, 'parent', x.id FROM genomes c JOIN "
                   "genomes x ON "
                   "x.id IN (c.parent_a, c.parent_b) WHERE c.run_id = ?1 AND ",
                   reproducible ? "x.generation != c.generation - 1"
                                : "x.generation >= c.generation",
                   // A sample's link to its distribution genome: below.
                   " AND NOT (c.origin = ", skerry::v1::SAMPLED,
                   " AND x.id = c.parent_a) LIMIT 20")));
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "sample's parent is not its generation's distribution genome",
        absl::StrCat("SELECT 'genome', c.id, 'parent', x.id FROM genomes c "
                     "JOIN genomes x ON x.id = c.parent_a WHERE c.run_id = ?1 "
                     "AND c.origin = ",
                     skerry::v1::SAMPLED,
                     " AND NOT (x.origin = ", skerry::v1::DISTRIBUTION,
                     " AND x.slot = 0 AND x.island = c.island AND "
                     "x.generation = c.generation) LIMIT 20")));
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "origin and parent links disagree",
        absl::StrCat(
            "SELECT 'genome', id, 'origin', origin FROM genomes WHERE "
            "run_id = ?1 AND ((origin IN (",
            skerry::v1::ELITE, ",", skerry::v1::MIGRANT, ",",
            skerry::v1::MUTATION, ",", skerry::v1::CROSSOVER,
            ") AND parent_a IS NULL) OR (origin IN (", skerry::v1::SEEDED, ",",
            skerry::v1::IMMIGRANT,
            ") AND parent_a IS NOT NULL) OR (origin = ", skerry::v1::CROSSOVER,
            " AND parent_b IS NULL) OR (origin = ", skerry::v1::SAMPLED,
            " AND (parent_b IS NOT NULL",
            HasDistributionGenomes(spec) ? " OR parent_a IS NULL" : "",
            ")) OR (origin = ", skerry::v1::DISTRIBUTION,
            " AND (slot != 0 OR parent_a IS NULL AND parent_b IS NOT NULL)))"
            " LIMIT 20")));
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "completed generation has no statistics",
        absl::StrCat(
            "SELECT 'island', g.island, 'generation', g.generation FROM "
            "(SELECT "
            "island, "
            "generation FROM genomes WHERE run_id = ?1 GROUP BY island, "
            "generation "
            "HAVING sum(eval_state = 1) = 0) g JOIN islands i ON i.run_id = ?1 "
            "AND "
            "i.idx = g.island JOIN runs r ON r.id = ?1 LEFT JOIN "
            "generation_stats "
            "s ON s.run_id = ?1 AND s.island = g.island AND s.generation = "
            "g.generation WHERE s.run_id IS NULL AND (g.generation < "
            "i.generation "
            "OR (i.done = 1 AND r.state != ",
            skerry::v1::FAILED_RUN, ")) LIMIT 20")));
    SKERRY_RETURN_IF_ERROR(
        Expect(run, "evaluation counter differs from the evaluations stored",
               "SELECT 'counter', r.evaluations, 'stored', (SELECT count(*) "
               "FROM genomes "
               "WHERE run_id = ?1 AND attempts > 0 AND eval_state IN (2, 3)) "
               "AS n FROM "
               "runs r WHERE r.id = ?1 AND r.evaluations != n"));
    SKERRY_RETURN_IF_ERROR(CheckContent(run));
    // A copy kept as its recipe holds no genes to compare: it replays its
    // parent's. Instead, a sample of the keyframes is replayed from their
    // recipes and ancestry and compared with the genes kept.
    if (KeyframeInterval(spec) > 1) {
      SKERRY_ASSIGN_OR_RETURN(
          std::vector<std::string> replayed,
          GenomeStore::CheckKeyframes(c_, run, kKeyframeSample));
      for (std::string& p : replayed) {
        Problem(absl::StrCat("run ", run, ": ", p));
      }
    }
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "validation names a genome that is missing or of another run",
        "SELECT 'validation', v.id, 'genome', v.genome_id FROM validations v "
        "LEFT JOIN genomes g ON g.id = v.genome_id WHERE v.run_id = ?1 AND "
        "(g.id IS NULL OR g.run_id != ?1 OR g.generation != v.generation) "
        "LIMIT 20"));
    if (!has_strategy_states) return absl::OkStatus();
    return CheckStrategyStates(run, ended);
  }

  // Every island has a strategy state that parses; an island still searching
  // has the one that produced its current generation.
  absl::Status CheckStrategyStates(int64_t run, bool ended) {
    SKERRY_ASSIGN_OR_RETURN(
        Statement st,
        c_->Prepare(absl::StrCat(
            "SELECT i.idx, i.generation, i.done, s.generation, s.state, "
            "s.run_id IS NULL, s.sum IS skerry_row_sum(s.",
            absl::StrJoin(absl::StrSplit(kStrategyStateSumColumns, ", "),
                          ", s."),
            ") FROM islands i LEFT JOIN strategy_states s ON s.run_id = "
            "i.run_id AND s.island = i.idx WHERE i.run_id = ? ORDER BY "
            "i.idx")));
    st.BindInt(1, run);
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, st.Step());
      if (!row) break;
      const int64_t idx = st.ColumnInt(0);
      const std::string where = absl::StrCat("run ", run, " island ", idx);
      if (st.ColumnInt(5) != 0) {
        Problem(absl::StrCat(where, ": no strategy state"));
        continue;
      }
      if (st.ColumnInt(6) != 1) {
        Problem(absl::StrCat(
            where, ": strategy state does not match its checksum (damaged)"));
        continue;
      }
      skerry::v1::StrategyState state;
      if (!state.ParseFromString(st.ColumnBlob(4))) {
        Problem(absl::StrCat(where, ": strategy state does not parse"));
        continue;
      }
      // Empty: stored before states were kept (a GA, which keeps nothing).
      const bool empty = st.ColumnBlob(4).empty();
      const bool searching = !ended && st.ColumnInt(2) == 0;
      if (searching && !empty && st.ColumnInt(3) != st.ColumnInt(1)) {
        Problem(absl::StrCat(where, ": strategy state is of generation ",
                             st.ColumnInt(3), ", the island is at ",
                             st.ColumnInt(1)));
      }
      if (!empty && state.generation() != st.ColumnInt(3)) {
        Problem(absl::StrCat(where, ": strategy state says generation ",
                             state.generation(), ", stored as ",
                             st.ColumnInt(3)));
      }
    }
    return absl::OkStatus();
  }

  // What the rows say: checksums (row_sums.h) and the content rules.
  absl::Status CheckContent(int64_t run) {
    const std::string key =
        "'island', island, 'generation', generation, 'slot', slot, "
        "'genome', id";
    if (has_sums) SKERRY_RETURN_IF_ERROR(CheckSums(run, key));
    return CheckRules(run, key);
  }

  absl::Status CheckSums(int64_t run, const std::string& key) {
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "genome content does not match its checksum (damaged)",
        absl::StrCat("SELECT ", key, " FROM genomes WHERE run_id = ?1 AND ",
                     "sum IS NOT skerry_row_sum(", kGenomeSumColumns,
                     ") LIMIT 20")));
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "island row does not match its checksum (damaged)",
        absl::StrCat("SELECT 'island', idx FROM islands WHERE run_id = ?1 AND ",
                     "sum IS NOT skerry_row_sum(", kIslandSumColumns,
                     ") LIMIT 20")));
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "statistics row does not match its checksum (damaged)",
        absl::StrCat("SELECT 'island', island, 'generation', generation FROM "
                     "generation_stats WHERE run_id = ?1 AND sum IS NOT "
                     "skerry_row_sum(",
                     kStatsSumColumns, ") LIMIT 20")));
    return absl::OkStatus();
  }

  absl::Status CheckRules(int64_t run, const std::string& key) {
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "evaluated genome has no score",
        absl::StrCat("SELECT ", key, " FROM genomes WHERE run_id = ?1 AND ",
                     "eval_state = ", skerry::v1::EVALUATED,
                     " AND score IS NULL LIMIT 20")));
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "failed genome has no error text",
        absl::StrCat("SELECT ", key, " FROM genomes WHERE run_id = ?1 AND ",
                     "eval_state = ", skerry::v1::FAILED,
                     " AND error = '' LIMIT 20")));
    // Elites and migrants are copies: the same genes as their parent, and,
    // when not evaluated again (attempts 0), the same outcome (a failed
    // genome's score means nothing, so only an evaluated copy's score is
    // compared).
    SKERRY_RETURN_IF_ERROR(Expect(
        run, "genome carried over unchanged differs from its parent",
        absl::StrCat(
            "SELECT 'island', c.island, 'generation', c.generation, 'slot', "
            "c.slot, 'genome', c.id, 'parent', p.id FROM genomes c JOIN "
            "genomes p ON p.id = c.parent_a WHERE c.run_id = ?1 AND "
            "c.origin IN (",
            skerry::v1::ELITE, ",", skerry::v1::MIGRANT,
            ") AND ((c.genes != p.genes AND NOT ", IsChildRecipeSql("c.genes"),
            ") OR (c.attempts = 0 AND c.eval_state "
            "!= 1 AND (c.eval_state != p.eval_state OR (c.eval_state = 2 AND "
            "c.score IS NOT p.score)))) LIMIT 20")));
    return absl::OkStatus();
  }

  CheckReport report;
  bool has_sums = true;             // schema version 6 or later
  bool has_strategy_states = true;  // schema version 10 or later

 private:
  Connection* c_;
};

// An ended run (finished, stopped, failed) has no live island: whatever ended
// it marked every island done in the same transaction (RunStore::FinishRun).
absl::Status CheckEndedRunIslandsDone(Checker& checker, int64_t run,
                                      int state) {
  if (state != skerry::v1::FINISHED && state != skerry::v1::STOPPED &&
      state != skerry::v1::FAILED_RUN) {
    return absl::OkStatus();
  }
  return checker.Expect(run, "island of an ended run is not marked done",
                        "SELECT 'island', idx FROM islands WHERE run_id = ?1 "
                        "AND done = 0 LIMIT 20");
}

}  // namespace

std::string CheckReport::ToString() const {
  std::string out = absl::StrCat("integrity_check: ", integrity, "\n", runs,
                                 " runs, ", genomes, " genomes\n");
  if (problems.empty()) {
    absl::StrAppend(&out, "invariants: ok\n");
  } else {
    absl::StrAppend(&out, "invariants: ", problems.size(),
                    problems.size() >= kMaxProblems ? "+" : "", " problems\n");
    for (const std::string& p : problems) absl::StrAppend(&out, "  ", p, "\n");
  }
  if (!warnings.empty()) {
    absl::StrAppend(&out, "warnings: ", warnings.size(), "\n");
    for (const std::string& w : warnings) absl::StrAppend(&out, "  ", w, "\n");
  }
  return out;
}

absl::StatusOr<CheckReport> CheckDatabase(const std::string& path,
                                          uint64_t max_name_bytes) {
  // The file rule of Store::Open: nothing is created here, an empty file is
  // not a database.
  struct stat st;
  if (stat(path.c_str(), &st) != 0) {
    return absl::NotFoundError(absl::StrCat(path, ": no such file"));
  }
  if (S_ISREG(st.st_mode) && st.st_size == 0) {
    return absl::FailedPreconditionError(
        absl::StrCat(path, ": ", kEmptyFileMessage));
  }
  SKERRY_ASSIGN_OR_RETURN(auto conn,
                          Connection::Open(path, SQLITE_OPEN_READONLY));
  sqlite3_busy_timeout(conn->raw(), 5000);
  Checker checker(conn.get());
  {
    SKERRY_ASSIGN_OR_RETURN(Statement ic,
                            conn->Prepare("PRAGMA integrity_check"));
    std::vector<std::string> lines;
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, ic.Step());
      if (!row) break;
      lines.push_back(ic.ColumnText(0));
    }
    checker.report.integrity = absl::StrJoin(lines, "; ");
  }
  SKERRY_RETURN_IF_ERROR(conn->Exec("BEGIN"));  // one snapshot for every query
  {
    absl::StatusOr<Statement> v =
        conn->Prepare("SELECT max(version) FROM schema_version");
    absl::StatusOr<bool> row = v.ok() ? v->Step() : absl::StatusOr<bool>(false);
    // Before version 6 rows had no checksums; a coordinator start adds them.
    checker.has_sums = row.ok() && *row && v->ColumnInt(0) >= 6;
    checker.has_strategy_states = row.ok() && *row && v->ColumnInt(0) >= 10;
    // The schema of the current version, compared object by object (an older
    // version is migrated by the coordinator's next start, not compared).
    if (row.ok() && *row && v->ColumnInt(0) == Database::kSchemaVersion) {
      if (absl::Status schema = VerifySchema(conn.get()); !schema.ok()) {
        checker.Problem(std::string(schema.message()));
      }
    }
  }
  absl::StatusOr<Statement> runs = conn->Prepare(
      checker.has_sums
          ? absl::StrCat("SELECT id, spec, state, sum IS skerry_row_sum(",
                         kRunSumColumns, ") FROM runs ORDER BY id")
          : "SELECT id, spec, state, 1 FROM runs ORDER BY id");
  if (!runs.ok()) {
    return absl::FailedPreconditionError(absl::StrCat(
        path, ": not a Skerry database (", runs.status().message(), ")"));
  }
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, runs->Step());
    if (!row) break;
    skerry::v1::RunSpec spec;
    const int64_t id = runs->ColumnInt(0);
    if (runs->ColumnInt(3) != 1) {
      checker.Problem(absl::StrCat(
          "run ", id, ": run record does not match its checksum (damaged)"));
    }
    if (!spec.ParseFromString(runs->ColumnBlob(1))) {
      checker.Problem(absl::StrCat("run ", id, ": stored spec does not parse"));
      continue;
    }
    ++checker.report.runs;
    SKERRY_RETURN_IF_ERROR(
        checker.CheckRun(id, spec, static_cast<int>(runs->ColumnInt(2))));
    SKERRY_RETURN_IF_ERROR(CheckEndedRunIslandsDone(
        checker, id, static_cast<int>(runs->ColumnInt(2))));
  }
  if (max_name_bytes > 0) {
    // Names from before the name budget: answers cut them; say so.
    SKERRY_ASSIGN_OR_RETURN(
        Statement long_names,
        conn->Prepare("SELECT id, length(CAST(name AS BLOB)) FROM runs WHERE "
                      "length(CAST(name AS BLOB)) > ?1 ORDER BY id LIMIT 100"));
    long_names.BindInt(1, static_cast<int64_t>(max_name_bytes));
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, long_names.Step());
      if (!row) break;
      checker.report.warnings.push_back(
          absl::StrCat("run ", long_names.ColumnInt(0), ": name of ",
                       long_names.ColumnInt(1),
                       " bytes, over --max-name-bytes ", max_name_bytes,
                       " (stored before the budget); answers show its "
                       "first ",
                       max_name_bytes, " bytes"));
    }
  }
  SKERRY_RETURN_IF_ERROR(CheckSeriesRows(conn.get(), &checker.report.problems));
  {
    SKERRY_ASSIGN_OR_RETURN(Statement n,
                            conn->Prepare("SELECT count(*) FROM genomes"));
    SKERRY_ASSIGN_OR_RETURN(bool row, n.Step());
    if (row) checker.report.genomes = n.ColumnInt(0);
  }
  conn->Exec("COMMIT").IgnoreError();
  return checker.report;
}

absl::Status VerifyRowSums(Connection* conn, int64_t run_id,
                           const std::string& schema) {
  const struct {
    const char* table;
    const char* columns;
    const char* run_column;
    const char* what;  // SQL naming the row
  } tables[] = {
      {"runs", kRunSumColumns, "id", "'its run record'"},
      {"islands", kIslandSumColumns, "run_id", "'island ' || idx"},
      {"genomes", kGenomeSumColumns, "run_id",
       "'island ' || island || ' generation ' || generation || ' slot ' || "
       "slot || ' (genome ' || id || ')'"},
      {"generation_stats", kStatsSumColumns, "run_id",
       "'island ' || island || ' generation ' || generation || "
       "' statistics'"},
      {"strategy_states", kStrategyStateSumColumns, "run_id",
       "'island ' || island || ' strategy state'"},
  };
  for (const auto& t : tables) {
    SKERRY_ASSIGN_OR_RETURN(
        Statement s,
        conn->Prepare(absl::StrCat(
            "SELECT ", t.run_column, ", ", t.what, " FROM ", schema, ".",
            t.table, " WHERE (?1 = 0 OR ", t.run_column,
            " = ?1) AND sum IS NOT skerry_row_sum(", t.columns, ") LIMIT 1")));
    s.BindInt(1, run_id);
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (row) return DamagedRow(s.ColumnInt(0), s.ColumnText(1));
  }
  return absl::OkStatus();
}

}  // namespace skerry::store
