// skerry-lineage-bench's store: the run bred by the engine's own Seed, Breed
// and ChooseEmigrants on sphere scores, and the bare recursive queries.
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "bench/lineage_bench.h"
#include "common/genes.h"
#include "common/spec.h"
#include "server/engine/breeder.h"
#include "server/engine/topology.h"
#include "server/store/store.h"

namespace skerry::lineage_bench {

using skerry::store::GenomeRecord;

double Seconds(std::chrono::steady_clock::time_point since) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - since)
      .count();
}

[[noreturn]] void Die(const absl::Status& s, const char* what) {
  std::fprintf(stderr, "skerry-lineage-bench: %s: %s\n", what,
               std::string(s.message()).c_str());
  std::exit(1);
}

namespace {

skerry::v1::RunSpec BenchSpec(const Flags& f) {
  skerry::v1::RunSpec spec;
  spec.set_name("lineage-bench");
  spec.set_seed(20240501);
  spec.set_genome_length(10);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(f.population);
  spec.mutable_ga()->mutable_selection()->set_method(skerry::v1::TOURNAMENT);
  spec.mutable_ga()->mutable_selection()->set_tournament_size(3);
  spec.mutable_ga()->mutable_crossover()->set_method(skerry::v1::UNIFORM);
  spec.mutable_ga()->mutable_crossover()->set_rate(0.8);
  spec.mutable_ga()->mutable_mutation()->set_rate(0.1);
  spec.mutable_ga()->mutable_mutation()->set_step(0.3);
  spec.mutable_ga()->set_elites(2);
  spec.mutable_ga()->set_immigrants(2);
  spec.mutable_islands()->set_count(f.islands);
  spec.mutable_islands()->set_topology(skerry::v1::RING);
  spec.mutable_islands()->set_interval(10);
  spec.mutable_islands()->set_migrants(5);
  spec.mutable_stop()->set_max_generations(f.generations);
  absl::StatusOr<skerry::v1::RunSpec> prepared = skerry::PrepareSpec(spec);
  if (!prepared.ok()) Die(prepared.status(), "bench spec");
  return *prepared;
}

double Sphere(const std::vector<double>& x) {
  double s = 0;
  for (double v : x) s += v * v;
  return s;
}

// Inserts in big transactions on a connection of our own.
}  // namespace

void BuildStore(const Flags& f) {
  std::filesystem::remove(f.db);
  std::filesystem::remove(f.db + "-wal");
  std::filesystem::remove(f.db + "-shm");
  const skerry::v1::RunSpec spec = BenchSpec(f);
  {
    auto store = skerry::store::Store::Open(f.db);
    if (!store.ok()) Die(store.status(), "open store");
    skerry::store::RunRecord run;
    run.name = spec.name();
    run.owner = "bench";
    run.spec = spec;
    run.state = skerry::v1::FINISHED;
    std::vector<GenomeRecord> none;
    absl::Status s = (*store)->runs().CreateRun(&run, &none);
    if (!s.ok()) Die(s, "create run");
  }
  auto conn = skerry::store::Connection::Open(f.db, SQLITE_OPEN_READWRITE);
  if (!conn.ok()) Die(conn.status(), "open");
  (*conn)
      ->Exec("PRAGMA synchronous=OFF; PRAGMA cache_size=-262144")
      .IgnoreError();
  auto ins = (*conn)->Prepare(
      "INSERT INTO genomes (id, run_id, island, generation, slot, origin, "
      "parent_a, parent_b, genes, score, eval_state, attempts) VALUES "
      "(?1, 1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, 2, ?10)");
  if (!ins.ok()) Die(ins.status(), "prepare");
  int64_t next_id = 1;
  int64_t best_id = 0;
  double best = 1e300;
  std::vector<std::vector<GenomeRecord>> current(f.islands);
  const auto start = std::chrono::steady_clock::now();
  (*conn)->Exec("BEGIN").IgnoreError();
  for (uint32_t g = 0; g < f.generations; ++g) {
    std::vector<std::vector<GenomeRecord>> next(f.islands);
    for (uint32_t i = 0; i < f.islands; ++i) {
      if (g == 0) {
        auto seeded = skerry::engine::Seed(spec, i);
        if (!seeded.ok()) Die(seeded.status(), "seed");
        next[i] = *std::move(seeded);
      } else {
        std::vector<const GenomeRecord*> migrants;
        if (skerry::engine::IsMigrationEpoch(spec, g)) {
          for (uint32_t src : skerry::engine::Sources(spec, i, g)) {
            for (const GenomeRecord* m : skerry::engine::ChooseEmigrants(
                     spec, current[src], i, spec.islands().migrants())) {
              migrants.push_back(m);
            }
          }
        }
        auto bred = skerry::engine::Breed(spec, i, current[i], migrants);
        if (!bred.ok()) Die(bred.status(), "breed");
        next[i] = std::move(*bred);
      }
      for (GenomeRecord& r : next[i]) {
        r.id = next_id++;
        r.run_id = 1;
        if (r.state != skerry::v1::EVALUATED) {
          r.score = Sphere(r.genes);
          r.state = skerry::v1::EVALUATED;
          r.attempts = 1;
        }
        if (r.score < best) {
          best = r.score;
          best_id = r.id;
        }
        ins->BindInt(1, r.id);
        ins->BindInt(2, r.island);
        ins->BindInt(3, r.generation);
        ins->BindInt(4, r.slot);
        ins->BindInt(5, r.origin);
        ins->BindIdOrNull(6, r.parent_a);
        ins->BindIdOrNull(7, r.parent_b);
        ins->BindBlob(8, skerry::PackGenes(r.genes));
        ins->BindDouble(9, r.score);
        ins->BindInt(10, r.attempts);
        absl::Status s = ins->Run();
        if (!s.ok()) Die(s, "insert");
      }
    }
    current = std::move(next);
    if (g % 20 == 19 || g + 1 == f.generations) {
      (*conn)->Exec("COMMIT").IgnoreError();
      (*conn)->Exec("PRAGMA wal_checkpoint(TRUNCATE)").IgnoreError();
      std::fprintf(stderr, "\rbuilt %u/%u generations (%.0f s)", g + 1,
                   f.generations, Seconds(start));
      if (g + 1 < f.generations) (*conn)->Exec("BEGIN").IgnoreError();
    }
  }
  std::fprintf(stderr, "\n");
  absl::Status s = (*conn)->Exec(
      absl::StrCat("UPDATE islands SET generation = ", f.generations - 1,
                   ", done = 1; UPDATE runs SET champion_id = ", best_id,
                   ", best_score = ", best, ", evaluations = ", next_id - 1));
  if (!s.ok()) Die(s, "finish");
  std::printf("build: %lld genomes in %.1f s; file %.2f GB\n",
              static_cast<long long>(next_id - 1), Seconds(start),
              std::filesystem::file_size(f.db) / 1e9);
}

// The bare query: the smallest recursive CTE that finds the same ancestors.
uint64_t BareAncestors(skerry::store::Connection* conn, int64_t id,
                       uint32_t oldest) {
  auto s = conn->Prepare(
      "WITH RECURSIVE anc(id, parent_a, parent_b) AS (SELECT id, parent_a, "
      "parent_b FROM genomes WHERE id = ?1 UNION SELECT g.id, g.parent_a, "
      "g.parent_b FROM anc JOIN genomes g ON g.id IN (anc.parent_a, "
      "anc.parent_b) WHERE g.generation >= ?2) SELECT id FROM anc");
  if (!s.ok()) Die(s.status(), "bare query");
  s->BindInt(1, id);
  s->BindInt(2, oldest);
  uint64_t n = 0;
  while (*s->Step()) ++n;
  return n - 1;  // the genome itself
}

// The bare query for the same answer the service gives: the same recursive
// CTE with every column of a node, stepped to the end in SQLite alone.
uint64_t BareWideAncestors(skerry::store::Connection* conn, int64_t id,
                           uint32_t oldest) {
  constexpr char kCols[] =
      "id, run_id, island, generation, slot, origin, parent_a, parent_b, "
      "score, eval_state";
  constexpr char kColsG[] =
      "g.id, g.run_id, g.island, g.generation, g.slot, g.origin, g.parent_a, "
      "g.parent_b, g.score, g.eval_state";
  auto s = conn->Prepare(absl::StrCat(
      "WITH RECURSIVE anc(", kCols, ") AS (SELECT ", kCols,
      " FROM genomes WHERE id = ?1 UNION SELECT ", kColsG,
      " FROM anc JOIN genomes g ON g.id IN (anc.parent_a, anc.parent_b) "
      "WHERE g.generation >= ?2) SELECT ",
      kCols, " FROM anc"));
  if (!s.ok()) Die(s.status(), "bare wide query");
  s->BindInt(1, id);
  s->BindInt(2, oldest);
  uint64_t n = 0;
  while (*s->Step()) ++n;
  return n - 1;
}

}  // namespace skerry::lineage_bench
