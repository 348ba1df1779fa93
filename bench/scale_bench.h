// The scale figures of skerry-bench (docs/performance.md, issue 14): an
// end-to-end run that also counts bytes stored and sent per evaluation and
// the process's peak memory; fleet efficiency against the same threads
// evaluating in process; result-commit latency idle and under read load; and
// the restart of a coordinator on a large store. Not tests: the figures
// depend on the machine and its load, which each section prints beside them.
//
// Thread safety: each function runs alone on the calling thread (it starts
// and joins its own threads).
#ifndef SKERRY_BENCH_SCALE_BENCH_H_
#define SKERRY_BENCH_SCALE_BENCH_H_

#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "common/evaluator.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::bench {

struct EndToEndOptions {
  std::string dir = "/tmp";
  int genome_length = 10;
  int population = 1000;
  int generations = 50;
  int workers = 2;
  int threads = 1;
  uint32_t batch = 256;  // tasks per lease; 0: the worker's default
  // Each evaluation sleeps this long before the "zero" function (0: none).
  double eval_ms = 0;
  // Threads that loop over ListRuns, GetRun, GetHistory and GetDigest of the
  // run while it runs (the engine's and the store's read paths), as people
  // watching a run do.
  int readers = 0;
  // The run's gene_precision is FLOAT32 (4 bytes a gene stored and sent).
  bool float32 = false;
  // The run is the natural ES (population_size `population`, rounded up to
  // even) instead of the GA: its samples are stored as their recipes.
  bool natural_es = false;
  // When set, the coordinator is this skerry-coordinator binary, started as a
  // process of its own on 127.0.0.1 (port 0), so that its peak memory is
  // measured alone (EndToEndFigures.coordinator_peak_rss_kib); else it runs
  // in this process beside the workers.
  std::string coordinator_binary;
};

struct EndToEndFigures {
  uint64_t evaluations = 0;
  double seconds = 0;
  double rate = 0;              // evaluations per second
  uint64_t db_bytes = 0;        // database + WAL at the end
  uint64_t sent_bytes = 0;      // worker to coordinator, protobuf payload
  uint64_t received_bytes = 0;  // coordinator to worker, protobuf payload
  uint64_t peak_rss_kib = 0;    // this process's VmHWM afterwards
  // The coordinator process's VmHWM before it is stopped (coordinator_binary
  // set; else 0).
  uint64_t coordinator_peak_rss_kib = 0;
  // Every Report RPC's latency as its worker saw it (send to status), in ms:
  // the wait for the group commit that holds its results.
  std::vector<double> report_ms;
  uint64_t reads = 0;  // reader calls made (readers > 0)
};

// A real coordinator on loopback and real workers in this process.
absl::StatusOr<EndToEndFigures> RunEndToEnd(const EndToEndOptions& o);

// The p-th quantile (0..1) of `v`, by rank; 0 for none.
double Percentile(std::vector<double> v, double p);

// The run RunEndToEnd submits (its spec, before the coordinator prepares it).
skerry::v1::RunSpec EndToEndSpec(const EndToEndOptions& o);

// The limit of issue 14: the same run's genomes made, built and evaluated in
// this process with no coordinator, store or network. The strategy is asked
// for each generation on this thread, as the coordinator's engine asks it;
// `threads` threads then build each genome's genes as a worker does (a
// natural ES sample from its recipe; a GA genome comes bred) and evaluate
// them; the strategy is told the scores. Evaluations per second, and their
// count in *evaluations.
absl::StatusOr<double> InProcessStrategyRate(const EndToEndOptions& o,
                                             int threads,
                                             uint64_t* evaluations);

// The same evaluations as RunEndToEnd would make, on `threads` threads in
// process (the sleep included), each genome's genes drawn uniformly (not
// bred): evaluations per second. The fleet-efficiency comparison, where the
// evaluation's sleep is what is measured.
double InProcessRate(const EndToEndOptions& o, uint64_t evaluations,
                     int threads);

// The evaluator the bench workers use: "zero", after sleeping eval_ms.
std::unique_ptr<Evaluator> BenchEvaluator(double eval_ms);

// Result-commit latency (CommitResults of `batch` results, each commit
// synced) idle and while `readers` threads loop over RunDigest and GetStats
// of a finished run of `history_genomes` genomes; then the restart of a
// coordinator on that store to its first answer.
struct LatencyOptions {
  std::string dir = "/tmp";
  uint64_t history_genomes = 300000;
  int population = 1000;  // per generation of the history run
  int genome_length = 10;
  int readers = 4;
  int commits = 400;  // half idle, half under load
  int batch = 16;
  bool keep = false;  // keep the store file (its path is printed)
};
int RunLatencyAndRestart(const LatencyOptions& o);

// "load average: a, b, c" from /proc/loadavg, for the line beside a figure.
std::string LoadAverage();

}  // namespace skerry::bench

#endif  // SKERRY_BENCH_SCALE_BENCH_H_
