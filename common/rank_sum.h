// Sample statistics for comparing runs (`skerry compare`): quantiles across
// seeds and the Mann-Whitney U rank-sum test between two samples.
//
// MannWhitneyU follows the usual definition (Mann & Whitney 1947): U1 is the
// number of pairs (x_i, y_j) with x_i > y_j, a tie counting 1/2, which equals
// R1 - n1(n1+1)/2 where R1 is the rank sum of x with ties given their mean
// rank; U1 + U2 = n1 n2. The p-value is two-sided:
//   - exact, from the null distribution of U counted over every arrangement,
//     when neither sample has more than kMaxExactSample values and no value
//     is tied (p = 2 min(P(U <= U1), P(U >= U1)), at most 1);
//   - otherwise the normal approximation with the tie correction of the
//     variance and a continuity correction of 1/2:
//       z = (max(U1, U2) - n1 n2 / 2 - 1/2) / sigma,
//       sigma^2 = n1 n2 / 12 * ((n + 1) - sum(t^3 - t) / (n (n - 1))),
//     p = 2 (1 - Phi(z)), where t runs over the sizes of the groups of tied
//     values. These are the conventions of scipy.stats.mannwhitneyu
//     (method "exact" and "asymptotic" with use_continuity=True), which the
//     tests compare against.
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_RANK_SUM_H_
#define SKERRY_COMMON_RANK_SUM_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/types/span.h"

namespace skerry {

inline constexpr size_t kMaxExactSample = 50;

struct RankSumTest {
  double u1 = 0;  // U of the first sample
  double u2 = 0;  // U of the second; u1 + u2 = n1 n2
  double p_value = 1;
  bool exact = false;
  bool ties = false;
  double z = 0;  // the normal approximation's z (0 when exact)
  // How p was computed, in words for the user.
  std::string method;
};

// InvalidArgument for an empty sample or a value that is not a number.
absl::StatusOr<RankSumTest> MannWhitneyU(absl::Span<const double> x,
                                         absl::Span<const double> y);

// P(U <= u) under the null hypothesis for samples of sizes n1 and n2 without
// ties (u an integer from 0 to n1 n2). Both sizes from 1 to kMaxExactSample.
double ExactUCdf(size_t n1, size_t n2, int u);

// The p-quantile (0 <= p <= 1) of a non-empty sample by linear interpolation
// between order statistics: Hyndman & Fan 1996, definition 7 (R's default and
// numpy.percentile's "linear"): h = (n - 1) p, x[floor h] + (h - floor h)
// (x[floor h + 1] - x[floor h]).
double Quantile(std::vector<double> values, double p);

}  // namespace skerry

#endif  // SKERRY_COMMON_RANK_SUM_H_
