#include "common/rank_sum.h"

#include <algorithm>
#include <cmath>

#include "absl/strings/str_cat.h"

namespace skerry {
namespace {

// counts[u] = the number of arrangements of n1 x's and n2 y's with U1 = u,
// by the recurrence f(i, j, u) = f(i - 1, j, u - j) + f(i, j - 1, u): the
// largest of the i + j values is an x (beating all j y's) or a y.
std::vector<double> UCounts(size_t n1, size_t n2) {
  const size_t top = n1 * n2;
  // layer[j][u] for the current i.
  std::vector<std::vector<double>> prev(n2 + 1, std::vector<double>(top + 1));
  for (size_t j = 0; j <= n2; ++j) prev[j][0] = 1;  // i = 0: U = 0 only
  for (size_t i = 1; i <= n1; ++i) {
    std::vector<std::vector<double>> cur(n2 + 1, std::vector<double>(top + 1));
    cur[0][0] = 1;  // j = 0: U = 0 only
    for (size_t j = 1; j <= n2; ++j) {
      for (size_t u = 0; u <= i * j; ++u) {
        double v = cur[j - 1][u];
        if (u >= j) v += prev[j][u - j];
        cur[j][u] = v;
      }
    }
    prev = std::move(cur);
  }
  return prev[n2];
}

}  // namespace

double ExactUCdf(size_t n1, size_t n2, int u) {
  if (u < 0) return 0;
  const std::vector<double> counts = UCounts(n1, n2);
  double below = 0, total = 0;
  for (size_t k = 0; k < counts.size(); ++k) {
    total += counts[k];
    if (static_cast<int>(k) <= u) below += counts[k];
  }
  return below / total;
}

absl::StatusOr<RankSumTest> MannWhitneyU(absl::Span<const double> x,
                                         absl::Span<const double> y) {
  if (x.empty() || y.empty()) {
    return absl::InvalidArgumentError(
        absl::StrCat("the rank-sum test needs two non-empty samples, got ",
                     x.size(), " and ", y.size(), " values"));
  }
  for (double v : x) {
    if (std::isnan(v)) return absl::InvalidArgumentError("a value is NaN");
  }
  for (double v : y) {
    if (std::isnan(v)) return absl::InvalidArgumentError("a value is NaN");
  }
  const double n1 = static_cast<double>(x.size());
  const double n2 = static_cast<double>(y.size());
  const double n = n1 + n2;
  // Mean ranks over the pooled sample.
  std::vector<std::pair<double, int>> pooled;
  for (double v : x) pooled.emplace_back(v, 0);
  for (double v : y) pooled.emplace_back(v, 1);
  std::sort(pooled.begin(), pooled.end());
  double r1 = 0, tie_term = 0;
  for (size_t i = 0; i < pooled.size();) {
    size_t j = i;
    while (j < pooled.size() && pooled[j].first == pooled[i].first) ++j;
    const double t = static_cast<double>(j - i);
    const double rank =
        (static_cast<double>(i + 1) + static_cast<double>(j)) / 2;
    for (size_t k = i; k < j; ++k) {
      if (pooled[k].second == 0) r1 += rank;
    }
    tie_term += t * t * t - t;
    i = j;
  }
  RankSumTest out;
  out.u1 = r1 - n1 * (n1 + 1) / 2;
  out.u2 = n1 * n2 - out.u1;
  out.ties = tie_term > 0;
  if (!out.ties && x.size() <= kMaxExactSample && y.size() <= kMaxExactSample) {
    out.exact = true;
    const std::vector<double> counts = UCounts(x.size(), y.size());
    double total = 0, at_most = 0, at_least = 0;
    const int u = static_cast<int>(std::lround(out.u1));
    for (size_t k = 0; k < counts.size(); ++k) {
      total += counts[k];
      if (static_cast<int>(k) <= u) at_most += counts[k];
      if (static_cast<int>(k) >= u) at_least += counts[k];
    }
    out.p_value = std::min(1.0, 2 * std::min(at_most, at_least) / total);
    out.method = "exact (no ties)";
    return out;
  }
  const double mu = n1 * n2 / 2;
  const double var = n1 * n2 / 12 * ((n + 1) - tie_term / (n * (n - 1)));
  out.method = absl::StrCat("normal approximation with ",
                            out.ties ? "tie and " : "", "continuity correction",
                            out.ties ? " (tied values)" : " (large samples)");
  if (!(var > 0)) {
    out.p_value = 1;  // every value equal: no evidence either way
    return out;
  }
  out.z = (std::max(out.u1, out.u2) - mu - 0.5) / std::sqrt(var);
  out.p_value = std::min(1.0, std::erfc(out.z / std::sqrt(2.0)));
  return out;
}

double Quantile(std::vector<double> values, double p) {
  std::sort(values.begin(), values.end());
  const double h = (static_cast<double>(values.size()) - 1) * p;
  const size_t lo = static_cast<size_t>(std::floor(h));
  if (lo + 1 >= values.size()) return values.back();
  return values[lo] + (h - std::floor(h)) * (values[lo + 1] - values[lo]);
}

}  // namespace skerry
