#include "server/engine/operators.h"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <utility>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

namespace skerry::engine {
namespace {

using skerry::v1::FitnessScaling;
using skerry::v1::SelectionSpec;

// A score selection may use: the evaluation succeeded and produced a number.
bool Usable(absl::Span<const double> scores, absl::Span<const bool> valid,
            size_t i) {
  return valid[i] && !std::isnan(scores[i]);
}

// Goldberg 1989, ch. 3 (linear scaling, "prescale"): maps weights f to a f + b
// so the mean is kept, the best becomes `factor` times the mean, and, when that
// would push the worst below zero, scales as far as possible so the worst maps
// to 0.
void LinearScale(const std::vector<char>& usable, double factor,
                 std::vector<double>* weights) {
  double sum = 0.0, lo = 0.0, hi = 0.0;
  int n = 0;
  for (size_t i = 0; i < weights->size(); ++i) {
    if (!usable[i]) continue;
    const double w = (*weights)[i];
    lo = n == 0 ? w : std::min(lo, w);
    hi = n == 0 ? w : std::max(hi, w);
    sum += w;
    ++n;
  }
  if (n == 0) return;
  const double avg = sum / n;
  if (!(hi > avg)) return;  // all equal: nothing to scale
  double a, b;
  if (lo > (factor * avg - hi) / (factor - 1.0)) {
    const double delta = hi - avg;
    a = (factor - 1.0) * avg / delta;
    b = avg * (hi - factor * avg) / delta;
  } else {
    const double delta = avg - lo;
    a = avg / delta;
    b = -lo * avg / delta;
  }
  for (size_t i = 0; i < weights->size(); ++i) {
    if (usable[i]) (*weights)[i] = std::max(0.0, a * (*weights)[i] + b);
  }
}

// Index of the first cumulative sum strictly above `point`, skipping zero
// weights.
int PickByCumulative(const std::vector<double>& cumulative, double point) {
  const auto it = std::upper_bound(cumulative.begin(), cumulative.end(), point);
  if (it != cumulative.end()) return static_cast<int>(it - cumulative.begin());
  // Rounding put the point at the very end: take the last positive weight.
  int i = static_cast<int>(cumulative.size()) - 1;
  while (i > 0 && cumulative[i] == cumulative[i - 1]) --i;
  return i;
}

std::vector<double> Cumulative(absl::Span<const double> weights) {
  std::vector<double> cumulative(weights.size());
  double sum = 0.0;
  for (size_t i = 0; i < weights.size(); ++i) {
    sum += weights[i] > 0 ? weights[i] : 0.0;
    cumulative[i] = sum;
  }
  return cumulative;
}

std::vector<int> UniformPicks(int n, int count, RandomStream& rng) {
  std::vector<int> picks(count);
  for (int& p : picks) p = static_cast<int>(rng.Below(n));
  return picks;
}

void Shuffle(std::vector<int>* v, RandomStream& rng) {
  for (size_t i = v->size(); i > 1; --i) {
    std::swap((*v)[i - 1], (*v)[rng.Below(i)]);
  }
}

}  // namespace

std::vector<int> RankBestFirst(absl::Span<const double> scores,
                               absl::Span<const bool> valid, bool maximize) {
  std::vector<int> order(scores.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](int x, int y) {
    const bool ux = Usable(scores, valid, x);
    const bool uy = Usable(scores, valid, y);
    if (ux != uy) return ux;
    if (!ux) return false;
    return maximize ? scores[x] > scores[y] : scores[x] < scores[y];
  });
  return order;
}

absl::StatusOr<std::vector<double>> ScaleFitness(
    absl::Span<const double> scores, absl::Span<const bool> valid,
    bool maximize, FitnessScaling scaling, double linear_factor) {
  if (scores.size() != valid.size()) {
    return absl::InvalidArgumentError(
        absl::StrCat("fitness scaling: ", scores.size(), " scores but ",
                     valid.size(), " validity flags"));
  }
  const size_t n = scores.size();
  // Infinite scores cannot be weighed against the rest; like failures they get
  // 0.
  std::vector<char> usable(n);  // char: vector<bool> packs bits
  for (size_t i = 0; i < n; ++i) {
    usable[i] = Usable(scores, valid, i) && std::isfinite(scores[i]);
  }
  std::vector<double> weights(n, 0.0);
  if (scaling == skerry::v1::RAW) {
    if (!maximize) {
      return absl::InvalidArgumentError(
          "ga.selection.scaling: RAW scaling needs objective MAXIMIZE");
    }
    for (size_t i = 0; i < n; ++i) {
      if (!usable[i]) continue;
      if (scores[i] < 0) {
        return absl::InvalidArgumentError(absl::StrCat(
            "ga.selection.scaling: RAW scaling needs scores >= 0; genome ", i,
            " scored ", scores[i]));
      }
      weights[i] = scores[i];
    }
  } else if (scaling == skerry::v1::WINDOWING ||
             scaling == skerry::v1::LINEAR) {
    bool any = false;
    double worst = 0.0;
    for (size_t i = 0; i < n; ++i) {
      if (!usable[i]) continue;
      worst = !any ? scores[i]
                   : (maximize ? std::min(worst, scores[i])
                               : std::max(worst, scores[i]));
      any = true;
    }
    for (size_t i = 0; i < n; ++i) {
      if (usable[i])
        weights[i] = maximize ? scores[i] - worst : worst - scores[i];
    }
    if (scaling == skerry::v1::LINEAR) {
      if (!(linear_factor > 1.0)) {
        return absl::InvalidArgumentError(absl::StrCat(
            "ga.selection.linear_scaling_factor: must be above 1; got ",
            linear_factor));
      }
      LinearScale(usable, linear_factor, &weights);
    }
  } else {
    return absl::InvalidArgumentError(absl::StrCat(
        "ga.selection.scaling: unknown scaling ", static_cast<int>(scaling)));
  }
  const double total = std::accumulate(weights.begin(), weights.end(), 0.0);
  if (!(total > 0)) {
    const bool any_usable =
        std::find(usable.begin(), usable.end(), 1) != usable.end();
    for (size_t i = 0; i < n; ++i) {
      weights[i] = (usable[i] || !any_usable) ? 1.0 : 0.0;
    }
  }
  return weights;
}

std::vector<int> SelectRoulette(absl::Span<const double> weights, int count,
                                RandomStream& rng) {
  if (weights.empty() || count <= 0) return {};
  const std::vector<double> cumulative = Cumulative(weights);
  const double total = cumulative.back();
  if (!(total > 0) || !std::isfinite(total)) {
    return UniformPicks(static_cast<int>(weights.size()), count, rng);
  }
  std::vector<int> picks(count);
  for (int& p : picks) p = PickByCumulative(cumulative, rng.Uniform(0, total));
  return picks;
}

std::vector<int> SelectStochasticUniversal(absl::Span<const double> weights,
                                           int count, RandomStream& rng) {
  if (weights.empty() || count <= 0) return {};
  const double total = Cumulative(weights).back();
  if (!(total > 0) || !std::isfinite(total)) {
    return UniformPicks(static_cast<int>(weights.size()), count, rng);
  }
  return StochasticUniversalWithOffset(weights, count,
                                       rng.Uniform(0, total / count));
}

// Baker 1987: one spin of a wheel with `count` equally spaced pointers.
std::vector<int> StochasticUniversalWithOffset(absl::Span<const double> weights,
                                               int count, double offset) {
  if (weights.empty() || count <= 0) return {};
  const std::vector<double> cumulative = Cumulative(weights);
  const double step = cumulative.back() / count;
  std::vector<int> picks;
  picks.reserve(count);
  size_t i = 0;
  for (int j = 0; j < count; ++j) {
    const double pointer = offset + j * step;
    while (i + 1 < cumulative.size() && !(cumulative[i] > pointer)) ++i;
    // Rounding at the end of the wheel: never land on a zero weight.
    while (i > 0 && cumulative[i] == cumulative[i - 1]) --i;
    picks.push_back(static_cast<int>(i));
  }
  return picks;
}

std::vector<int> SelectTournament(absl::Span<const int> rank_of, int size,
                                  int count, RandomStream& rng) {
  if (rank_of.empty() || count <= 0) return {};
  const uint64_t n = rank_of.size();
  std::vector<int> picks(count);
  for (int& winner : picks) {
    winner = static_cast<int>(rng.Below(n));
    for (int k = 1; k < size; ++k) {
      const int rival = static_cast<int>(rng.Below(n));
      if (rank_of[rival] < rank_of[winner]) winner = rival;
    }
  }
  return picks;
}

std::vector<double> LinearRankProbabilities(int n, double pressure) {
  if (n <= 0) return {};
  if (n == 1) return {1.0};
  std::vector<double> p(n);
  for (int r = 0; r < n; ++r) {
    p[r] = (pressure - (2.0 * pressure - 2.0) * r / (n - 1)) / n;
  }
  return p;
}

std::vector<int> SelectLinearRank(absl::Span<const int> order, double pressure,
                                  int count, RandomStream& rng) {
  if (order.empty() || count <= 0) return {};
  const std::vector<double> cumulative = Cumulative(
      LinearRankProbabilities(static_cast<int>(order.size()), pressure));
  std::vector<int> picks(count);
  for (int& p : picks) {
    p = order[PickByCumulative(cumulative, rng.Uniform(0, cumulative.back()))];
  }
  return picks;
}

std::vector<int> SelectTruncation(absl::Span<const int> order, double fraction,
                                  int count, RandomStream& rng) {
  if (order.empty() || count <= 0) return {};
  const int n = static_cast<int>(order.size());
  // The epsilon keeps 0.1 * 30 = 3.0000000000000004 from becoming 4.
  int keep = static_cast<int>(std::ceil(fraction * n - 1e-9));
  keep = std::clamp(keep, 1, n);
  std::vector<int> picks(count);
  for (int& p : picks) p = order[rng.Below(keep)];
  return picks;
}

absl::StatusOr<std::vector<int>> Select(const SelectionSpec& spec,
                                        absl::Span<const double> scores,
                                        absl::Span<const bool> valid,
                                        bool maximize, int count,
                                        RandomStream& rng) {
  if (scores.size() != valid.size()) {
    return absl::InvalidArgumentError(absl::StrCat("selection: ", scores.size(),
                                                   " scores but ", valid.size(),
                                                   " validity flags"));
  }
  if (count < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("selection: negative count ", count));
  }
  if (count == 0) return std::vector<int>();
  if (scores.empty()) {
    return absl::InvalidArgumentError("selection: empty population");
  }
  switch (spec.method()) {
    case skerry::v1::ROULETTE:
    case skerry::v1::STOCHASTIC_UNIVERSAL: {
      absl::StatusOr<std::vector<double>> weights =
          ScaleFitness(scores, valid, maximize, spec.scaling(),
                       spec.linear_scaling_factor());
      if (!weights.ok()) return weights.status();
      if (spec.method() == skerry::v1::ROULETTE) {
        return SelectRoulette(*weights, count, rng);
      }
      // Pointers come out in population order; shuffle so mates pair at random.
      std::vector<int> picks = SelectStochasticUniversal(*weights, count, rng);
      Shuffle(&picks, rng);
      return picks;
    }
    case skerry::v1::TOURNAMENT: {
      if (spec.tournament_size() < 1) {
        return absl::InvalidArgumentError(
            "ga.selection.tournament_size: must be at least 1; got 0");
      }
      const std::vector<int> order = RankBestFirst(scores, valid, maximize);
      std::vector<int> rank_of(order.size());
      for (size_t r = 0; r < order.size(); ++r) rank_of[order[r]] = r;
      return SelectTournament(rank_of, spec.tournament_size(), count, rng);
    }
    case skerry::v1::LINEAR_RANK:
      return SelectLinearRank(RankBestFirst(scores, valid, maximize),
                              spec.rank_pressure(), count, rng);
    case skerry::v1::TRUNCATION:
      return SelectTruncation(RankBestFirst(scores, valid, maximize),
                              spec.truncation_fraction(), count, rng);
    default:
      return absl::InvalidArgumentError(
          absl::StrCat("ga.selection.method: unknown method ",
                       static_cast<int>(spec.method())));
  }
}

}  // namespace skerry::engine
