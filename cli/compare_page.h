// The comparison page `skerry report` writes when it is given a series: one
// self-contained HTML document (styles, data, Chart.js and the drawing script
// inlined, nothing fetched) with, per group, the median best score against
// evaluations and its quartile band, every number also in a table, and the
// text `skerry compare` prints (checkpoints, success, rank-sum tests).
//
// Thread safety: pure functions.
#ifndef SKERRY_CLI_COMPARE_PAGE_H_
#define SKERRY_CLI_COMPARE_PAGE_H_

#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "cli/compare.h"

namespace skerry::cli {

// Points of the page's curves (evenly spaced up to the longest run).
inline constexpr int kComparePoints = 40;

// `comparison` is FormatComparison's text; `generated` the time shown.
std::string RenderComparePage(const std::vector<CompareGroup>& groups,
                              const std::string& comparison,
                              absl::string_view chart_library,
                              absl::string_view generated);

// True when an argument of `skerry report` names a series (not a run id):
// the report is then this comparison page.
bool NamesASeries(const std::vector<std::string>& args);

// `skerry report RUN|SERIES ... -o FILE` with a series among them: writes the
// comparison page to FILE (through FILE.partial, renamed when whole).
int ReportComparisonCommand(const ParsedArgs& args, RunClient& client, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_COMPARE_PAGE_H_
