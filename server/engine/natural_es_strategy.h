// Natural-gradient ES islands (the algorithm in natural_es.h; the behaviour
// at the top of natural_es_strategy.cc and in docs/strategies.md). Made by
// MakeStrategy.
//
// Thread safety: as strategy.h.
#ifndef SKERRY_SERVER_ENGINE_NATURAL_ES_STRATEGY_H_
#define SKERRY_SERVER_ENGINE_NATURAL_ES_STRATEGY_H_

#include <cstdint>
#include <memory>

#include "server/engine/strategy.h"

namespace skerry::engine {

// REQUIRES: the spec's strategy is natural_es, validated.
std::unique_ptr<Strategy> MakeNaturalEsStrategy(const skerry::v1::RunSpec& spec,
                                                uint32_t island);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_NATURAL_ES_STRATEGY_H_
