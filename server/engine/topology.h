// Migration topologies: which islands send emigrants to which, at the epoch
// that creates generation g (g a positive multiple of the interval).
//
//   RING             i sends to (i + 1) mod n
//   TWO_WAY_RING     i sends to (i - 1) mod n and (i + 1) mod n
//   FULLY_CONNECTED  i sends to every other island
//   RANDOM           i sends to `random_degree` distinct others, drawn afresh
//   each
//                    epoch from the stream (seed, i, g, kTopology, 0)
// Lists are sorted and free of duplicates; an island never sends to itself, so
// a run of one island has no migration.
//
// Thread safety: pure functions.
#ifndef SKERRY_SERVER_ENGINE_TOPOLOGY_H_
#define SKERRY_SERVER_ENGINE_TOPOLOGY_H_

#include <cstdint>
#include <vector>

#include "skerry/v1/spec.pb.h"

namespace skerry::engine {

// True when generation g is made with migration.
bool IsMigrationEpoch(const skerry::v1::RunSpec& spec, uint32_t generation);

std::vector<uint32_t> Destinations(const skerry::v1::RunSpec& spec,
                                   uint32_t island, uint32_t generation);
std::vector<uint32_t> Sources(const skerry::v1::RunSpec& spec, uint32_t island,
                              uint32_t generation);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_TOPOLOGY_H_
