// Crossover and mutation (variation.h).
#include "common/variation.h"

#include <algorithm>
#include <utility>

namespace skerry {

using skerry::v1::CrossoverSpec;

void OnePointCrossover(absl::Span<const double> a, absl::Span<const double> b,
                       int cut, std::vector<double>* child1,
                       std::vector<double>* child2) {
  TwoPointCrossover(a, b, cut, static_cast<int>(a.size()), child1, child2);
}

void TwoPointCrossover(absl::Span<const double> a, absl::Span<const double> b,
                       int lo, int hi, std::vector<double>* child1,
                       std::vector<double>* child2) {
  const int n = static_cast<int>(std::min(a.size(), b.size()));
  lo = std::clamp(lo, 0, n);
  hi = std::clamp(hi, lo, n);
  child1->assign(a.begin(), a.begin() + n);
  child2->assign(b.begin(), b.begin() + n);
  for (int i = lo; i < hi; ++i) std::swap((*child1)[i], (*child2)[i]);
}

std::vector<double> Crossover(const CrossoverSpec& spec,
                              absl::Span<const double> a,
                              absl::Span<const double> b, double lower,
                              double upper, RandomStream& rng) {
  std::vector<double> child(a.begin(), a.end());
  const double rate =
      spec.has_rate() ? spec.rate() : 0.8;  // spec.proto default
  if (!rng.Bernoulli(rate) || a.size() != b.size() || a.empty()) return child;
  const int n = static_cast<int>(a.size());
  std::vector<double> other;
  switch (spec.method()) {
    case skerry::v1::ONE_POINT:
      if (n < 2) return child;
      OnePointCrossover(a, b, 1 + static_cast<int>(rng.Below(n - 1)), &child,
                        &other);
      return child;
    case skerry::v1::TWO_POINT: {
      // Two distinct cut points in [0, n], uniform over the pairs.
      int lo = static_cast<int>(rng.Below(n + 1));
      int hi = static_cast<int>(rng.Below(n));
      if (hi >= lo) ++hi;
      if (hi < lo) std::swap(lo, hi);
      TwoPointCrossover(a, b, lo, hi, &child, &other);
      return child;
    }
    case skerry::v1::BLEND: {
      const double alpha = spec.blend_alpha();
      for (int i = 0; i < n; ++i) {
        const double w = rng.Uniform(-alpha, 1.0 + alpha);
        child[i] = std::clamp(a[i] + w * (b[i] - a[i]), lower, upper);
      }
      return child;
    }
    case skerry::v1::UNIFORM:
    default:  // validated specs never get here with another value
      for (int i = 0; i < n; ++i) {
        if (rng.Bernoulli(0.5)) child[i] = b[i];
      }
      return child;
  }
}

int Mutate(double rate, double step, double lower, double upper,
           std::vector<double>* genes, RandomStream& rng) {
  int changed = 0;
  for (double& g : *genes) {
    if (!rng.Bernoulli(rate)) continue;
    const double before = g;
    g = std::clamp(g + step * rng.Normal(), lower, upper);
    if (g != before) ++changed;
  }
  return changed;
}

}  // namespace skerry
