// A hand-built lineage graph with known answers, written into a real store:
// the run and its islands by RunStore::CreateRun, the genomes by raw inserts
// into the same schema (explicit ids, so that tests can name them).
//
// Run 1 (MINIMIZE unless asked), 2 islands. Scores in brackets; "x" failed.
//
//   gen 0  island 0: A=1 [10]  B=2 [8]  C=3 [9]
//          island 1: D=4 [7]   E=5 [12]
//   gen 1  island 0: G=11 elite(B) [8]  H=12 crossover(A,B) [6]
//                    I=13 mutation(C) [x]
//          island 1: J=14 elite(D) [7]  K=15 migrant(B) [8]
//                    L=16 immigrant [20]
//   gen 2  island 0: M=21 crossover(H,G) [5]   diamond: H and G both from B
//                    N=22 mutation(H) [6.5]
//                    O=23 crossover(I,G) [4]   parent a failed
//                    S=24 crossover(G,K) [7]   tie 8 = 8 -> parent a
//          island 1: P=25 crossover(K,J) [3]   J fitter
//                    Q=26 mutation(L) [15]
//                    U=27 mutation(K) [7.5]    line crosses 0 -> 1 at K
//   gen 3  island 0: W=31 elite(O) [4]          (the run's champion)
//
// Thread safety: one test at a time.
#ifndef SKERRY_TESTS_UNIT_LINEAGE_LINEAGE_GRAPH_H_
#define SKERRY_TESTS_UNIT_LINEAGE_LINEAGE_GRAPH_H_

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "gtest/gtest.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "skerry/v1/lineage.pb.h"
#include "tests/support/process.h"

namespace skerry::testing {

enum Id : int64_t {
  A = 1,
  B = 2,
  C = 3,
  D = 4,
  E = 5,
  G = 11,
  H = 12,
  I = 13,
  J = 14,
  K = 15,
  L = 16,
  M = 21,
  N = 22,
  O = 23,
  S = 24,
  P = 25,
  Q = 26,
  U = 27,
  W = 31,
};

struct Row {
  int64_t id;
  uint32_t island, generation, slot;
  skerry::v1::Origin origin;
  int64_t parent_a, parent_b;
  std::optional<double> score;  // nullopt: failed
};

inline std::vector<Row> GraphRows() {
  using namespace skerry::v1;  // NOLINT: origins read better unqualified
  return {
      {A, 0, 0, 0, SEEDED, 0, 0, 10},    {B, 0, 0, 1, SEEDED, 0, 0, 8},
      {C, 0, 0, 2, SEEDED, 0, 0, 9},     {D, 1, 0, 0, SEEDED, 0, 0, 7},
      {E, 1, 0, 1, SEEDED, 0, 0, 12},    {G, 0, 1, 0, ELITE, B, 0, 8},
      {H, 0, 1, 1, CROSSOVER, A, B, 6},  {I, 0, 1, 2, MUTATION, C, 0, {}},
      {J, 1, 1, 0, ELITE, D, 0, 7},      {K, 1, 1, 1, MIGRANT, B, 0, 8},
      {L, 1, 1, 2, IMMIGRANT, 0, 0, 20}, {M, 0, 2, 0, CROSSOVER, H, G, 5},
      {N, 0, 2, 1, MUTATION, H, 0, 6.5}, {O, 0, 2, 2, CROSSOVER, I, G, 4},
      {S, 0, 2, 3, CROSSOVER, G, K, 7},  {P, 1, 2, 0, CROSSOVER, K, J, 3},
      {Q, 1, 2, 1, MUTATION, L, 0, 15},  {U, 1, 2, 2, MUTATION, K, 0, 7.5},
      {W, 0, 3, 0, ELITE, O, 0, 4},
  };
}

// Inserts genome rows of run 1 into the database at `path`.
inline void InsertRows(const std::string& path, const std::vector<Row>& rows) {
  auto conn = store::Connection::Open(path, SQLITE_OPEN_READWRITE);
  ASSERT_TRUE(conn.ok()) << conn.status();
  auto ins = (*conn)->Prepare(
      "INSERT INTO genomes (id, run_id, island, generation, slot, origin, "
      "parent_a, parent_b, genes, score, eval_state) VALUES "
      "(?1, 1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)");
  ASSERT_TRUE(ins.ok()) << ins.status();
  for (const Row& r : rows) {
    ins->BindInt(1, r.id);
    ins->BindInt(2, r.island);
    ins->BindInt(3, r.generation);
    ins->BindInt(4, r.slot);
    ins->BindInt(5, r.origin);
    ins->BindIdOrNull(6, r.parent_a);
    ins->BindIdOrNull(7, r.parent_b);
    ins->BindBlob(8, std::string(8, '\0'));  // one gene, 0.0
    if (r.score.has_value()) {
      ins->BindDouble(9, *r.score);
      ins->BindInt(10, skerry::v1::EVALUATED);
    } else {
      ins->BindNull(9);
      ins->BindInt(10, skerry::v1::FAILED);
    }
    ASSERT_TRUE(ins->Run().ok()) << "genome " << r.id;
  }
}

// Writes the graph as run 1 of a new database at `path`.
inline void WriteGraph(const std::string& path,
                       skerry::v1::Objective objective = skerry::v1::MINIMIZE) {
  {
    absl::StatusOr<std::unique_ptr<store::Store>> s = store::Store::Open(path);
    ASSERT_TRUE(s.ok()) << s.status();
    store::RunRecord run;
    run.name = "hand-built";
    run.owner = "test";
    run.spec.set_name("hand-built");
    run.spec.set_objective(objective);
    run.spec.set_genome_length(1);
    run.spec.mutable_ga()->set_population_size(4);
    run.spec.mutable_islands()->set_count(2);
    run.state = skerry::v1::FINISHED;
    std::vector<store::GenomeRecord> none;
    ASSERT_TRUE((*s)->runs().CreateRun(&run, &none).ok());
    ASSERT_EQ(run.id, 1);
  }
  InsertRows(path, GraphRows());
  auto conn = store::Connection::Open(path, SQLITE_OPEN_READWRITE);
  ASSERT_TRUE(conn.ok()) << conn.status();
  ASSERT_TRUE((*conn)
                  ->Exec("UPDATE islands SET generation = 3 WHERE idx = 0; "
                         "UPDATE islands SET generation = 2 WHERE idx = 1; "
                         "UPDATE runs SET champion_id = 31, best_score = 4")
                  .ok());
}

// A reference to genome `id`.
inline skerry::v1::GenomeRef RefTo(int64_t id) {
  skerry::v1::GenomeRef r;
  r.set_id(static_cast<uint64_t>(id));
  return r;
}

// The ids of a list of LineageNodes (a vector or a repeated field), in order.
template <typename Nodes>
std::vector<int64_t> IdsOf(const Nodes& ns) {
  std::vector<int64_t> out;
  for (const auto& n : ns) out.push_back(static_cast<int64_t>(n.id()));
  return out;
}

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_UNIT_LINEAGE_LINEAGE_GRAPH_H_
