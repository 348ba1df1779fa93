// `skerry compare RUN|SERIES ...`: runs and seed series side by side. Each
// argument is a group (a run id is a group of one run; a series name, all its
// runs). For each group and each checkpoint (a number of evaluations), the
// median and quartiles of the best score its runs had reached by then; the
// success rate at a target score, with the evaluations it took; and, between
// each two groups, the Mann-Whitney U rank-sum test on the best score at the
// last checkpoint every group reached (common/rank_sum.h), saying whether its
// p-value is exact or a normal approximation.
//
// A run's best score against evaluations is read from its per-generation
// statistics (GetHistory): generations are taken in order of generation, then
// island; evaluations add up; the best is the best so far. So the curve is a
// pure function of the run's genomes, like its digest.
//
// Thread safety: as cli/commands.h.
#ifndef SKERRY_CLI_COMPARE_H_
#define SKERRY_CLI_COMPARE_H_

#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "cli/args.h"
#include "cli/client.h"
#include "cli/commands.h"

namespace skerry::cli {

// The most runs one comparison reads.
inline constexpr size_t kMaxCompareRuns = 200;
// The most checkpoints.
inline constexpr size_t kMaxCheckpoints = 20;

// (cumulative evaluations, best score so far), one point per generation.
using BestCurve = std::vector<std::pair<uint64_t, double>>;

BestCurve MakeBestCurve(const std::vector<skerry::v1::GenerationStats>& history,
                        skerry::v1::Objective objective);
// The best score reached within `evaluations`; nothing when the run had not
// completed a generation by then or never reached that many evaluations.
std::optional<double> BestAt(const BestCurve& curve, uint64_t evaluations);

// "1000,5000,20000": checkpoints in increasing order; InvalidArgument names
// --at.
absl::StatusOr<std::vector<uint64_t>> ParseCheckpoints(absl::string_view text);

std::vector<CommandSpec> CompareCommandSpecs();
int CompareCommand(const ParsedArgs& args, RunClient& client, Io& io);

// What the comparison found: for `skerry compare` and `skerry report`.
struct CompareGroup {
  std::string label;  // "series NAME" or "run ID"
  skerry::v1::Objective objective = skerry::v1::MINIMIZE;
  std::vector<uint64_t> run_ids;
  std::vector<BestCurve> curves;  // per run
};
// Reads the groups named by `args` (run ids or series names).
absl::StatusOr<std::vector<CompareGroup>> LoadCompareGroups(
    const std::vector<std::string>& args, RunClient& client);
// A quarter, a half, three quarters and all of the shortest run's
// evaluations, so that every run has a value at each; empty when no run has
// completed a generation.
std::vector<uint64_t> DefaultCheckpoints(
    const std::vector<CompareGroup>& groups);
// What `skerry compare` prints: the groups, the table of best scores at the
// checkpoints, the success rates (with a target) and the rank-sum tests.
std::string FormatComparison(const std::vector<CompareGroup>& groups,
                             const std::vector<uint64_t>& checkpoints,
                             std::optional<double> target);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_COMPARE_H_
