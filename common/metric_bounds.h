// Bounds on evaluator metrics: the named side measurements an evaluator may
// return with a score (EvaluationResponse.metrics, TaskResult.metrics), which
// the coordinator stores per genome (table genome_metrics) and the report
// plots. The worker checks them before it reports, and the coordinator again
// before it stores (a result breaking them is a failed attempt, with this
// check's message as its error).
//
// Invariant: a map that passes CheckMetrics holds at most kMaxMetrics
// entries, each a name of 1 to kMaxMetricNameBytes characters from
// [A-Za-z0-9_.-] and a finite value: at most 32 x (64 + 8) bytes a genome.
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_METRIC_BOUNDS_H_
#define SKERRY_COMMON_METRIC_BOUNDS_H_

#include <cstddef>
#include <map>
#include <string>

#include "absl/status/status.h"
#include "google/protobuf/map.h"

namespace skerry {

inline constexpr size_t kMaxMetrics = 32;
inline constexpr size_t kMaxMetricNameBytes = 64;

// InvalidArgument naming the first metric at fault and the bound it breaks.
absl::Status CheckMetrics(const google::protobuf::Map<std::string, double>& m);
absl::Status CheckMetrics(const std::map<std::string, double>& m);

}  // namespace skerry

#endif  // SKERRY_COMMON_METRIC_BOUNDS_H_
