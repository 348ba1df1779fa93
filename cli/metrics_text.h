// How `skerry` prints evaluator metrics (TaskResult.metrics, stored per
// genome): a genome's own, and each metric's mean per generation and island.
//
// Invariant: both return "" when there are no metrics, so output of runs
// without them is unchanged.
// Thread safety: pure functions.
#ifndef SKERRY_CLI_METRICS_TEXT_H_
#define SKERRY_CLI_METRICS_TEXT_H_

#include <cstddef>
#include <string>
#include <vector>

#include "google/protobuf/map.h"
#include "skerry/v1/runs.pb.h"

namespace skerry::cli {

// "metric      NAME  VALUE" lines, by name.
std::string FormatGenomeMetrics(
    const google::protobuf::Map<std::string, double>& metrics);

// A table of metric means: ISLAND, GEN, then one column per metric name;
// only the last `max_rows` generations when max_rows > 0.
std::string FormatMetricMeans(
    const std::vector<skerry::v1::GenerationStats>& history,
    size_t max_rows = 0);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_METRICS_TEXT_H_
