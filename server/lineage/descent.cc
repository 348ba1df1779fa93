// The chain-valued lineage queries: the line of descent and attribution along
// it. The most recent common ancestor is in common_ancestor.cc.
#include <algorithm>
#include <map>
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
using internal::NodeRow;
using internal::ReadTransaction;
using internal::ToNode;
using skerry::v1::Objective;

// True when the line of descent goes through parent b rather than parent a
// (the rule in lineage.proto: scored beats failed, better score wins, ties to
// a).
bool PreferB(Objective objective, const NodeRow& a, const NodeRow& b) {
  if (!b.scored()) return false;
  if (!a.scored()) return true;
  return internal::Better(objective, b.score, a.score);
}

// Older by generation, or (a sample's distribution genome) of the same
// generation and stored before it: either way the walk ends.
absl::Status CheckOlder(const NodeRow& parent, const NodeRow& child) {
  if (parent.generation < child.generation) return absl::OkStatus();
  if (parent.generation == child.generation && parent.id < child.id) {
    return absl::OkStatus();
  }
  return absl::DataLossError(
      absl::StrCat("genome ", NodeName(child), ": parent ", NodeName(parent),
                   " is not from an earlier generation"));
}

// The line from `genome` back to its founder; steps[0] is the genome. One
// prepared statement reads every parent by primary key, as plain values: only
// the steps of the answer become LineageNodes, later.
absl::StatusOr<std::vector<NodeRow>> WalkLine(store::Connection* conn,
                                              Objective objective,
                                              const NodeRow& genome) {
  SKERRY_ASSIGN_OR_RETURN(NodeFetcher fetch, NodeFetcher::Make(conn));
  std::vector<NodeRow> steps;
  steps.reserve(genome.generation + 1);
  steps.push_back(genome);
  // Bounded: generations strictly decrease along the line (CheckOlder).
  while (steps.back().parent_a != 0) {
    const NodeRow child = steps.back();
    SKERRY_ASSIGN_OR_RETURN(
        NodeRow next,
        fetch.RequireRow(static_cast<int64_t>(child.parent_a), &child));
    if (child.parent_b != 0) {
      SKERRY_ASSIGN_OR_RETURN(
          NodeRow b,
          fetch.RequireRow(static_cast<int64_t>(child.parent_b), &child));
      if (PreferB(objective, next, b)) next = b;
    }
    SKERRY_RETURN_IF_ERROR(CheckOlder(next, child));
    steps.push_back(next);
  }
  return steps;
}

struct LineContext {
  Objective objective = skerry::v1::MINIMIZE;
  std::vector<NodeRow> steps;
};

absl::StatusOr<LineContext> Line(store::Connection* conn,
                                 const skerry::v1::GenomeRef& ref) {
  SKERRY_ASSIGN_OR_RETURN(skerry::v1::LineageNode genome,
                          internal::ResolveRef(conn, ref));
  SKERRY_ASSIGN_OR_RETURN(skerry::v1::RunSpec spec,
                          internal::RunSpecOf(conn, genome.key().run_id()));
  LineContext line;
  line.objective = spec.objective() == skerry::v1::MAXIMIZE
                       ? skerry::v1::MAXIMIZE
                       : skerry::v1::MINIMIZE;
  SKERRY_ASSIGN_OR_RETURN(
      line.steps, WalkLine(conn, line.objective, internal::RowOf(genome)));
  return line;
}

// The change from parent to child in the objective's direction.
double Gain(Objective objective, const NodeRow& parent, const NodeRow& child) {
  return objective == skerry::v1::MAXIMIZE ? child.score - parent.score
                                           : parent.score - child.score;
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
  out.mutable_steps()->Reserve(static_cast<int>(line.steps.size()));
  for (const NodeRow& n : line.steps) ToNode(n, out.add_steps());
  return out;
}

absl::StatusOr<skerry::v1::AttributionResponse> LineageReader::Attribution(
    const skerry::v1::GenomeRef& ref) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  SKERRY_ASSIGN_OR_RETURN(LineContext line, Line(conn.get(), ref));
  const std::vector<NodeRow>& steps = line.steps;
  skerry::v1::AttributionResponse out;
  out.set_objective(line.objective);
  ToNode(steps.front(), out.mutable_genome());
  ToNode(steps.back(), out.mutable_founder());
  out.set_steps(static_cast<uint32_t>(steps.size() - 1));
  std::map<int, skerry::v1::OriginShare> shares;
  double total = 0.0;
  // Oldest first: steps[i + 1] is the parent of steps[i].
  for (size_t i = steps.size() - 1; i-- > 0;) {
    const NodeRow& parent = steps[i + 1];
    const NodeRow& child = steps[i];
    skerry::v1::OriginShare& share = shares[child.origin];
    share.set_origin(child.origin);
    share.set_steps(share.steps() + 1);
    if (parent.island != child.island) {
      skerry::v1::IslandCrossing* c = out.add_crossings();
      c->set_generation(child.generation);
      c->set_from_island(parent.island);
      c->set_to_island(child.island);
      c->set_origin(child.origin);
      c->set_child_id(child.id);
    }
    if (!parent.scored() || !child.scored()) continue;
    const double gain = Gain(line.objective, parent, child);
    total += gain;
    if (gain > 0) {
      share.set_improvements(share.improvements() + 1);
      share.set_gain(share.gain() + gain);
      skerry::v1::DescentStep* step = out.add_improvements();
      ToNode(parent, step->mutable_parent());
      ToNode(child, step->mutable_child());
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

}  // namespace skerry::lineage
