// The genes of GA genomes kept as their recipes (common/child_recipe.h),
// rebuilt by replaying their ancestry forward from the genomes kept whole.
//
// A genome kept as its recipe names its parents (parent_a, parent_b); each
// ancestor is either kept whole (a keyframe, or a run stored whole), or is a
// recipe itself, back to keyframes or to seeds and immigrants, which need no
// parent. RebuildChildren reads that ancestry (the rows, not yet the genes),
// then builds it forward, level by level: a genome's level is one more than
// that of its deepest parent still to build (a parent is always inserted
// before its child, so its id is smaller). The genomes of one level are
// independent of each other, and long ones are built on as many threads as
// the machine has cores. Each ancestor's genes are held only until the level
// of its last child in the ancestry is built: what it holds at once is about
// two generations of the ancestry, however far back the keyframe is. A copy
// (an elite, a migrant) shares its parent's genes.
//
// Cost: one BuildChild per genome of the ancestry; with a keyframe every K
// generations and P genomes a generation, at most about P K of them
// (docs/strategies.md, "Genomes kept as recipes").
//
// Thread safety: a pure function of what `read` gives; `read` is called on
// the calling thread only.
#ifndef SKERRY_SERVER_STORE_REPLAY_H_
#define SKERRY_SERVER_STORE_REPLAY_H_

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "absl/status/statusor.h"
#include "server/store/records.h"

namespace skerry::store {

// Genes already at hand, by genome id.
using GeneCache =
    absl::flat_hash_map<int64_t, std::shared_ptr<const std::vector<double>>>;

// The genome of id `id` as the store reads it (genes when kept whole, else
// its recipe), or nullopt when there is no such row.
using GenomeReader =
    std::function<absl::StatusOr<std::optional<GenomeRecord>>(int64_t id)>;

// Gives every genome of `genomes` that has a child recipe and no genes its
// genes. Ancestors come from `known` (may be null) when there, else from
// `read`. DataLoss naming the genome when an ancestor is missing, names no
// parent where its recipe needs one, is not older than its child, holds
// neither genes nor a recipe, or when a recipe does not build.
absl::Status RebuildChildren(const GenomeReader& read,
                             std::vector<GenomeRecord>* genomes,
                             const GeneCache* known = nullptr);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_REPLAY_H_
