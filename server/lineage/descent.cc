// The chain-valued lineage queries: line of descent, attribution along it, and
// the most recent common ancestor of two genomes.
#include <algorithm>
#include <functional>
#include <map>
#include <unordered_map>
#include <unordered_set>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/lineage/lineage_reader.h"
#include "server/lineage/node_sql.h"

namespace skerry::lineage {
namespace {

using internal::NodeFetcher;
using internal::NodeName;
using internal::ReadTransaction;
using internal::Scored;
using skerry::v1::LineageNode;
using skerry::v1::Objective;

// True when the line of descent goes through parent b rather than parent a
// (the rule in lineage.proto: scored beats failed, better score wins, ties to
// a).
bool PreferB(Objective objective, const LineageNode& a, const LineageNode& b) {
  if (!Scored(b)) return false;
  if (!Scored(a)) return true;
  return internal::Better(objective, b.score(), a.score());
}

absl::Status CheckOlder(const LineageNode& parent, const LineageNode& child) {
  if (parent.key().generation() < child.key().generation()) {
    return absl::OkStatus();
  }
  return absl::DataLossError(
      absl::StrCat("genome ", NodeName(child), ": parent ", NodeName(parent),
                   " is not from an earlier generation"));
}

// The line from `genome` back to its founder; steps[0] is the genome.
absl::StatusOr<std::vector<LineageNode>> WalkLine(store::Connection* conn,
                                                  Objective objective,
                                                  LineageNode genome) {
  SKERRY_ASSIGN_OR_RETURN(NodeFetcher fetch, NodeFetcher::Make(conn));
  std::vector<LineageNode> steps;
  steps.push_back(std::move(genome));
  // Bounded: generations strictly decrease along the line (CheckOlder).
  while (steps.back().parent_a() != 0) {
    const LineageNode& child = steps.back();
    SKERRY_ASSIGN_OR_RETURN(
        LineageNode next,
        fetch.Require(static_cast<int64_t>(child.parent_a()), &child));
    if (child.parent_b() != 0) {
      SKERRY_ASSIGN_OR_RETURN(
          LineageNode b,
          fetch.Require(static_cast<int64_t>(child.parent_b()), &child));
      if (PreferB(objective, next, b)) next = std::move(b);
    }
    SKERRY_RETURN_IF_ERROR(CheckOlder(next, child));
    steps.push_back(std::move(next));
  }
  return steps;
}

struct LineContext {
  Objective objective = skerry::v1::MINIMIZE;
  std::vector<LineageNode> steps;
};

absl::StatusOr<LineContext> Line(store::Connection* conn,
                                 const skerry::v1::GenomeRef& ref) {
  SKERRY_ASSIGN_OR_RETURN(LineageNode genome, internal::ResolveRef(conn, ref));
  SKERRY_ASSIGN_OR_RETURN(skerry::v1::RunSpec spec,
                          internal::RunSpecOf(conn, genome.key().run_id()));
  LineContext line;
  line.objective = spec.objective() == skerry::v1::MAXIMIZE
                       ? skerry::v1::MAXIMIZE
                       : skerry::v1::MINIMIZE;
  SKERRY_ASSIGN_OR_RETURN(line.steps,
                          WalkLine(conn, line.objective, std::move(genome)));
  return line;
}

// The change from parent to child in the objective's direction.
double Gain(Objective objective, const LineageNode& parent,
            const LineageNode& child) {
  return objective == skerry::v1::MAXIMIZE ? child.score() - parent.score()
                                           : parent.score() - child.score();
}

}  // namespace

absl::StatusOr<skerry::v1::LineOfDescentResponse> LineageReader::LineOfDescent(
    const skerry::v1::GenomeRef& ref) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  SKERRY_ASSIGN_OR_RETURN(LineContext line, Line(conn.get(), ref));
  skerry::v1::LineOfDescentResponse out;
  out.set_objective(line.objective);
  out.set_rule(DescentRule());
  for (LineageNode& n : line.steps) *out.add_steps() = std::move(n);
  return out;
}

absl::StatusOr<skerry::v1::AttributionResponse> LineageReader::Attribution(
    const skerry::v1::GenomeRef& ref) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  SKERRY_ASSIGN_OR_RETURN(LineContext line, Line(conn.get(), ref));
  const std::vector<LineageNode>& steps = line.steps;
  skerry::v1::AttributionResponse out;
  out.set_objective(line.objective);
  *out.mutable_genome() = steps.front();
  *out.mutable_founder() = steps.back();
  out.set_steps(static_cast<uint32_t>(steps.size() - 1));
  std::map<int, skerry::v1::OriginShare> shares;
  double total = 0.0;
  // Oldest first: steps[i + 1] is the parent of steps[i].
  for (size_t i = steps.size() - 1; i-- > 0;) {
    const LineageNode& parent = steps[i + 1];
    const LineageNode& child = steps[i];
    skerry::v1::OriginShare& share = shares[child.origin()];
    share.set_origin(child.origin());
    share.set_steps(share.steps() + 1);
    if (parent.key().island() != child.key().island()) {
      skerry::v1::IslandCrossing* c = out.add_crossings();
      c->set_generation(child.key().generation());
      c->set_from_island(parent.key().island());
      c->set_to_island(child.key().island());
      c->set_origin(child.origin());
      c->set_child_id(child.id());
    }
    if (!Scored(parent) || !Scored(child)) continue;
    const double gain = Gain(line.objective, parent, child);
    total += gain;
    if (gain > 0) {
      share.set_improvements(share.improvements() + 1);
      share.set_gain(share.gain() + gain);
      skerry::v1::DescentStep* step = out.add_improvements();
      *step->mutable_parent() = parent;
      *step->mutable_child() = child;
      step->set_gain(gain);
      step->set_scored(true);
    } else if (gain < 0) {
      share.set_loss(share.loss() - gain);
    }
  }
  out.set_total_gain(total);
  for (auto& [origin, share] : shares) *out.add_origins() = std::move(share);
  return out;
}

namespace {

// One side of the common-ancestor search: ancestors not yet expanded, by
// generation, newest first.
using Frontier =
    std::map<uint32_t, std::unordered_set<uint64_t>, std::greater<uint32_t>>;

// What the search needs of a genome: its generation and parents.
struct Link {
  uint32_t generation = 0;
  uint64_t parent_a = 0;
  uint64_t parent_b = 0;
};

// Genomes read so far, shared by both sides. Reads only the three columns the
// search needs; whole nodes are read for the answer alone.
class LinkCache {
 public:
  static absl::StatusOr<LinkCache> Make(store::Connection* conn,
                                        uint64_t limit) {
    SKERRY_ASSIGN_OR_RETURN(
        store::Statement stmt,
        conn->Prepare("SELECT generation, parent_a, parent_b FROM genomes "
                      "WHERE id = ?1"));
    return LinkCache(std::move(stmt), limit);
  }
  // `child` (0: none) names the genome whose parent `id` is, for messages.
  absl::StatusOr<Link> Get(uint64_t id, uint64_t child) {
    auto it = links_.find(id);
    if (it != links_.end()) return it->second;
    if (links_.size() >= limit_) {
      return absl::ResourceExhaustedError(
          absl::StrCat("common ancestor: gave up after reading ", limit_,
                       " genomes without finding one"));
    }
    stmt_.Reset();
    stmt_.BindInt(1, static_cast<int64_t>(id));
    SKERRY_ASSIGN_OR_RETURN(bool row, stmt_.Step());
    if (!row) {
      return absl::DataLossError(absl::StrCat("genome #", child, ": parent #",
                                              id, " is not in the database"));
    }
    Link l;
    l.generation = static_cast<uint32_t>(stmt_.ColumnInt(0));
    l.parent_a = stmt_.ColumnIsNull(1) ? 0 : stmt_.ColumnInt(1);
    l.parent_b = stmt_.ColumnIsNull(2) ? 0 : stmt_.ColumnInt(2);
    links_.emplace(id, l);
    return l;
  }
  uint64_t size() const { return links_.size(); }

 private:
  LinkCache(store::Statement stmt, uint64_t limit)
      : stmt_(std::move(stmt)), limit_(limit) {}
  store::Statement stmt_;
  uint64_t limit_;
  std::unordered_map<uint64_t, Link> links_;
};

// Moves the genomes of `frontier`'s newest generation to their parents.
absl::Status Expand(Frontier& frontier, LinkCache& cache) {
  auto newest = frontier.begin();
  const uint32_t generation = newest->first;
  std::unordered_set<uint64_t> ids = std::move(newest->second);
  frontier.erase(newest);
  for (uint64_t id : ids) {
    SKERRY_ASSIGN_OR_RETURN(Link child, cache.Get(id, 0));
    for (uint64_t parent_id : {child.parent_a, child.parent_b}) {
      if (parent_id == 0) continue;
      SKERRY_ASSIGN_OR_RETURN(Link parent, cache.Get(parent_id, id));
      if (parent.generation >= generation) {
        return absl::DataLossError(
            absl::StrCat("genome #", id, ": parent #", parent_id,
                         " is not from an earlier generation"));
      }
      frontier[parent.generation].insert(parent_id);
    }
  }
  return absl::OkStatus();
}

uint32_t NewestOf(const Frontier& f) {
  return f.empty() ? 0 : f.begin()->first;
}

}  // namespace

absl::StatusOr<skerry::v1::CommonAncestorResponse>
LineageReader::CommonAncestor(const skerry::v1::GenomeRef& a,
                              const skerry::v1::GenomeRef& b) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  skerry::v1::CommonAncestorResponse out;
  SKERRY_ASSIGN_OR_RETURN(*out.mutable_a(),
                          internal::ResolveRef(conn.get(), a));
  SKERRY_ASSIGN_OR_RETURN(*out.mutable_b(),
                          internal::ResolveRef(conn.get(), b));
  SKERRY_ASSIGN_OR_RETURN(NodeFetcher fetch, NodeFetcher::Make(conn.get()));
  SKERRY_ASSIGN_OR_RETURN(LinkCache cache,
                          LinkCache::Make(conn.get(), options_.max_visited));
  Frontier fa, fb;
  fa[out.a().key().generation()].insert(out.a().id());
  fb[out.b().key().generation()].insert(out.b().id());
  // Every ancestor of a side in generation G is in its frontier once the
  // newer generations are expanded: the first G where the two meet holds the
  // most recent common ancestors. Bounded: each round removes one generation
  // from a frontier, and generations strictly decrease.
  while (!fa.empty() && !fb.empty()) {
    const uint32_t g = std::max(NewestOf(fa), NewestOf(fb));
    if (NewestOf(fa) == g && NewestOf(fb) == g) {
      std::vector<uint64_t> common;
      for (uint64_t id : fa.begin()->second) {
        if (fb.begin()->second.count(id) > 0) common.push_back(id);
      }
      if (!common.empty()) {
        std::sort(common.begin(), common.end());
        for (uint64_t id : common) {
          SKERRY_ASSIGN_OR_RETURN(*out.add_ancestors(),
                                  fetch.Require(static_cast<int64_t>(id)));
        }
        out.set_found(true);
        out.set_depth_a(out.a().key().generation() - g);
        out.set_depth_b(out.b().key().generation() - g);
        break;
      }
    }
    if (NewestOf(fa) == g) SKERRY_RETURN_IF_ERROR(Expand(fa, cache));
    if (NewestOf(fb) == g) SKERRY_RETURN_IF_ERROR(Expand(fb, cache));
  }
  out.set_visited(cache.size());
  return out;
}

}  // namespace skerry::lineage
