// Genetic operators: fitness scaling, selection, crossover and mutation.
//
// Pure functions of their inputs and of the RandomStream they are handed; no
// global state, so they are safe to call from any thread with a stream of its
// own.
//
// Conventions shared by every function here:
// - A population is described by `scores` and `valid` (false: the evaluation
// failed;
//   such a genome ranks last and gets zero selection weight).
// - `maximize` says which direction is better.
// - Results are indices into the population.
#ifndef SKERRY_SERVER_ENGINE_OPERATORS_H_
#define SKERRY_SERVER_ENGINE_OPERATORS_H_

#include <cstdint>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "common/random.h"
#include "common/variation.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::engine {

// Indices ordered best first; failed genomes last; ties broken by lower index.
std::vector<int> RankBestFirst(absl::Span<const double> scores,
                               absl::Span<const bool> valid, bool maximize);

// Non-negative selection weights for fitness-proportionate methods (see
// FitnessScaling in spec.proto). Failed genomes get weight 0. If every weight
// would be 0 (all equal, or all failed), every valid genome (or every genome,
// if none is valid) gets weight 1. RAW with a negative score, or with
// minimisation, is InvalidArgument.
absl::StatusOr<std::vector<double>> ScaleFitness(
    absl::Span<const double> scores, absl::Span<const bool> valid,
    bool maximize, skerry::v1::FitnessScaling scaling, double linear_factor);

// Fitness-proportionate selection: `count` independent spins.
std::vector<int> SelectRoulette(absl::Span<const double> weights, int count,
                                RandomStream& rng);
// Stochastic universal sampling with pointers offset, offset + step, ... where
// step = sum / count and offset = Uniform(0, step).
std::vector<int> SelectStochasticUniversal(absl::Span<const double> weights,
                                           int count, RandomStream& rng);
// The same with a given first pointer in [0, sum / count) (for worked
// examples).
std::vector<int> StochasticUniversalWithOffset(absl::Span<const double> weights,
                                               int count, double offset);
// Tournament of `size` contestants drawn uniformly with replacement; the best
// by `rank_of` (0 = best) wins.
std::vector<int> SelectTournament(absl::Span<const int> rank_of, int size,
                                  int count, RandomStream& rng);
// Linear ranking (Baker 1985): the genome of rank r (0 = best) of N is chosen
// with probability (pressure - (2 pressure - 2) r / (N - 1)) / N. `order` is
// best first.
std::vector<int> SelectLinearRank(absl::Span<const int> order, double pressure,
                                  int count, RandomStream& rng);
// Selection probabilities of SelectLinearRank, by rank (for tests and docs).
std::vector<double> LinearRankProbabilities(int n, double pressure);
// Uniform among the best ceil(fraction * N) of `order` (best first).
std::vector<int> SelectTruncation(absl::Span<const int> order, double fraction,
                                  int count, RandomStream& rng);

// Selects `count` parents by the spec's method from a scored population.
absl::StatusOr<std::vector<int>> Select(const skerry::v1::SelectionSpec& spec,
                                        absl::Span<const double> scores,
                                        absl::Span<const bool> valid,
                                        bool maximize, int count,
                                        RandomStream& rng);

// Crossover and mutation live in common/variation.h, where the store and the
// workers rebuild a genome from its recipe with them (common/child_recipe.h).
using ::skerry::Crossover;
using ::skerry::Mutate;
using ::skerry::OnePointCrossover;
using ::skerry::TwoPointCrossover;

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_OPERATORS_H_
