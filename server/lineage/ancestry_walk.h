// Internal to server/lineage: a walk up the ancestry of one or two sets of
// genomes, one generation at a time, newest first. Ancestors, coalescence
// and the common ancestor are all built on it.
//
// Each generation is expanded as a batch: the parents of every genome in it
// (on both sides) are collected, deduplicated and sorted, and read with one
// prepared statement as rowid ranges. The genomes of one island's generation
// have neighbouring ids, so most ranges are dense: one B-tree descent, then
// sequential rows, where a recursive CTE makes one descent per genome and
// keeps every row in a deduplicating index. Only the node columns are read
// (kNodeColumns: never the genes), into plain NodeRow values, and there is no
// hash table on the common path: a generation is a vector sorted by id,
// deduplicated through a bitmap over its id range.
//
// Every genome is read once. Every parent link in Skerry goes back exactly
// one generation, so a genome of generation g - 1 can only be reached while
// generation g is expanded, where the batch deduplicates it. A parent found
// further back (not made by Skerry, but accepted) is remembered, so that a
// later generation reaching it does not read it again. The one link within a
// generation, an evolution strategy's sample to its distribution genome, puts
// the distribution genome (stored first, so of a smaller id than every genome
// expanded with it) back into generation g, which comes round again: Newest()
// may name a generation twice in a row, never a newer one.
//
// Thread safety: none; one walk per connection, on one thread.
#ifndef SKERRY_SERVER_LINEAGE_ANCESTRY_WALK_H_
#define SKERRY_SERVER_LINEAGE_ANCESTRY_WALK_H_

#include <cstdint>
#include <functional>
#include <limits>
#include <map>
#include <unordered_map>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "server/lineage/node_sql.h"
#include "server/store/sqlite.h"

namespace skerry::lineage::internal {

// Sorts `ids` and drops repeats: through a bitmap over [min, max] when that
// range is at most 64 times the count (the ids of a few islands' generation
// are), else by sorting. `scratch` holds the bitmap between calls.
void SortUnique(std::vector<uint64_t>& ids, std::vector<uint64_t>& scratch);

class AncestryWalk {
 public:
  static constexpr int kSides = 2;

  // What is read of each genome.
  enum class Columns {
    kNodes,  // every column of a NodeRow (kNodeColumns)
    kLinks,  // id, island, generation and parents; the rest stays 0
  };

  // A walk that reads no genome older than generation `oldest` and gives up
  // (ResourceExhausted) rather than read more than `limit` genomes.
  static absl::StatusOr<AncestryWalk> Make(
      store::Connection* conn, Columns columns, uint32_t oldest,
      uint64_t limit = std::numeric_limits<uint64_t>::max());

  // Adds a genome (already read, e.g. resolved) to a side.
  void Start(int side, const NodeRow& genome);

  bool empty(int side) const { return sides_[side].empty(); }
  // The newest generation a side has not expanded yet; REQUIRES !empty(side).
  uint32_t Newest(int side) const { return sides_[side].begin()->first; }
  // That generation's genomes, sorted by id, each once.
  const std::vector<NodeRow>& NewestGenomes(int side);

  // Replaces generation g, on each side whose newest generation it is, by
  // the parents of its genomes that are no older than `oldest`. DataLoss
  // names a dangling parent link or a parent that is not older.
  absl::Status Expand(uint32_t g);

  // Genomes read: each starting genome once its generation is expanded (its
  // row was read to resolve it), and every parent read.
  uint64_t read() const { return read_; }

 private:
  using Generations =
      std::map<uint32_t, std::vector<NodeRow>, std::greater<uint32_t>>;

  AncestryWalk(store::Statement range, Columns columns, uint32_t oldest,
               uint64_t limit)
      : range_(std::move(range)),
        columns_(columns),
        oldest_(oldest),
        limit_(limit) {}
  absl::Status ReadWanted();
  absl::Status ReadRanges();
  absl::Status Descend(int side, uint32_t g);
  uint64_t ChildOf(int side, uint64_t parent) const;

  store::Statement range_;  // rows with ?1 <= id <= ?2
  Columns columns_;
  uint32_t oldest_;
  uint64_t limit_;
  Generations sides_[kSides];
  // Starting genomes not yet counted as read, by side and generation.
  std::map<uint32_t, uint64_t> starts_[kSides];
  uint64_t read_ = 0;
  // Genomes read whose parent link skipped generations.
  std::unordered_map<uint64_t, NodeRow> skipped_;
  // Scratch of one expansion, kept to save allocations.
  std::vector<NodeRow> layers_[kSides];
  std::vector<uint64_t> parents_[kSides];
  std::vector<uint64_t> wanted_;
  std::vector<uint64_t> bits_;
  std::vector<NodeRow> rows_;  // the rows of wanted_, by id
};

}  // namespace skerry::lineage::internal

#endif  // SKERRY_SERVER_LINEAGE_ANCESTRY_WALK_H_
