// The digest of a stored run's genomes from one generation on, in the layout
// of DigestResponse (proto/skerry/v1/runs.proto), for the fork tests: an
// unchanged fork's digest over its generations equals its parent's over the
// same ones. Parent ids are resolved to natural keys through `all`, whichever
// run holds them.
//
// Thread safety: a pure function.
#ifndef SKERRY_TESTS_E2E_GENOME_DIGEST_H_
#define SKERRY_TESTS_E2E_GENOME_DIGEST_H_

#include <cstdint>
#include <cstring>
#include <map>
#include <string>
#include <vector>

#include "common/genes.h"
#include "common/sample_recipe.h"
#include "common/sha256.h"
#include "tests/support/db_check.h"

namespace skerry::testing {

// The float64 bytes of a stored genome's genes, whichever form the row has:
// a natural ES sample kept as its recipe is rebuilt from its distribution
// genome, found in `by_id` (common/sample_recipe.h), as the store's digest
// does. The raw bytes when they cannot be read.
inline std::string GenesBytes(
    const StoredGenome& g,
    const std::map<int64_t, const StoredGenome*>& by_id) {
  if (IsRecipe(g.genes)) {
    absl::StatusOr<SampleRecipe> r = UnpackRecipe(g.genes);
    auto centre = by_id.find(g.parent_a);
    if (!r.ok() || centre == by_id.end()) return g.genes;
    absl::StatusOr<std::vector<double>> c = UnpackGenes(centre->second->genes);
    if (!c.ok()) return g.genes;
    absl::StatusOr<std::vector<double>> built = BuildSample(*r, *c);
    if (!built.ok()) return g.genes;
    return Float64Bytes(PackGenes(*built)).value_or(g.genes);
  }
  return Float64Bytes(g.genes).value_or(g.genes);
}

inline std::string DigestFrom(const std::vector<StoredGenome>& run,
                              const std::vector<StoredGenome>& all, int from,
                              uint64_t* count) {
  std::map<int64_t, const StoredGenome*> by_id;
  for (const StoredGenome& g : all) by_id[g.id] = &g;
  Sha256 h;
  *count = 0;
  for (const StoredGenome& g : run) {
    if (g.generation < from) continue;
    for (int v : {g.island, g.generation, g.slot, g.origin}) {
      h.UpdateU32(static_cast<uint32_t>(v));
    }
    for (int64_t parent : {g.parent_a, g.parent_b}) {
      auto it = by_id.find(parent);
      if (parent == 0 || it == by_id.end()) {
        for (int i = 0; i < 3; ++i) h.UpdateU32(0xFFFFFFFFu);
      } else {
        h.UpdateU32(static_cast<uint32_t>(it->second->island));
        h.UpdateU32(static_cast<uint32_t>(it->second->generation));
        h.UpdateU32(static_cast<uint32_t>(it->second->slot));
      }
    }
    // The float64 form of the genes, whichever form the row has.
    const std::string genes = GenesBytes(g, by_id);
    h.UpdateU32(static_cast<uint32_t>(genes.size() / 8));
    h.Update(genes);
    h.UpdateU32(static_cast<uint32_t>(g.eval_state));
    uint64_t bits = 0;
    if (g.has_score) std::memcpy(&bits, &g.score, 8);
    h.UpdateU64(bits);
    ++*count;
  }
  return h.FinishHex();
}

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_E2E_GENOME_DIGEST_H_
