// The `strategy` part of a run spec (spec.proto StrategySpec): which search
// strategy a run uses, its defaults and its checks. Called by NormalizeSpec and
// ValidateSpec (common/spec.h); the engine reads StrategyOf() to make each
// island's strategy.
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_STRATEGY_SPEC_H_
#define SKERRY_COMMON_STRATEGY_SPEC_H_

#include <cstdint>

#include "absl/status/status.h"
#include "skerry/v1/spec.pb.h"

namespace skerry {

enum class StrategyKind { kGa, kCmaEs, kSepCmaEs, kNaturalEs };

StrategyKind StrategyOf(const skerry::v1::RunSpec& spec);

// CMA-ES or sep-CMA-ES parameters; REQUIRES: StrategyOf(spec) is one of them.
const skerry::v1::CmaEsSpec& CmaSpecOf(const skerry::v1::RunSpec& spec);

// Natural-gradient ES parameters; REQUIRES: StrategyOf(spec) is kNaturalEs.
const skerry::v1::NaturalEsSpec& NaturalEsSpecOf(
    const skerry::v1::RunSpec& spec);

// Samples per generation of an island of an evolution strategy (CMA-ES
// lambda, or the natural ES's population); REQUIRES: not the GA.
uint32_t EsPopulation(const skerry::v1::RunSpec& spec);

// True when the run's generations start with a distribution genome (an
// evolution strategy with strategy.distribution_genomes set, as
// NormalizeStrategy sets it for new runs): slot 0 holds the search
// distribution's centre and slots 1.. the samples.
bool HasDistributionGenomes(const skerry::v1::RunSpec& spec);

// A spec made from a stored one (a fork's, an extension's) keeps the stored
// run's genome layout: a stored evolution strategy run without
// strategy.distribution_genomes (made before it existed) gets it set false in
// `spec`, so normalising does not give its new generations a different shape.
void KeepGenomeLayout(const skerry::v1::RunSpec& stored,
                      skerry::v1::RunSpec* spec);

// Moves `strategy.ga` to the top-level `ga` (one form for the GA, so stored
// GA specs mean what they meant); fills the CMA-ES and natural ES defaults.
// Needs genome_length and the initial range normalised first.
void NormalizeStrategy(skerry::v1::RunSpec* spec);

// The strategy's own fields and the combinations a run cannot have, each
// error naming the field.
absl::Status ValidateStrategy(const skerry::v1::RunSpec& spec);

// The CMA-ES default population, 4 + floor(3 ln n) (Hansen 2016, Table 1).
uint32_t DefaultCmaPopulation(uint32_t genome_length);

// The samples of one update (lambda) after `restarts` restarts: the
// population_size, times increase_factor^min(restarts, max_increases) with
// IPOP. REQUIRES: `cma` validated.
uint32_t CmaPopulationAfter(const skerry::v1::CmaEsSpec& cma,
                            uint32_t restarts);

// The natural ES's default: 2 x DefaultCmaPopulation, as many mirrored pairs
// as CMA-ES has samples.
uint32_t DefaultNaturalEsPopulation(uint32_t genome_length);

}  // namespace skerry

#endif  // SKERRY_COMMON_STRATEGY_SPEC_H_
