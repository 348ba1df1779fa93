// FleetMetrics: counters of what the workers reported (results by attempt
// outcome, by what the coordinator did with them and by rejection code;
// per-worker results for evaluations per second; how long each Report waited
// for its commit), and MetricsText, which writes them with the coordinator's
// gauges in the Prometheus text exposition format, version 0.0.4
// (https://prometheus.io/docs/instrumenting/exposition_formats/).
//
// Invariant: counters only grow (until the coordinator restarts: Prometheus
// treats a drop to 0 as a counter reset). Memory is bounded by the number of
// workers that ever reported to this process and the fixed buckets.
//
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_HTTP_FLEET_METRICS_H_
#define SKERRY_SERVER_HTTP_FLEET_METRICS_H_

#include <array>
#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "skerry/v1/fleet.pb.h"

namespace skerry::http {

// Upper bounds of the commit latency buckets, in seconds (+Inf is implied):
// from a millisecond (an idle group commit) to ten seconds (a stalled disk).
inline constexpr std::array<double, 12> kCommitBuckets = {
    0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 10};

class FleetMetrics {
 public:
  struct WorkerCounts {
    uint64_t results = 0;  // applied
    absl::Time first;      // of the first report with an applied result
    absl::Time last;
  };
  struct Snapshot {
    uint64_t scored = 0;  // results that carried a score
    uint64_t failed = 0;  // results that carried an error
    uint64_t applied = 0;
    std::map<std::string, uint64_t> ignored_by_code;  // google.rpc code name
    std::array<uint64_t, kCommitBuckets.size() + 1>
        commit_buckets{};  // not
                           // cumulative
    double commit_seconds_sum = 0;
    uint64_t commit_count = 0;
    std::map<int64_t, WorkerCounts> workers;
  };

  // One Report with results: those that passed the door (`results`, sent to
  // the engine, which took `commit` to commit them), how many were applied,
  // and every rejected one, at the door or by the engine.
  void NoteReport(int64_t worker,
                  const std::vector<skerry::v1::TaskResult>& results,
                  uint32_t applied,
                  const std::vector<skerry::v1::RejectedResult>& rejected,
                  absl::Duration commit, absl::Time now);

  Snapshot Get() const;

 private:
  mutable absl::Mutex mu_;
  Snapshot counts_ ABSL_GUARDED_BY(mu_);
};

// Applied results per second over the span of a worker's reports; 0 before
// it has two reports apart in time.
double EvaluationsPerSecond(const FleetMetrics::WorkerCounts& w);

// The coordinator's state at one moment, for /metrics and the live page.
struct CoordinatorGauges {
  std::map<uint64_t, uint64_t> evaluations_by_run;  // stored, per run
  std::map<uint64_t, std::string> state_by_run;     // RunState name
  std::map<int64_t, size_t> queued_by_run;          // tasks waiting
  size_t leases_outstanding = 0;                    // leased or claimed tasks
  int workers_connected = 0;                        // heard from in a minute
  int64_t database_bytes = 0;                       // file + write-ahead log
  int64_t storage_free_bytes = -1;                  // -1: unknown
  std::string storage_problem;                      // "": writes succeed
};

// The exposition text: # HELP and # TYPE lines, then samples; every metric
// name starts with "skerry_".
std::string MetricsText(const FleetMetrics::Snapshot& counts,
                        const CoordinatorGauges& gauges);

}  // namespace skerry::http

#endif  // SKERRY_SERVER_HTTP_FLEET_METRICS_H_
