// RebuildChildren (replay.h).
#include "server/store/replay.h"

#include <algorithm>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/status_macros.h"

namespace skerry::store {
namespace {

struct Node {
  std::optional<ChildRecipe> recipe;  // set while the genes are to be built
  int64_t parents[2] = {0, 0};
  int parent_count = 0;
  std::shared_ptr<const std::vector<double>> genes;
  int users = 0;        // children in the ancestry not yet built
  bool target = false;  // one of the genomes asked for: never released
};

absl::Status Lost(int64_t id, absl::string_view what) {
  return absl::DataLossError(absl::StrCat("genome ", id, ": ", what,
                                          ", so its genes cannot be rebuilt"));
}

}  // namespace

absl::Status RebuildChildren(const GenomeReader& read,
                             std::vector<GenomeRecord>* genomes,
                             const GeneCache* known) {
  absl::flat_hash_map<int64_t, Node> nodes;
  std::vector<int64_t> open;  // nodes whose parents are not yet looked up
  auto add_recipe = [&](int64_t id, const GenomeRecord& g, Node* n) {
    n->recipe = *g.child_recipe;
    n->parent_count = ParentsOf(g.child_recipe->kind);
    n->parents[0] = g.parent_a;
    n->parents[1] = g.parent_b;
    open.push_back(id);
  };
  for (GenomeRecord& g : *genomes) {
    Node& n = nodes[g.id];
    n.target = true;
    if (!g.genes.empty()) {
      // Not owned: `genomes` outlives the nodes.
      n.genes = std::shared_ptr<const std::vector<double>>(
          std::shared_ptr<void>(), &g.genes);
    } else if (g.child_recipe.has_value() && !n.recipe.has_value()) {
      add_recipe(g.id, g, &n);
    }
  }
  if (open.empty()) return absl::OkStatus();

  // The ancestry: every node reached from a recipe, read once.
  while (!open.empty()) {
    const int64_t id = open.back();
    open.pop_back();
    const Node child = nodes[id];  // a copy: the map may grow below
    for (int k = 0; k < child.parent_count; ++k) {
      const int64_t p = child.parents[k];
      if (p == 0) {
        return Lost(id,
                    absl::StrCat("its recipe needs parent ", k == 0 ? "a" : "b",
                                 " but the row names none"));
      }
      if (p >= id) {
        return Lost(id, absl::StrCat("its parent #", p, " is not older"));
      }
      auto it = nodes.find(p);
      if (it == nodes.end()) {
        Node n;
        if (known != nullptr) {
          const auto cached = known->find(p);
          if (cached != known->end()) n.genes = cached->second;
        }
        if (n.genes == nullptr) {
          SKERRY_ASSIGN_OR_RETURN(std::optional<GenomeRecord> row, read(p));
          if (!row.has_value()) {
            return Lost(
                id, absl::StrCat("its parent #", p, " is not in the database"));
          }
          if (!row->genes.empty()) {
            n.genes = std::make_shared<const std::vector<double>>(
                std::move(row->genes));
          } else if (row->child_recipe.has_value()) {
            add_recipe(p, *row, &n);
          } else {
            return Lost(id, absl::StrCat("its parent #", p,
                                         " holds neither genes nor a recipe"));
          }
        }
        it = nodes.emplace(p, std::move(n)).first;
      }
      ++it->second.users;
    }
  }

  // Forward, oldest first.
  std::vector<int64_t> order;
  for (const auto& [id, n] : nodes) {
    if (n.recipe.has_value() && n.genes == nullptr) order.push_back(id);
  }
  std::sort(order.begin(), order.end());
  static const std::vector<double> kNone;
  for (const int64_t id : order) {
    Node& n = nodes[id];
    const std::vector<double>* in[2] = {&kNone, &kNone};
    for (int k = 0; k < n.parent_count; ++k) {
      const Node& p = nodes[n.parents[k]];
      if (p.genes == nullptr) {
        return Lost(id, absl::StrCat("its parent #", n.parents[k],
                                     " was not rebuilt before it"));
      }
      in[k] = p.genes.get();
    }
    if (n.recipe->kind == ChildKind::kCopy) {
      n.genes = nodes[n.parents[0]].genes;  // the same genes, shared
    } else {
      absl::StatusOr<std::vector<double>> genes =
          BuildChild(*n.recipe, *in[0], *in[1]);
      if (!genes.ok()) return Lost(id, genes.status().message());
      n.genes = std::make_shared<const std::vector<double>>(*std::move(genes));
    }
    for (int k = 0; k < n.parent_count; ++k) {
      Node& p = nodes[n.parents[k]];
      if (--p.users == 0 && !p.target) p.genes.reset();
    }
  }
  for (GenomeRecord& g : *genomes) {
    if (!g.genes.empty() || !g.child_recipe.has_value()) continue;
    g.genes = *nodes[g.id].genes;
  }
  return absl::OkStatus();
}

}  // namespace skerry::store
