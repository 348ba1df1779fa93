// skerry-bench: the figures behind docs/performance.md, measured in one run.
//
//   1. raw SQLite insert rate of genome rows (the real schema, WAL,
//      synchronous=FULL, 1,000 rows per transaction): the ceiling for any
//      coordinator that stores every genome;
//   2. end-to-end evaluations per second with the trivial "zero" evaluator
//      through a real coordinator and workers over loopback TCP;
//   3. the same population evaluated in process, with no coordinator at all;
//   and what group commit buys: results committed one per synced transaction
//   against 256 per transaction.
// It prints all three and the ratios. Not a test: figures depend on the
// machine.
#include <algorithm>
#include <cstdio>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "bench/bench_util.h"
#include "bench/scale_bench.h"
#include "common/evaluator.h"
#include "common/genes.h"
#include "common/random.h"
#include "grpcpp/grpcpp.h"
#include "server/coordinator.h"
#include "server/store/row_sums.h"
#include "server/store/store.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "worker/channel.h"
#include "worker/worker.h"

namespace skerry {
namespace {

struct BenchOptions {
  bool float32 = false;     // --float32: the end-to-end run's gene_precision
  bool natural_es = false;  // --natural-es: the end-to-end run's strategy
  int genome_length = 10;
  int population = 1000;
  int generations = 50;
  int workers = 2;
  int threads = 1;
  int insert_rows = 200000;
  std::string dir = "/tmp";
  std::string coordinator;  // --coordinator: the binary, run as a process
};

std::string TempDb(const BenchOptions& o, const char* name) {
  return bench::TempDb(o.dir, name);
}

// 1. Raw inserts through the store's own schema and pragmas.
double RawInsertRate(const BenchOptions& o) {
  const std::string path = TempDb(o, "raw");
  absl::StatusOr<std::unique_ptr<store::Store>> st = store::Store::Open(path);
  if (!st.ok()) {
    std::fprintf(stderr, "raw insert: %s\n", st.status().ToString().c_str());
    return 0;
  }
  st->reset();
  // A plain connection, as fast as SQLite goes, but computing the row's
  // checksum in the INSERT as the store does (row_sums.h): without it the
  // schema's trigger, which calls skerry_row_sum, fails every insert (and
  // before that was checked, this figure counted failed inserts).
  sqlite3* db = nullptr;
  bool ok = sqlite3_open(path.c_str(), &db) == SQLITE_OK &&
            store::RegisterRowSumFunction(db) == SQLITE_OK &&
            sqlite3_exec(db, "PRAGMA synchronous=FULL", nullptr, nullptr,
                         nullptr) == SQLITE_OK;
  sqlite3_stmt* ins = nullptr;
  ok = ok &&
       sqlite3_prepare_v3(
           db,
           "INSERT INTO genomes (id, run_id, island, generation, slot, "
           "origin, parent_a, parent_b, genes, score, eval_state, attempts, "
           "error, eval_seconds, sum) VALUES (?1, 1, 0, ?2, ?3, 3, ?4, ?5, "
           "?6, ?7, 2, 1, '', 0, skerry_row_sum(?1, 1, 0, ?2, ?3, 3, ?4, ?5, "
           "?6, ?7, 2, 1, '', 0))",
           -1, SQLITE_PREPARE_PERSISTENT, &ins, nullptr) == SQLITE_OK;
  StreamKey key;
  RandomStream rng(key);
  std::vector<double> genes(o.genome_length);
  const int per_txn = 1000;
  const absl::Time start = absl::Now();
  for (int row = 0; ok && row < o.insert_rows; ++row) {
    if (row % per_txn == 0) {
      ok = sqlite3_exec(db, "BEGIN", nullptr, nullptr, nullptr) == SQLITE_OK;
    }
    for (double& g : genes) g = rng.Uniform01();
    const std::string packed = PackGenes(genes);
    ok = ok && sqlite3_bind_int64(ins, 1, row + 1) == SQLITE_OK &&
         sqlite3_bind_int(ins, 2, row / o.population) == SQLITE_OK &&
         sqlite3_bind_int(ins, 3, row % o.population) == SQLITE_OK &&
         sqlite3_bind_int64(ins, 4, row > 0 ? row : 1) == SQLITE_OK &&
         sqlite3_bind_int64(ins, 5, row > 1 ? row - 1 : 1) == SQLITE_OK &&
         sqlite3_bind_blob(ins, 6, packed.data(),
                           static_cast<int>(packed.size()),
                           SQLITE_TRANSIENT) == SQLITE_OK &&
         sqlite3_bind_double(ins, 7, rng.Uniform01()) == SQLITE_OK &&
         sqlite3_step(ins) == SQLITE_DONE;
    sqlite3_reset(ins);
    if (ok && (row % per_txn == per_txn - 1 || row == o.insert_rows - 1)) {
      ok = sqlite3_exec(db, "COMMIT", nullptr, nullptr, nullptr) == SQLITE_OK;
    }
  }
  if (!ok) {
    std::fprintf(stderr, "raw insert failed: %s\n", sqlite3_errmsg(db));
    sqlite3_finalize(ins);
    sqlite3_close(db);
    bench::RemoveDb(path);
    return 0;
  }
  const double secs = absl::ToDoubleSeconds(absl::Now() - start);
  sqlite3_finalize(ins);
  sqlite3_close(db);
  bench::RemoveDb(path);
  return o.insert_rows / secs;
}

// Group commit: the same results committed one per transaction (as a
// coordinator without group commit would, each synced) and in batches of
// `batch`, through GenomeStore::CommitResults. Returns results per second.
double CommitRate(const BenchOptions& o, int batch) {
  const std::string path = TempDb(o, absl::StrCat("commit", batch).c_str());
  absl::StatusOr<std::unique_ptr<store::Store>> st = store::Store::Open(path);
  if (!st.ok()) return 0;
  store::RunRecord run;
  run.name = "bench";
  run.spec.set_genome_length(o.genome_length);
  run.spec.mutable_islands()->set_count(1);
  // 2,000 rows, fewer for long genomes (at most about 200 MB of genes).
  const size_t rows = std::clamp<size_t>(
      25000000 / static_cast<size_t>(o.genome_length), 64, 2000);
  std::vector<store::GenomeRecord> genomes(rows);
  for (uint32_t i = 0; i < genomes.size(); ++i) {
    genomes[i].slot = i;
    genomes[i].genes.assign(o.genome_length, 0.5);
  }
  if (!(*st)->runs().CreateRun(&run, &genomes).ok()) return 0;
  const absl::Time start = absl::Now();
  std::vector<store::ResultUpdate> updates;
  for (const store::GenomeRecord& g : genomes) {
    store::ResultUpdate u;
    u.genome_id = g.id;
    u.run_id = run.id;
    u.score = 1.0;
    u.attempts = 1;
    updates.push_back(u);
    if (static_cast<int>(updates.size()) == batch) {
      if (!(*st)->genomes().CommitResults(updates).ok()) return 0;
      updates.clear();
    }
  }
  if (!updates.empty() && !(*st)->genomes().CommitResults(updates).ok())
    return 0;
  const double secs = absl::ToDoubleSeconds(absl::Now() - start);
  st->reset();
  bench::RemoveDb(path);
  return static_cast<double>(genomes.size()) / secs;
}

bench::EndToEndOptions EndToEnd(const BenchOptions& o) {
  bench::EndToEndOptions e;
  e.dir = o.dir;
  e.genome_length = o.genome_length;
  e.population = o.population;
  e.generations = o.generations;
  e.workers = o.workers;
  e.threads = o.threads;
  e.float32 = o.float32;
  e.natural_es = o.natural_es;
  e.coordinator_binary = o.coordinator;
  return e;
}

// Fleet efficiency (issue 14): evaluations that take `ms` each, on 2 workers
// x 1 thread with their default batch, against the same 2 threads
// evaluating in process. Cantu-Paz's master-slave model (REFERENCES.md)
// says what is lost: each worker's communication time per generation, and
// the wait at the end of each generation.
void FleetEfficiency(const BenchOptions& o, double ms, int population,
                     int generations) {
  bench::EndToEndOptions e = EndToEnd(o);
  e.workers = 2;
  e.threads = 1;
  e.batch = 0;
  e.eval_ms = ms;
  e.population = population;
  e.generations = generations;
  // The coordinator in this process, as these figures were first measured:
  // what is compared is the fleet's protocol and the queue's hand-out. (As a
  // process of its own it measured 0.88 and 0.92 where in process gave 0.96
  // and 0.97, 3 December 2026; not yet explained.)
  e.coordinator_binary.clear();
  const std::string load = bench::LoadAverage();
  absl::StatusOr<bench::EndToEndFigures> f = bench::RunEndToEnd(e);
  if (!f.ok()) {
    std::fprintf(stderr, "fleet: %s\n", f.status().ToString().c_str());
    return;
  }
  const double local = bench::InProcessRate(e, f->evaluations, 2);
  std::printf(
      "fleet %4.0f ms/eval, 2 workers x 1 thread, population %d: end to end "
      "%.1f/s, in process on 2 threads %.1f/s, efficiency %.3f (goal >= "
      "0.97)  [%s]\n",
      ms, population, f->rate, local, local > 0 ? f->rate / local : 0.0,
      load.c_str());
}

// Report latency as a worker sees it (the wait for the group commit that
// holds its results), idle and while four readers loop over the run's list,
// summary, history and digest: the engine's and the store's read paths.
void ReportLatency(const BenchOptions& o) {
  bench::EndToEndOptions e = EndToEnd(o);
  e.workers = 2;
  e.threads = 1;
  e.batch = 16;
  e.eval_ms = 1;
  for (int readers : {0, 4}) {
    e.readers = readers;
    const std::string load = bench::LoadAverage();
    absl::StatusOr<bench::EndToEndFigures> f = bench::RunEndToEnd(e);
    if (!f.ok()) {
      std::fprintf(stderr, "report latency: %s\n",
                   f.status().ToString().c_str());
      return;
    }
    std::printf(
        "report (16 results, synced commit) with %d readers: p50 %.2f ms, "
        "p99 %.2f ms over %zu reports; %.0f evaluations/s, %llu reads  [%s]\n",
        readers, bench::Percentile(f->report_ms, 0.5),
        bench::Percentile(f->report_ms, 0.99), f->report_ms.size(), f->rate,
        static_cast<unsigned long long>(f->reads), load.c_str());
  }
}

}  // namespace
}  // namespace skerry

int main(int argc, char** argv) {
  skerry::BenchOptions o;
  bool fleet = false;
  bool report_latency = false;
  bool keep = false;
  int history_genomes = 0;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    const bool has_value = i + 1 < argc;
    bool ok = true;
    if (a == "--help") {
      std::puts(
          "Usage: skerry-bench [--population N] [--generations N] "
          "[--genome-length N] [--float32] [--natural-es] [--workers N] "
          "[--threads N] "
          "[--insert-rows N] "
          "[--dir DIR] [--coordinator PATH] [--fleet] [--report-latency] "
          "[--history-genomes N [--keep]]\n\nMeasures "
          "raw SQLite genome inserts, end-to-end evaluations per second "
          "through a loopback coordinator and workers (with bytes stored and "
          "sent per evaluation and peak memory), and in-process evaluation, "
          "and prints the ratios. --float32 makes the end-to-end run's "
          "gene_precision FLOAT32; --natural-es makes it the natural ES "
          "(samples stored as recipes) instead of the GA. --coordinator PATH "
          "runs the end-to-end run's coordinator as its own process (that "
          "skerry-coordinator binary), so its peak memory is measured alone. "
          "The in-process limit runs the same run's strategy with no "
          "coordinator: asked on one thread, its genomes built and evaluated "
          "on the workers' thread count. --fleet adds fleet "
          "efficiency at 2 and 20 "
          "ms per evaluation; --report-latency adds the workers' Report "
          "latency (p50, p99) idle and under four readers of the run "
          "(list, show, history, digest); --history-genomes N builds a store "
          "with a "
          "finished run of N genomes and measures result-commit latency idle "
          "and under four digest+history readers, then a coordinator's "
          "restart on it to its first answer (--keep keeps the file).");
      return 0;
    } else if (a == "--population" && has_value) {
      ok = skerry::bench::ParseInt("--population", argv[++i], 2, 1000000,
                                   &o.population);
    } else if (a == "--generations" && has_value) {
      ok = skerry::bench::ParseInt("--generations", argv[++i], 1, 100000,
                                   &o.generations);
    } else if (a == "--genome-length" && has_value) {
      ok = skerry::bench::ParseInt("--genome-length", argv[++i], 1, 1000000,
                                   &o.genome_length);
    } else if (a == "--workers" && has_value) {
      ok = skerry::bench::ParseInt("--workers", argv[++i], 1, 64, &o.workers);
    } else if (a == "--threads" && has_value) {
      ok = skerry::bench::ParseInt("--threads", argv[++i], 1, 64, &o.threads);
    } else if (a == "--insert-rows" && has_value) {
      ok = skerry::bench::ParseInt("--insert-rows", argv[++i], 1000, 100000000,
                                   &o.insert_rows);
    } else if (a == "--fleet") {
      fleet = true;
    } else if (a == "--float32") {
      o.float32 = true;
    } else if (a == "--natural-es") {
      o.natural_es = true;
    } else if (a == "--report-latency") {
      report_latency = true;
    } else if (a == "--keep") {
      keep = true;
    } else if (a == "--history-genomes" && has_value) {
      ok = skerry::bench::ParseInt("--history-genomes", argv[++i], 0, 100000000,
                                   &history_genomes);
    } else if (a == "--dir" && has_value) {
      o.dir = argv[++i];
    } else if (a == "--coordinator" && has_value) {
      o.coordinator = argv[++i];
    } else {
      std::fprintf(stderr,
                   "skerry-bench: unknown or incomplete argument \"%s\"\n",
                   a.c_str());
      return 2;
    }
    if (!ok) return 2;
  }
  std::printf(
      "skerry-bench: genome length %d, population %d x %d generations, "
      "%d workers x %d threads\n",
      o.genome_length, o.population, o.generations, o.workers, o.threads);
  const double raw = skerry::RawInsertRate(o);
  std::printf("raw SQLite insert        %12.0f genome rows/s\n", raw);
  const double single = skerry::CommitRate(o, 1);
  const double grouped = skerry::CommitRate(o, 256);
  std::printf(
      "results, 1 per commit     %12.0f results/s (each commit synced)\n",
      single);
  std::printf(
      "results, 256 per commit   %12.0f results/s (group commit: x%.0f)\n",
      grouped, single > 0 ? grouped / single : 0.0);
  const std::string load = skerry::bench::LoadAverage();
  absl::StatusOr<skerry::bench::EndToEndFigures> f =
      skerry::bench::RunEndToEnd(skerry::EndToEnd(o));
  if (!f.ok()) {
    std::fprintf(stderr, "end to end: %s\n", f.status().ToString().c_str());
    return 1;
  }
  const double e2e = f->rate;
  const uint64_t evaluations = f->evaluations;
  std::printf(
      "end to end (loopback)    %12.0f evaluations/s  (%llu evaluations; "
      "%s at the start)\n",
      e2e, static_cast<unsigned long long>(evaluations), load.c_str());
  const double n = static_cast<double>(std::max<uint64_t>(1, evaluations));
  std::printf(
      "  per evaluation: %.0f bytes stored (database + WAL), %.0f bytes of "
      "protobuf sent by workers, %.0f received; the genes are %d bytes\n",
      f->db_bytes / n, f->sent_bytes / n, f->received_bytes / n,
      (o.float32 ? 4 : 8) * o.genome_length);
  std::printf(
      "  peak RSS of the bench process (%s; every phase so far): %.1f MiB\n",
      o.coordinator.empty() ? "coordinator + workers" : "workers",
      f->peak_rss_kib / 1024.0);
  if (!o.coordinator.empty()) {
    // One generation's genes as doubles: the memory goal is at most
    // twice that plus 200 MB.
    const double generation_mib = 8.0 * o.genome_length *
                                  (o.population + (o.natural_es ? 1 : 0)) /
                                  (1024.0 * 1024.0);
    std::printf(
        "  peak RSS of the coordinator process: %.1f MiB (one generation's "
        "genes %.1f MiB; goal <= %.1f MiB)\n",
        f->coordinator_peak_rss_kib / 1024.0, generation_mib,
        2 * generation_mib + 200 * 1.048576);
  }
  const double local =
      skerry::bench::InProcessRate(skerry::EndToEnd(o), evaluations, 1);
  std::printf("in process (no network)  %12.0f evaluations/s\n", local);
  uint64_t limit_evaluations = 0;
  const absl::StatusOr<double> limit = skerry::bench::InProcessStrategyRate(
      skerry::EndToEnd(o), o.workers * o.threads, &limit_evaluations);
  if (limit.ok()) {
    std::printf(
        "in-process limit         %12.0f evaluations/s  (%llu evaluations: "
        "the same run's strategy, genomes built and evaluated on %d "
        "threads)\n",
        *limit, static_cast<unsigned long long>(limit_evaluations),
        o.workers * o.threads);
  } else {
    std::fprintf(stderr, "in-process limit: %s\n",
                 limit.status().ToString().c_str());
  }
  std::printf("ratio end-to-end / raw insert   %.3f  (goal >= 0.8)\n",
              raw > 0 ? e2e / raw : 0.0);
  std::printf("ratio end-to-end / in process   %.5f\n",
              local > 0 ? e2e / local : 0.0);
  if (limit.ok()) {
    std::printf(
        "ratio end-to-end / in-process limit   %.3f  (goal >= 0.8 at 10^5 "
        "genes and more)\n",
        *limit > 0 ? e2e / *limit : 0.0);
  }
  if (fleet) {
    skerry::FleetEfficiency(o, 2, 200, 10);
    skerry::FleetEfficiency(o, 20, 100, 6);
  }
  if (report_latency) skerry::ReportLatency(o);
  if (history_genomes > 0) {
    skerry::bench::LatencyOptions lo;
    lo.dir = o.dir;
    lo.history_genomes = static_cast<uint64_t>(history_genomes);
    lo.keep = keep;
    return skerry::bench::RunLatencyAndRestart(lo);
  }
  return 0;
}
