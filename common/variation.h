// Variation operators: crossover and Gaussian mutation.
//
// The genetic algorithm breeds with them (server/engine/breeder.cc), and the
// store and the workers rebuild a genome kept as its recipe with the same
// calls (common/child_recipe.h), which is why they live here and not with
// selection in server/engine/operators.h.
//
// Thread safety: pure functions of their inputs and of the RandomStream they
// are handed.
#ifndef SKERRY_COMMON_VARIATION_H_
#define SKERRY_COMMON_VARIATION_H_

#include <vector>

#include "absl/types/span.h"
#include "common/random.h"
#include "skerry/v1/spec.pb.h"

namespace skerry {

// Crossover: writes two children of parents a and b (same length).
// ONE_POINT at cut c (1 <= c < L): child1 = a[0,c) + b[c,L), child2 = b[0,c) +
// a[c,L).
void OnePointCrossover(absl::Span<const double> a, absl::Span<const double> b,
                       int cut, std::vector<double>* child1,
                       std::vector<double>* child2);
// TWO_POINT with segment [lo, hi): the children swap that segment.
void TwoPointCrossover(absl::Span<const double> a, absl::Span<const double> b,
                       int lo, int hi, std::vector<double>* child1,
                       std::vector<double>* child2);
// Draws the cut points / masks / weights from rng, per the spec's method, then
// returns the first child only. For BLEND, genes are clamped to [lower, upper].
std::vector<double> Crossover(const skerry::v1::CrossoverSpec& spec,
                              absl::Span<const double> a,
                              absl::Span<const double> b, double lower,
                              double upper, RandomStream& rng);

// Gaussian mutation: each gene with probability `rate` gets N(0, step^2) added
// and is clamped to [lower, upper]. Returns how many genes changed.
int Mutate(double rate, double step, double lower, double upper,
           std::vector<double>* genes, RandomStream& rng);

}  // namespace skerry

#endif  // SKERRY_COMMON_VARIATION_H_
