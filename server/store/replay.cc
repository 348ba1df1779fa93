// RebuildChildren (replay.h).
#include "server/store/replay.h"

#include <algorithm>
#include <atomic>
#include <functional>
#include <thread>
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

const std::vector<double> kNoGenes;

// Gene operations below which a level is built on the calling thread alone.
constexpr size_t kThreadedWork = 1 << 20;

// Calls `f(i)` for i in [0, count), on up to as many threads as the machine
// has cores when the work (count x genes) is large. The calls must be
// independent of each other.
void ForEachIndex(size_t count, uint32_t genes,
                  const std::function<void(size_t)>& f) {
  const size_t cores = std::max(1u, std::thread::hardware_concurrency());
  const size_t threads = std::min<size_t>(
      {cores, count, count * genes >= kThreadedWork ? count : size_t{1}});
  if (threads <= 1) {
    for (size_t i = 0; i < count; ++i) f(i);
    return;
  }
  std::atomic<size_t> next{0};
  auto work = [&] {
    for (size_t i = next++; i < count; i = next++) f(i);
  };
  std::vector<std::thread> pool;
  for (size_t t = 1; t < threads; ++t) pool.emplace_back(work);
  work();
  for (std::thread& t : pool) t.join();
}

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

  // Forward, by level: a genome's level is one more than its deepest parent
  // still to build, so the genomes of one level are independent of each
  // other and are built together, on several threads when they are long.
  std::vector<int64_t> order;
  for (const auto& [id, n] : nodes) {
    if (n.recipe.has_value() && n.genes == nullptr) order.push_back(id);
  }
  std::sort(order.begin(), order.end());  // parents first (smaller ids)
  absl::flat_hash_map<int64_t, int> level;
  std::vector<std::vector<int64_t>> levels;
  for (const int64_t id : order) {
    const Node& n = nodes[id];
    int l = 0;
    for (int k = 0; k < n.parent_count; ++k) {
      const auto it = level.find(n.parents[k]);
      if (it != level.end()) l = std::max(l, it->second + 1);
    }
    level[id] = l;
    if (levels.size() <= static_cast<size_t>(l)) levels.resize(l + 1);
    levels[l].push_back(id);
  }
  for (const std::vector<int64_t>& ids : levels) {
    if (ids.empty()) continue;
    std::vector<Node*> at;
    for (const int64_t id : ids) at.push_back(&nodes[id]);
    std::vector<absl::Status> status(ids.size());
    auto build = [&](size_t i) {
      Node& n = *at[i];
      const std::vector<double>* in[2] = {&kNoGenes, &kNoGenes};
      for (int k = 0; k < n.parent_count; ++k) {
        const Node& p = nodes.find(n.parents[k])->second;
        if (p.genes == nullptr) {
          status[i] = Lost(ids[i], absl::StrCat("its parent #", n.parents[k],
                                                " was not rebuilt before it"));
          return;
        }
        in[k] = p.genes.get();
      }
      if (n.recipe->kind == ChildKind::kCopy) {
        n.genes = nodes.find(n.parents[0])->second.genes;  // shared
        return;
      }
      absl::StatusOr<std::vector<double>> genes =
          BuildChild(*n.recipe, *in[0], *in[1]);
      if (!genes.ok()) {
        status[i] = Lost(ids[i], genes.status().message());
        return;
      }
      n.genes = std::make_shared<const std::vector<double>>(*std::move(genes));
    };
    ForEachIndex(ids.size(), at.front()->recipe->length, build);
    for (const absl::Status& st : status) {
      if (!st.ok()) return st;  // the first in id order
    }
    for (Node* n : at) {
      for (int k = 0; k < n->parent_count; ++k) {
        Node& p = nodes[n->parents[k]];
        if (--p.users == 0 && !p.target) p.genes.reset();
      }
    }
  }
  for (GenomeRecord& g : *genomes) {
    if (!g.genes.empty() || !g.child_recipe.has_value()) continue;
    g.genes = *nodes[g.id].genes;
  }
  return absl::OkStatus();
}

}  // namespace skerry::store
