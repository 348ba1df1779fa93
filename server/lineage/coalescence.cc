// Coalescence: the distinct ancestors of a genome or a population per
// generation back, and the islands they live on, by the ancestry walk
// (ancestry_walk.h).
#include <set>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/lineage/ancestry_walk.h"
#include "server/lineage/lineage_reader.h"
#include "server/lineage/node_sql.h"
#include "server/store/row_sums.h"

namespace skerry::lineage {
namespace {

using internal::NodeRow;

struct Start {
  std::vector<NodeRow> genomes;
  uint64_t run_id = 0;
  uint32_t generation = 0;
};

// The genome, or the genomes of the population (NotFound when it has none).
absl::StatusOr<Start> StartOf(store::Connection* conn,
                              const skerry::v1::CoalescenceRequest& request) {
  Start start;
  if (request.has_genome()) {
    SKERRY_ASSIGN_OR_RETURN(skerry::v1::LineageNode n,
                            internal::ResolveRef(conn, request.genome()));
    start.run_id = n.key().run_id();
    start.generation = n.key().generation();
    start.genomes.push_back(internal::RowOf(n));
    return start;
  }
  if (!request.has_population()) {
    return absl::InvalidArgumentError(
        "coalescence: give a genome or a population (run, generation, island)");
  }
  const skerry::v1::PopulationRef& p = request.population();
  start.run_id = p.run_id();
  start.generation = p.generation();
  // The natural-key index leads with (run_id, island): list the islands so
  // that each is one index range.
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement s,
      conn->Prepare(absl::StrCat(
          "SELECT ", internal::kNodeColumns,
          " FROM genomes WHERE run_id = ?1 AND island IN (",
          p.all_islands() ? "SELECT idx FROM islands WHERE run_id = ?1" : "?3",
          ") AND generation = ?2 AND ", store::kGenomeChecked)));
  s.BindInt(1, static_cast<int64_t>(p.run_id()));
  s.BindInt(2, p.generation());
  if (!p.all_islands()) s.BindInt(3, p.island());
  for (;;) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    start.genomes.push_back(internal::ReadRow(s));
  }
  if (start.genomes.empty()) {
    return absl::NotFoundError(absl::StrCat(
        "run ", p.run_id(), " has no genomes in generation ", p.generation(),
        p.all_islands() ? "" : absl::StrCat(" of island ", p.island())));
  }
  return start;
}

}  // namespace

absl::StatusOr<skerry::v1::CoalescenceResponse> LineageReader::Coalescence(
    const skerry::v1::CoalescenceRequest& request) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(internal::ReadTransaction txn,
                          internal::ReadTransaction::Begin(conn.get()));
  SKERRY_ASSIGN_OR_RETURN(Start start, StartOf(conn.get(), request));
  uint32_t oldest = 0;
  if (request.max_depth() > 0 && request.max_depth() < start.generation) {
    oldest = start.generation - request.max_depth();
  }
  SKERRY_ASSIGN_OR_RETURN(
      internal::AncestryWalk walk,
      internal::AncestryWalk::Make(
          conn.get(), internal::AncestryWalk::Columns::kLinks, oldest));
  for (const NodeRow& genome : start.genomes) walk.Start(0, genome);
  skerry::v1::CoalescenceResponse out;
  out.set_run_id(start.run_id);
  out.set_generation(start.generation);
  // Bounded: each round expands one generation, older than the last, or the
  // same one again with genomes of smaller ids (distribution genomes,
  // ancestry_walk.h), which join its level.
  skerry::v1::CoalescenceLevel* level = nullptr;
  std::set<uint32_t> islands;  // of `level`
  while (!walk.empty(0)) {
    const uint32_t g = walk.Newest(0);
    const std::vector<NodeRow>& genomes = walk.NewestGenomes(0);
    if (level == nullptr || level->generation() != g) {
      level = out.add_levels();
      level->set_generation(g);
      islands.clear();
    }
    for (const NodeRow& n : genomes) islands.insert(n.island);
    level->set_ancestors(level->ancestors() + genomes.size());
    level->set_islands(static_cast<uint32_t>(islands.size()));
    SKERRY_RETURN_IF_ERROR(walk.Expand(g));
  }
  return out;
}

}  // namespace skerry::lineage
