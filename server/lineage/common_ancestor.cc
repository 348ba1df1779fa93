// The most recent common ancestors of two genomes (lineage.proto,
// CommonAncestorResponse): the common ancestors of the newest generation that
// has any, a genome counting as its own ancestor. All ancestors that tie in
// that generation are listed, by id.
//
// The search walks both ancestries one generation at a time, newest first,
// and stops at the first generation where they share a genome. It must read
// every ancestor of both genomes in the generations above that one (a
// generation without a shared genome is only known to be one when both sides
// are complete), so the work is that of the answer; what is made cheap is the
// cost per genome:
//
//   - A generation is expanded as a batch: the parents of every genome in it
//     (both sides together) are collected, deduplicated and sorted, and read
//     with one prepared statement as rowid ranges. The genomes of one
//     island's generation have neighbouring ids, so most ranges are dense:
//     one B-tree descent, then sequential rows, instead of a descent per
//     genome. Gaps of up to kRangeGap unwanted rows are read through.
//   - Only (id, generation, parent_a, parent_b) are read; whole nodes are read
//     for the answer alone.
//   - No hash tables on the common path: each side's generation is a vector
//     sorted by id, deduplicated through a bitmap over its id range.
//
// Every genome is read once. Every parent link in Skerry goes back exactly
// one generation, so a genome of generation g - 1 can only be reached while
// generation g is expanded, where the batch deduplicates it. A parent found
// further back (not made by Skerry, but accepted) is remembered, so that it
// is not read again when a later generation reaches it too.
#include <algorithm>
#include <functional>
#include <map>
#include <unordered_map>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/types/span.h"
#include "common/status_macros.h"
#include "server/lineage/lineage_reader.h"
#include "server/lineage/node_sql.h"

namespace skerry::lineage {
namespace {

using internal::NodeFetcher;
using internal::ReadTransaction;
using skerry::v1::LineageNode;

// A range may read through this many unwanted rows between two wanted ids
// rather than start a new B-tree descent. On the 10M-genome bench store any
// value from 4 to 128 gave the same time within noise; a row costs a few
// times less than a descent.
constexpr uint64_t kRangeGap = 16;

// What the search keeps of a genome.
struct Link {
  uint64_t id = 0;
  uint64_t parent_a = 0;  // 0: none
  uint64_t parent_b = 0;
  uint32_t generation = 0;
};

Link LinkOf(const LineageNode& n) {
  return Link{n.id(), n.parent_a(), n.parent_b(), n.key().generation()};
}

// Sorts `ids` and drops repeats. Through a bitmap over [min, max] when that
// range is at most 64 times the count (the ids of a few islands' generation
// are), else by sorting.
void SortUnique(std::vector<uint64_t>& ids, std::vector<uint64_t>& bits) {
  if (ids.size() > 32) {
    const auto [lo_it, hi_it] = std::minmax_element(ids.begin(), ids.end());
    const uint64_t lo = *lo_it;
    const uint64_t span = *hi_it - lo + 1;
    if (span / 64 <= ids.size()) {
      bits.assign(span / 64 + 1, 0);
      for (uint64_t id : ids)
        bits[(id - lo) / 64] |= uint64_t{1} << (id - lo) % 64;
      ids.clear();
      for (size_t w = 0; w < bits.size(); ++w) {
        for (uint64_t word = bits[w]; word != 0; word &= word - 1) {
          ids.push_back(lo + w * 64 + __builtin_ctzll(word));
        }
      }
      return;
    }
  }
  std::sort(ids.begin(), ids.end());
  ids.erase(std::unique(ids.begin(), ids.end()), ids.end());
}

// Reads the links of sorted ids with one prepared range statement.
class LinkReader {
 public:
  static absl::StatusOr<LinkReader> Make(store::Connection* conn) {
    SKERRY_ASSIGN_OR_RETURN(
        store::Statement stmt,
        conn->Prepare("SELECT id, generation, parent_a, parent_b FROM genomes "
                      "WHERE id >= ?1 AND id <= ?2"));
    return LinkReader(std::move(stmt));
  }

  // Appends the links of `ids` (sorted, unique) that exist to `out`, in id
  // order; the caller finds the missing ones.
  absl::Status Read(absl::Span<const uint64_t> ids, std::vector<Link>& out) {
    size_t first = 0;
    while (first < ids.size()) {
      size_t last = first;
      while (last + 1 < ids.size() && ids[last + 1] - ids[last] <= kRangeGap) {
        ++last;
      }
      stmt_.Reset();
      stmt_.BindInt(1, static_cast<int64_t>(ids[first]));
      stmt_.BindInt(2, static_cast<int64_t>(ids[last]));
      size_t next = first;  // the next wanted id
      for (;;) {
        SKERRY_ASSIGN_OR_RETURN(bool row, stmt_.Step());
        if (!row) break;
        const uint64_t id = static_cast<uint64_t>(stmt_.ColumnInt(0));
        while (next <= last && ids[next] < id) ++next;  // missing ones
        if (next > last || ids[next] != id) continue;
        out.push_back(Link{id, static_cast<uint64_t>(stmt_.ColumnInt(2)),
                           static_cast<uint64_t>(stmt_.ColumnInt(3)),
                           static_cast<uint32_t>(stmt_.ColumnInt(1))});
        ++next;
      }
      first = last + 1;
    }
    return absl::OkStatus();
  }

 private:
  explicit LinkReader(store::Statement stmt) : stmt_(std::move(stmt)) {}
  store::Statement stmt_;
};

// One side's ancestors not yet expanded: by generation, newest first; each
// generation sorted by id, without repeats.
using Frontier = std::map<uint32_t, std::vector<Link>, std::greater<uint32_t>>;

uint32_t NewestOf(const Frontier& f) {
  return f.empty() ? 0 : f.begin()->first;
}

// Sorts a generation by id and drops repeats, if it is not so already (it
// is unless a parent link skipped generations).
void Normalise(std::vector<Link>& layer) {
  auto by_id = [](const Link& x, const Link& y) { return x.id < y.id; };
  auto not_before = [](const Link& x, const Link& y) { return x.id >= y.id; };
  if (std::adjacent_find(layer.begin(), layer.end(), not_before) ==
      layer.end()) {
    return;
  }
  std::sort(layer.begin(), layer.end(), by_id);
  layer.erase(
      std::unique(layer.begin(), layer.end(),
                  [](const Link& x, const Link& y) { return x.id == y.id; }),
      layer.end());
}

// Both sides of the search.
class Search {
 public:
  Search(LinkReader reader, uint64_t limit)
      : reader_(std::move(reader)), limit_(limit) {}

  void Start(int side, const LineageNode& genome) {
    sides_[side][genome.key().generation()].push_back(LinkOf(genome));
  }

  // Runs to the first generation where the sides share a genome, or until a
  // side has no ancestors left. `common` gets the shared ids, sorted.
  absl::Status Run(std::vector<uint64_t>& common, uint32_t& generation) {
    // Bounded: every round removes the newest generation of at least one
    // side, and parents are strictly older than their children.
    while (!sides_[0].empty() && !sides_[1].empty()) {
      const uint32_t g = std::max(NewestOf(sides_[0]), NewestOf(sides_[1]));
      for (Frontier& side : sides_) {
        if (NewestOf(side) == g) Normalise(side.begin()->second);
      }
      if (NewestOf(sides_[0]) == g && NewestOf(sides_[1]) == g) {
        SharedIds(sides_[0].begin()->second, sides_[1].begin()->second, common);
        if (!common.empty()) {
          generation = g;
          return absl::OkStatus();
        }
      }
      SKERRY_RETURN_IF_ERROR(Expand(g));
    }
    return absl::OkStatus();
  }

  // Genomes read to answer: each of the two genomes once it is expanded
  // (their own rows were read to resolve them), and every ancestor reached.
  uint64_t visited() const { return visited_; }

 private:
  static void SharedIds(const std::vector<Link>& a, const std::vector<Link>& b,
                        std::vector<uint64_t>& out) {
    auto i = a.begin();
    auto j = b.begin();
    while (i != a.end() && j != b.end()) {
      if (i->id < j->id) {
        ++i;
      } else if (j->id < i->id) {
        ++j;
      } else {
        out.push_back(i->id);
        ++i;
        ++j;
      }
    }
  }

  // Replaces generation g of each side that has it by the parents of its
  // genomes, read in one batch for both sides.
  absl::Status Expand(uint32_t g) {
    wanted_.clear();
    for (int s = 0; s < 2; ++s) {
      layers_[s].clear();
      parents_[s].clear();
      if (NewestOf(sides_[s]) != g) continue;
      layers_[s] = std::move(sides_[s].begin()->second);
      sides_[s].erase(sides_[s].begin());
      if (!started_[s]) {  // the side's first generation: its genome alone
        started_[s] = true;
        ++visited_;
      }
      for (const Link& child : layers_[s]) {
        if (child.parent_a != 0) parents_[s].push_back(child.parent_a);
        if (child.parent_b != 0) parents_[s].push_back(child.parent_b);
      }
      SortUnique(parents_[s], bits_);
      wanted_.insert(wanted_.end(), parents_[s].begin(), parents_[s].end());
    }
    SortUnique(wanted_, bits_);
    SKERRY_RETURN_IF_ERROR(ReadWanted());
    for (int s = 0; s < 2; ++s) SKERRY_RETURN_IF_ERROR(Descend(s, g));
    return absl::OkStatus();
  }

  // Fills read_ (sorted by id) with the links of wanted_: remembered ones
  // from skipped_, the rest from the database.
  absl::Status ReadWanted() {
    read_.clear();
    if (!skipped_.empty()) {
      auto remembered = [this](uint64_t id) {
        auto it = skipped_.find(id);
        if (it == skipped_.end()) return false;
        read_.push_back(it->second);
        return true;
      };
      wanted_.erase(std::remove_if(wanted_.begin(), wanted_.end(), remembered),
                    wanted_.end());
    }
    if (visited_ + wanted_.size() > limit_) {
      return absl::ResourceExhaustedError(absl::StrCat(
          "common ancestor: gave up after reading ", visited_,
          " genomes without finding one (the limit is ", limit_, ")"));
    }
    const size_t remembered = read_.size();
    SKERRY_RETURN_IF_ERROR(reader_.Read(wanted_, read_));
    visited_ += read_.size() - remembered;
    if (remembered > 0) {
      std::sort(read_.begin(), read_.end(),
                [](const Link& x, const Link& y) { return x.id < y.id; });
    }
    return absl::OkStatus();
  }

  // Moves side s's parents (parents_[s], sorted) from read_ to their
  // generations, checking every link.
  absl::Status Descend(int s, uint32_t g) {
    std::vector<Link>* older = nullptr;  // made when first needed
    auto k = read_.begin();
    for (uint64_t id : parents_[s]) {
      while (k != read_.end() && k->id < id) ++k;
      if (k == read_.end() || k->id != id) {
        return absl::DataLossError(absl::StrCat("genome #", ChildOf(s, id),
                                                ": parent #", id,
                                                " is not in the database"));
      }
      if (k->generation >= g) {
        return absl::DataLossError(
            absl::StrCat("genome #", ChildOf(s, id), ": parent #", id,
                         " is not from an earlier generation"));
      }
      if (k->generation + 1 == g) {
        if (older == nullptr) older = &sides_[s][g - 1];
        older->push_back(*k);
      } else {
        skipped_.emplace(k->id, *k);
        sides_[s][k->generation].push_back(*k);
      }
    }
    return absl::OkStatus();
  }

  // A genome of the generation being expanded on side s with parent `id`.
  uint64_t ChildOf(int s, uint64_t id) const {
    for (const Link& child : layers_[s]) {
      if (child.parent_a == id || child.parent_b == id) return child.id;
    }
    return 0;
  }

  LinkReader reader_;
  const uint64_t limit_;
  Frontier sides_[2];
  bool started_[2] = {false, false};
  uint64_t visited_ = 0;
  // Genomes read whose parent link skipped generations: kept, so that a later
  // generation reaching them does not read them again.
  std::unordered_map<uint64_t, Link> skipped_;
  // Scratch of one expansion, kept to save allocations.
  std::vector<Link> layers_[2];
  std::vector<uint64_t> parents_[2];
  std::vector<uint64_t> wanted_;
  std::vector<uint64_t> bits_;
  std::vector<Link> read_;
};

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
  SKERRY_ASSIGN_OR_RETURN(LinkReader links, LinkReader::Make(conn.get()));
  Search search(std::move(links), options_.max_visited);
  search.Start(0, out.a());
  search.Start(1, out.b());
  std::vector<uint64_t> common;
  uint32_t generation = 0;
  SKERRY_RETURN_IF_ERROR(search.Run(common, generation));
  if (!common.empty()) {
    SKERRY_ASSIGN_OR_RETURN(NodeFetcher fetch, NodeFetcher::Make(conn.get()));
    for (uint64_t id : common) {
      SKERRY_ASSIGN_OR_RETURN(*out.add_ancestors(),
                              fetch.Require(static_cast<int64_t>(id)));
    }
    out.set_found(true);
    out.set_depth_a(out.a().key().generation() - generation);
    out.set_depth_b(out.b().key().generation() - generation);
  }
  out.set_visited(search.visited());
  return out;
}

}  // namespace skerry::lineage
