// The most recent common ancestors of two genomes (lineage.proto,
// CommonAncestorResponse): the common ancestors of the newest generation that
// has any, a genome counting as its own ancestor. All ancestors that tie in
// that generation are listed, by id.
//
// Both ancestries are walked together (ancestry_walk.h), one generation at a
// time, newest first, and the search stops at the first generation where
// they share a genome. It must read every ancestor of both genomes in the
// generations above that one (a generation is known to share nothing only
// when both sides are complete there), so the work is that of the answer;
// the walk makes each genome cheap.
#include <algorithm>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/lineage/ancestry_walk.h"
#include "server/lineage/lineage_reader.h"
#include "server/lineage/node_sql.h"

namespace skerry::lineage {
namespace {

using internal::AncestryWalk;
using internal::NodeRow;

// The genomes both lists hold (each sorted by id), in order.
std::vector<NodeRow> Shared(const std::vector<NodeRow>& a,
                            const std::vector<NodeRow>& b) {
  std::vector<NodeRow> out;
  auto i = a.begin();
  auto j = b.begin();
  while (i != a.end() && j != b.end()) {
    if (i->id < j->id) {
      ++i;
    } else if (j->id < i->id) {
      ++j;
    } else {
      out.push_back(*i);
      ++i;
      ++j;
    }
  }
  return out;
}

// Walks to the first generation where the sides share a genome, or until a
// side has no ancestors left. Returns the shared genomes (none: the lineages
// never meet).
absl::StatusOr<std::vector<NodeRow>> Meet(AncestryWalk& walk) {
  // Each side's genomes of generation seen[s] so far: a generation may come
  // round twice (a sample's distribution genome, ancestry_walk.h), and a
  // genome found on its second round must meet the other side's first.
  std::vector<NodeRow> seen_genomes[AncestryWalk::kSides];
  int64_t seen[AncestryWalk::kSides] = {-1, -1};
  // Bounded: every round expands the newest generation of at least one side,
  // and parents are older than their children (by generation, or by id
  // within one).
  while (!walk.empty(0) && !walk.empty(1)) {
    const uint32_t g = std::max(walk.Newest(0), walk.Newest(1));
    for (int s = 0; s < AncestryWalk::kSides; ++s) {
      if (walk.Newest(s) != g) continue;
      const std::vector<NodeRow>& layer = walk.NewestGenomes(s);  // by id
      if (seen[s] != g) {
        seen_genomes[s] = layer;
      } else {
        seen_genomes[s].insert(seen_genomes[s].end(), layer.begin(),
                               layer.end());
        std::sort(
            seen_genomes[s].begin(), seen_genomes[s].end(),
            [](const NodeRow& x, const NodeRow& y) { return x.id < y.id; });
      }
      seen[s] = g;
    }
    if (seen[0] == g && seen[1] == g) {
      std::vector<NodeRow> common = Shared(seen_genomes[0], seen_genomes[1]);
      if (!common.empty()) return common;
    }
    absl::Status s = walk.Expand(g);
    if (absl::IsResourceExhausted(s)) {
      return absl::ResourceExhaustedError(absl::StrCat(
          "common ancestor: ", s.message(), " without finding one"));
    }
    SKERRY_RETURN_IF_ERROR(s);
  }
  return std::vector<NodeRow>();
}

}  // namespace

absl::StatusOr<skerry::v1::CommonAncestorResponse>
LineageReader::CommonAncestor(const skerry::v1::GenomeRef& a,
                              const skerry::v1::GenomeRef& b) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(internal::ReadTransaction txn,
                          internal::ReadTransaction::Begin(conn.get()));
  skerry::v1::CommonAncestorResponse out;
  SKERRY_ASSIGN_OR_RETURN(*out.mutable_a(),
                          internal::ResolveRef(conn.get(), a));
  SKERRY_ASSIGN_OR_RETURN(*out.mutable_b(),
                          internal::ResolveRef(conn.get(), b));
  SKERRY_ASSIGN_OR_RETURN(
      AncestryWalk walk,
      AncestryWalk::Make(conn.get(), AncestryWalk::Columns::kLinks,
                         /*oldest=*/0, options_.max_visited));
  walk.Start(0, internal::RowOf(out.a()));
  walk.Start(1, internal::RowOf(out.b()));
  SKERRY_ASSIGN_OR_RETURN(std::vector<NodeRow> common, Meet(walk));
  if (!common.empty()) {
    const uint32_t generation = common.front().generation;
    SKERRY_ASSIGN_OR_RETURN(internal::NodeFetcher fetch,
                            internal::NodeFetcher::Make(conn.get()));
    for (const NodeRow& n : common) {
      SKERRY_ASSIGN_OR_RETURN(*out.add_ancestors(),
                              fetch.Require(static_cast<int64_t>(n.id)));
    }
    out.set_found(true);
    out.set_depth_a(out.a().key().generation() - generation);
    out.set_depth_b(out.b().key().generation() - generation);
  }
  out.set_visited(walk.read());
  return out;
}

}  // namespace skerry::lineage
