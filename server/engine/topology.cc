#include "server/engine/topology.h"

#include <algorithm>

#include "common/random.h"

namespace skerry::engine {

bool IsMigrationEpoch(const skerry::v1::RunSpec& spec, uint32_t generation) {
  const auto& isl = spec.islands();
  return isl.count() > 1 && isl.interval() > 0 && isl.migrants() > 0 &&
         generation > 0 && generation % isl.interval() == 0;
}

std::vector<uint32_t> Destinations(const skerry::v1::RunSpec& spec,
                                   uint32_t island, uint32_t generation) {
  const uint32_t n = spec.islands().count();
  std::vector<uint32_t> out;
  if (n < 2) return out;
  switch (spec.islands().topology()) {
    case skerry::v1::TWO_WAY_RING:
      out = {(island + n - 1) % n, (island + 1) % n};
      break;
    case skerry::v1::FULLY_CONNECTED:
      for (uint32_t j = 0; j < n; ++j) {
        if (j != island) out.push_back(j);
      }
      break;
    case skerry::v1::RANDOM: {
      StreamKey key;
      key.run_seed = spec.seed();
      key.island = island;
      key.generation = generation;
      key.purpose = StreamPurpose::kTopology;
      RandomStream rng(key);
      // Partial Fisher-Yates over the other islands.
      std::vector<uint32_t> others;
      for (uint32_t j = 0; j < n; ++j) {
        if (j != island) others.push_back(j);
      }
      const uint32_t k = std::min<uint32_t>(
          std::max<uint32_t>(1, spec.islands().random_degree()),
          static_cast<uint32_t>(others.size()));
      for (uint32_t i = 0; i < k; ++i) {
        const uint32_t j =
            i + static_cast<uint32_t>(rng.Below(others.size() - i));
        std::swap(others[i], others[j]);
      }
      out.assign(others.begin(), others.begin() + k);
      break;
    }
    case skerry::v1::RING:
    default:
      out = {(island + 1) % n};
  }
  std::sort(out.begin(), out.end());
  out.erase(std::unique(out.begin(), out.end()), out.end());
  out.erase(std::remove(out.begin(), out.end(), island), out.end());
  return out;
}

std::vector<uint32_t> Sources(const skerry::v1::RunSpec& spec, uint32_t island,
                              uint32_t generation) {
  std::vector<uint32_t> out;
  for (uint32_t j = 0; j < spec.islands().count(); ++j) {
    if (j == island) continue;
    const std::vector<uint32_t> d = Destinations(spec, j, generation);
    if (std::binary_search(d.begin(), d.end(), island)) out.push_back(j);
  }
  return out;
}

}  // namespace skerry::engine
