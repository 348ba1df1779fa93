#include "server/lineage/ancestry_walk.h"

#include <algorithm>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/row_sums.h"

namespace skerry::lineage::internal {
namespace {

// A range may read through this many unwanted rows between two wanted ids
// rather than start a new B-tree descent. On the 10M-genome bench store any
// value from 4 to 128 gave the same time within noise: a row costs a few
// times less than a descent.
constexpr uint64_t kRangeGap = 16;

bool ById(const NodeRow& x, const NodeRow& y) { return x.id < y.id; }

// Sorts a generation by id and drops repeats, unless it is so already (it is
// unless a parent link skipped generations).
void Normalise(std::vector<NodeRow>& layer) {
  auto not_before = [](const NodeRow& x, const NodeRow& y) {
    return x.id >= y.id;
  };
  if (std::adjacent_find(layer.begin(), layer.end(), not_before) ==
      layer.end()) {
    return;
  }
  std::sort(layer.begin(), layer.end(), ById);
  layer.erase(std::unique(layer.begin(), layer.end(),
                          [](const NodeRow& x, const NodeRow& y) {
                            return x.id == y.id;
                          }),
              layer.end());
}

// The columns of Columns::kLinks, in the order ReadLink expects.
constexpr char kLinkColumns[] = "id, island, generation, parent_a, parent_b";

NodeRow ReadLink(const store::Statement& s) {
  NodeRow r;
  r.id = static_cast<uint64_t>(s.ColumnInt(0));
  r.island = static_cast<uint32_t>(s.ColumnInt(1));
  r.generation = static_cast<uint32_t>(s.ColumnInt(2));
  r.parent_a = static_cast<uint64_t>(s.ColumnInt(3));  // NULL reads as 0
  r.parent_b = static_cast<uint64_t>(s.ColumnInt(4));
  return r;
}

}  // namespace

void SortUnique(std::vector<uint64_t>& ids, std::vector<uint64_t>& bits) {
  if (ids.size() > 32) {
    const auto [lo_it, hi_it] = std::minmax_element(ids.begin(), ids.end());
    const uint64_t lo = *lo_it;
    const uint64_t span = *hi_it - lo + 1;
    if (span / 64 <= ids.size()) {
      bits.assign(span / 64 + 1, 0);
      for (uint64_t id : ids) {
        bits[(id - lo) / 64] |= uint64_t{1} << (id - lo) % 64;
      }
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

absl::StatusOr<AncestryWalk> AncestryWalk::Make(store::Connection* conn,
                                                Columns columns,
                                                uint32_t oldest,
                                                uint64_t limit) {
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement range,
      conn->Prepare(absl::StrCat(
          "SELECT ", columns == Columns::kNodes ? kNodeColumns : kLinkColumns,
          " FROM genomes WHERE id >= ?1 AND id <= ?2 AND ",
          store::kGenomeChecked)));
  return AncestryWalk(std::move(range), columns, oldest, limit);
}

void AncestryWalk::Start(int side, const NodeRow& genome) {
  sides_[side][genome.generation].push_back(genome);
  ++starts_[side][genome.generation];
}

const std::vector<NodeRow>& AncestryWalk::NewestGenomes(int side) {
  std::vector<NodeRow>& layer = sides_[side].begin()->second;
  Normalise(layer);
  return layer;
}

absl::Status AncestryWalk::Expand(uint32_t g) {
  wanted_.clear();
  for (int s = 0; s < kSides; ++s) {
    layers_[s].clear();
    parents_[s].clear();
    if (empty(s) || Newest(s) != g) continue;
    layers_[s] = std::move(sides_[s].begin()->second);
    sides_[s].erase(sides_[s].begin());
    Normalise(layers_[s]);  // by id, for Descend
    auto start = starts_[s].find(g);
    if (start != starts_[s].end()) {
      read_ += start->second;
      starts_[s].erase(start);
    }
    if (g <= oldest_) continue;  // every parent is older than `oldest`
    for (const NodeRow& child : layers_[s]) {
      if (child.parent_a != 0) parents_[s].push_back(child.parent_a);
      if (child.parent_b != 0) parents_[s].push_back(child.parent_b);
    }
    SortUnique(parents_[s], bits_);
    wanted_.insert(wanted_.end(), parents_[s].begin(), parents_[s].end());
  }
  if (wanted_.empty()) return absl::OkStatus();
  SortUnique(wanted_, bits_);
  SKERRY_RETURN_IF_ERROR(ReadWanted());
  for (int s = 0; s < kSides; ++s) SKERRY_RETURN_IF_ERROR(Descend(s, g));
  return absl::OkStatus();
}

// Fills rows_ (sorted by id) with the rows of wanted_: remembered ones from
// skipped_, the rest from the database.
absl::Status AncestryWalk::ReadWanted() {
  rows_.clear();
  if (!skipped_.empty()) {
    auto remembered = [this](uint64_t id) {
      auto it = skipped_.find(id);
      if (it == skipped_.end()) return false;
      rows_.push_back(it->second);
      return true;
    };
    wanted_.erase(std::remove_if(wanted_.begin(), wanted_.end(), remembered),
                  wanted_.end());
  }
  if (wanted_.size() > limit_ || read_ > limit_ - wanted_.size()) {
    return absl::ResourceExhaustedError(
        absl::StrCat("gave up after reading ", read_, " genomes (the limit is ",
                     limit_, ")"));
  }
  const size_t remembered = rows_.size();
  SKERRY_RETURN_IF_ERROR(ReadRanges());
  read_ += rows_.size() - remembered;
  if (remembered > 0) std::sort(rows_.begin(), rows_.end(), ById);
  return absl::OkStatus();
}

// Appends the rows of wanted_ that exist to rows_, in id order; Descend finds
// the missing ones.
absl::Status AncestryWalk::ReadRanges() {
  size_t first = 0;
  while (first < wanted_.size()) {
    size_t last = first;
    while (last + 1 < wanted_.size() &&
           wanted_[last + 1] - wanted_[last] <= kRangeGap) {
      ++last;
    }
    range_.Reset();
    range_.BindInt(1, static_cast<int64_t>(wanted_[first]));
    range_.BindInt(2, static_cast<int64_t>(wanted_[last]));
    size_t next = first;  // the next wanted id
    for (;;) {
      SKERRY_ASSIGN_OR_RETURN(bool row, range_.Step());
      if (!row) break;
      const uint64_t id = static_cast<uint64_t>(range_.ColumnInt(0));
      while (next <= last && wanted_[next] < id) ++next;  // missing ones
      if (next > last || wanted_[next] != id) continue;
      rows_.push_back(columns_ == Columns::kNodes ? ReadRow(range_)
                                                  : ReadLink(range_));
      ++next;
    }
    first = last + 1;
  }
  return absl::OkStatus();
}

// Moves side s's parents (parents_[s], sorted) from rows_ to their
// generations, checking every link.
absl::Status AncestryWalk::Descend(int s, uint32_t g) {
  std::vector<NodeRow>* older = nullptr;  // made when first needed
  // A sample's distribution genome is of the sample's own generation, and
  // older than every genome it is the parent of (stored first, a smaller
  // id): it joins generation g again, to be expanded in turn. Requiring an
  // id below the layer's largest makes each round at g end lower, so a
  // damaged cycle cannot walk forever.
  const uint64_t last_child = layers_[s].empty() ? 0 : layers_[s].back().id;
  auto k = rows_.begin();
  for (uint64_t id : parents_[s]) {
    while (k != rows_.end() && k->id < id) ++k;
    if (k == rows_.end() || k->id != id) {
      return absl::DataLossError(absl::StrCat("genome #", ChildOf(s, id),
                                              ": parent #", id,
                                              " is not in the database"));
    }
    if (k->generation == g) {
      // Expanded with its samples already (both in the layer): done.
      if (std::binary_search(layers_[s].begin(), layers_[s].end(), *k, ById)) {
        continue;
      }
      if (k->id < last_child) {
        sides_[s][g].push_back(*k);
        continue;
      }
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
      if (k->generation >= oldest_) sides_[s][k->generation].push_back(*k);
    }
  }
  return absl::OkStatus();
}

// A genome of the generation being expanded on side s with that parent.
uint64_t AncestryWalk::ChildOf(int s, uint64_t parent) const {
  for (const NodeRow& child : layers_[s]) {
    if (child.parent_a == parent || child.parent_b == parent) return child.id;
  }
  return 0;
}

}  // namespace skerry::lineage::internal
