#include "server/http/fleet_metrics.h"

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_replace.h"

namespace skerry::http {

void FleetMetrics::NoteReport(
    int64_t worker, const std::vector<skerry::v1::TaskResult>& results,
    uint32_t applied, const std::vector<skerry::v1::RejectedResult>& rejected,
    absl::Duration commit, absl::Time now) {
  absl::MutexLock l(&mu_);
  for (const skerry::v1::TaskResult& r : results) {
    if (r.error().empty()) {
      ++counts_.scored;
    } else {
      ++counts_.failed;
    }
  }
  counts_.applied += applied;
  for (const skerry::v1::RejectedResult& r : rejected) {
    ++counts_.ignored_by_code[absl::StatusCodeToString(
        static_cast<absl::StatusCode>(r.code()))];
  }
  if (results.empty()) return;  // refused at the door: nothing committed
  const double seconds = absl::ToDoubleSeconds(commit);
  size_t b = 0;
  while (b < kCommitBuckets.size() && seconds > kCommitBuckets[b]) ++b;
  ++counts_.commit_buckets[b];
  counts_.commit_seconds_sum += seconds;
  ++counts_.commit_count;
  if (applied > 0) {
    WorkerCounts& w = counts_.workers[worker];
    if (w.results == 0) w.first = now;
    w.results += applied;
    w.last = now;
  }
}

FleetMetrics::Snapshot FleetMetrics::Get() const {
  absl::MutexLock l(&mu_);
  return counts_;
}

double EvaluationsPerSecond(const FleetMetrics::WorkerCounts& w) {
  const double span = absl::ToDoubleSeconds(w.last - w.first);
  // The first report's results were evaluated before `first`: count from the
  // second report on, over the span between them.
  if (span <= 0 || w.results == 0) return 0;
  return static_cast<double>(w.results) / span;
}

namespace {

// Label values escape backslash, double quote and newline (format 0.0.4).
std::string Label(absl::string_view v) {
  return absl::StrReplaceAll(v,
                             {{"\\", "\\\\"}, {"\"", "\\\""}, {"\n", "\\n"}});
}

// A float sample value: Go's ParseFloat reads %.17g, "+Inf" and "NaN".
std::string Value(double v) { return absl::StrFormat("%.17g", v); }

void Header(std::string* out, absl::string_view name, absl::string_view type,
            absl::string_view help) {
  absl::StrAppend(out, "# HELP ", name, " ", help, "\n# TYPE ", name, " ", type,
                  "\n");
}

}  // namespace

std::string MetricsText(const FleetMetrics::Snapshot& c,
                        const CoordinatorGauges& g) {
  std::string out;
  Header(&out, "skerry_results_total", "counter",
         "Results workers reported since the coordinator started, by the "
         "attempt's outcome.");
  absl::StrAppend(&out, "skerry_results_total{attempt=\"scored\"} ", c.scored,
                  "\nskerry_results_total{attempt=\"failed\"} ", c.failed,
                  "\n");
  Header(&out, "skerry_results_applied_total", "counter",
         "Results committed to the database.");
  absl::StrAppend(&out, "skerry_results_applied_total ", c.applied, "\n");
  Header(&out, "skerry_results_ignored_total", "counter",
         "Results not applied (duplicate, stale or unknown), by rejection "
         "code.");
  for (const auto& [code, n] : c.ignored_by_code) {
    absl::StrAppend(&out, "skerry_results_ignored_total{code=\"", Label(code),
                    "\"} ", n, "\n");
  }
  Header(&out, "skerry_run_evaluations", "gauge",
         "Evaluations stored for each run.");
  for (const auto& [run, n] : g.evaluations_by_run) {
    auto state = g.state_by_run.find(run);
    absl::StrAppend(&out, "skerry_run_evaluations{run=\"", run, "\",state=\"",
                    Label(state == g.state_by_run.end() ? "" : state->second),
                    "\"} ", n, "\n");
  }
  Header(&out, "skerry_queue_tasks", "gauge",
         "Tasks waiting for a worker, by run.");
  for (const auto& [run, n] : g.queued_by_run) {
    absl::StrAppend(&out, "skerry_queue_tasks{run=\"", run, "\"} ", n, "\n");
  }
  Header(&out, "skerry_leases_outstanding", "gauge",
         "Tasks leased to a worker and not yet reported.");
  absl::StrAppend(&out, "skerry_leases_outstanding ", g.leases_outstanding,
                  "\n");
  Header(&out, "skerry_workers_connected", "gauge",
         "Workers heard from in the last minute.");
  absl::StrAppend(&out, "skerry_workers_connected ", g.workers_connected, "\n");
  Header(&out, "skerry_report_commit_seconds", "histogram",
         "Time from a Report's arrival to the commit of its results.");
  uint64_t cumulative = 0;
  for (size_t b = 0; b < kCommitBuckets.size(); ++b) {
    cumulative += c.commit_buckets[b];
    absl::StrAppend(&out, "skerry_report_commit_seconds_bucket{le=\"",
                    absl::StrCat(kCommitBuckets[b]), "\"} ", cumulative, "\n");
  }
  cumulative += c.commit_buckets[kCommitBuckets.size()];
  absl::StrAppend(
      &out, "skerry_report_commit_seconds_bucket{le=\"+Inf\"} ", cumulative,
      "\nskerry_report_commit_seconds_sum ", Value(c.commit_seconds_sum),
      "\nskerry_report_commit_seconds_count ", c.commit_count, "\n");
  Header(&out, "skerry_database_bytes", "gauge",
         "Size of the database file and its write-ahead log.");
  absl::StrAppend(&out, "skerry_database_bytes ", g.database_bytes, "\n");
  if (g.storage_free_bytes >= 0) {
    Header(&out, "skerry_storage_free_bytes", "gauge",
           "Free bytes on the file system that holds the database.");
    absl::StrAppend(&out, "skerry_storage_free_bytes ", g.storage_free_bytes,
                    "\n");
  }
  Header(&out, "skerry_storage_held", "gauge",
         "1 while work is held because the database cannot be written.");
  absl::StrAppend(&out, "skerry_storage_held ",
                  g.storage_problem.empty() ? 0 : 1, "\n");
  return out;
}

}  // namespace skerry::http
