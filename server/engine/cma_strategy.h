// CMA-ES and sep-CMA-ES islands (the behaviour is described at the top of
// cma_strategy.cc and in docs/strategies.md). Made by MakeStrategy.
//
// Thread safety: as strategy.h.
#ifndef SKERRY_SERVER_ENGINE_CMA_STRATEGY_H_
#define SKERRY_SERVER_ENGINE_CMA_STRATEGY_H_

#include <cstdint>
#include <memory>

#include "server/engine/strategy.h"

namespace skerry::engine {

// REQUIRES: the spec's strategy is cma_es or sep_cma_es, validated.
std::unique_ptr<Strategy> MakeCmaStrategy(const skerry::v1::RunSpec& spec,
                                          uint32_t island);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_CMA_STRATEGY_H_
