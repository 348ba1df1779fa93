// Result-commit latency idle and under read load, and the restart of a
// coordinator on a large store (bench/scale_bench.h).
//
// The large store is made by a generator path: one finished run whose
// generations are written through RunStore::CreateRun and
// RunStore::CommitGeneration, the coordinator's own commit points, with random
// genes, parent links into the generation before and scores, so a digest or
// a history read does the work it does on a real run of that size.
#include <sys/stat.h>

#include <algorithm>
#include <atomic>
#include <cstdio>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "bench/bench_util.h"
#include "bench/scale_bench.h"
#include "common/random.h"
#include "common/status_macros.h"
#include "grpcpp/grpcpp.h"
#include "server/store/store.h"
#include "skerry/v1/runs.grpc.pb.h"

namespace skerry::bench {
namespace {

using store::GenomeRecord;
using store::Store;

skerry::v1::RunSpec Spec(const char* name, int genome_length, int population) {
  skerry::v1::RunSpec spec;
  spec.set_name(name);
  spec.set_seed(7);
  spec.set_genome_length(genome_length);
  spec.mutable_evaluator()->mutable_builtin()->set_function("zero");
  spec.mutable_ga()->set_population_size(population);
  spec.mutable_islands()->set_count(1);
  return spec;
}

// The finished history run: generations of `population` evaluated genomes.
absl::StatusOr<int64_t> BuildHistory(Store* st, const LatencyOptions& o) {
  store::RunRecord run;
  run.name = "history";
  run.spec = Spec("history", o.genome_length, o.population);
  run.state = skerry::v1::FINISHED;
  StreamKey key;
  key.run_seed = 7;
  RandomStream rng(key);
  auto generation = [&](uint32_t g, const std::vector<GenomeRecord>& before) {
    std::vector<GenomeRecord> out(o.population);
    for (int s = 0; s < o.population; ++s) {
      GenomeRecord& r = out[s];
      r.run_id = run.id;  // 0 for generation 0: CreateRun sets it
      r.island = 0;
      r.generation = g;
      r.slot = static_cast<uint32_t>(s);
      r.origin = g == 0 ? skerry::v1::SEEDED : skerry::v1::CROSSOVER;
      if (!before.empty()) {
        r.parent_a = before[rng.Below(before.size())].id;
        r.parent_b = before[rng.Below(before.size())].id;
      }
      r.genes.resize(o.genome_length);
      for (double& x : r.genes) x = rng.Uniform01();
      r.state = skerry::v1::EVALUATED;
      r.score = rng.Uniform01();
      r.attempts = 1;
    }
    return out;
  };
  std::vector<GenomeRecord> current = generation(0, {});
  SKERRY_RETURN_IF_ERROR(st->runs().CreateRun(&run, &current));
  const uint64_t generations =
      std::max<uint64_t>(1, o.history_genomes / o.population);
  for (uint32_t g = 1; g < generations; ++g) {
    std::vector<GenomeRecord> next = generation(g, current);
    store::GenerationCommit c;
    c.run_id = run.id;
    c.island = 0;
    c.completed.run_id = run.id;
    c.completed.island = 0;
    c.completed.generation = g - 1;
    c.completed.best = 0;
    c.completed.evaluations = static_cast<uint32_t>(o.population);
    c.island_done = g + 1 == generations;
    c.next = &next;
    SKERRY_RETURN_IF_ERROR(st->runs().CommitGeneration(c));
    current = std::move(next);
  }
  return run.id;
}

absl::Status TimeCommits(Store* st, const std::vector<GenomeRecord>& pending,
                         size_t from, int commits, int batch,
                         std::vector<double>* ms) {
  for (int c = 0; c < commits; ++c) {
    std::vector<store::ResultUpdate> updates;
    for (int i = 0; i < batch; ++i) {
      const GenomeRecord& g = pending[from + c * batch + i];
      store::ResultUpdate u;
      u.genome_id = g.id;
      u.run_id = g.run_id;
      u.score = 1.0;
      u.attempts = 1;
      updates.push_back(u);
    }
    const absl::Time t0 = absl::Now();
    SKERRY_RETURN_IF_ERROR(st->genomes().CommitResults(updates));
    ms->push_back(absl::ToDoubleMilliseconds(absl::Now() - t0));
  }
  return absl::OkStatus();
}

uint64_t FileBytes(const std::string& path) {
  struct stat s;
  return stat(path.c_str(), &s) == 0 ? static_cast<uint64_t>(s.st_size) : 0;
}

}  // namespace

double Percentile(std::vector<double> v, double p) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  const size_t i = std::min(
      v.size() - 1, static_cast<size_t>(p * static_cast<double>(v.size())));
  return v[i];
}

int RunLatencyAndRestart(const LatencyOptions& o) {
  const std::string path = TempDb(o.dir, "history");
  std::printf("large store: %s (%s)\n", path.c_str(), LoadAverage().c_str());
  auto st = Store::Open(path);
  if (!st.ok()) {
    std::fprintf(stderr, "open: %s\n", st.status().ToString().c_str());
    return 1;
  }
  const absl::Time built0 = absl::Now();
  absl::StatusOr<int64_t> history = BuildHistory(st->get(), o);
  if (!history.ok()) {
    std::fprintf(stderr, "history: %s\n", history.status().ToString().c_str());
    return 1;
  }
  std::printf("  built %llu genomes of %d genes in %.1f s, %.1f MB\n",
              static_cast<unsigned long long>(
                  std::max<uint64_t>(1, o.history_genomes / o.population) *
                  o.population),
              o.genome_length, absl::ToDoubleSeconds(absl::Now() - built0),
              (FileBytes(path) + FileBytes(path + "-wal")) / 1e6);

  // The run whose results are committed: pending genomes, one island.
  store::RunRecord live;
  live.name = "live";
  live.spec = Spec("live", o.genome_length, o.population);
  live.state = skerry::v1::FINISHED;  // keeps a restarted engine off it
  std::vector<GenomeRecord> pending(static_cast<size_t>(o.commits) * o.batch);
  for (size_t i = 0; i < pending.size(); ++i) {
    pending[i].slot = static_cast<uint32_t>(i);
    pending[i].genes.assign(o.genome_length, 0.5);
  }
  if (absl::Status s = (*st)->runs().CreateRun(&live, &pending); !s.ok()) {
    std::fprintf(stderr, "live run: %s\n", s.ToString().c_str());
    return 1;
  }
  const int half = o.commits / 2;
  std::vector<double> idle, loaded, digest_ms;
  std::printf("  idle commits (%s)\n", LoadAverage().c_str());
  if (absl::Status s = TimeCommits(st->get(), pending, 0, half, o.batch, &idle);
      !s.ok()) {
    std::fprintf(stderr, "commit: %s\n", s.ToString().c_str());
    return 1;
  }
  std::atomic<bool> stop{false};
  std::atomic<uint64_t> reads{0};
  std::atomic<uint64_t> read_errors{0};
  absl::Mutex mu;
  std::vector<std::thread> readers;
  for (int r = 0; r < o.readers; ++r) {
    readers.emplace_back([&] {
      while (!stop) {
        const absl::Time t0 = absl::Now();
        if (!(*st)->genomes().RunDigest(*history).ok()) ++read_errors;
        const double ms = absl::ToDoubleMilliseconds(absl::Now() - t0);
        {
          absl::MutexLock l(&mu);
          digest_ms.push_back(ms);
        }
        if (!(*st)->runs().GetStats(*history, std::nullopt).ok()) ++read_errors;
        reads += 2;
      }
    });
  }
  // Let every reader get inside a digest before timing.
  absl::SleepFor(absl::Milliseconds(200));
  std::printf("  commits under %d readers (%s)\n", o.readers,
              LoadAverage().c_str());
  absl::Status loaded_status =
      TimeCommits(st->get(), pending, static_cast<size_t>(half) * o.batch, half,
                  o.batch, &loaded);
  stop = true;
  for (auto& t : readers) t.join();
  if (!loaded_status.ok()) {
    std::fprintf(stderr, "commit: %s\n", loaded_status.ToString().c_str());
    return 1;
  }
  std::printf(
      "result commit (%d results, synced)  idle p50 %.2f ms p99 %.2f ms;  "
      "under %d digest+history readers p50 %.2f ms p99 %.2f ms  (p99 ratio "
      "%.2f, goal <= 2)\n",
      o.batch, Percentile(idle, 0.5), Percentile(idle, 0.99), o.readers,
      Percentile(loaded, 0.5), Percentile(loaded, 0.99),
      Percentile(idle, 0.99) > 0
          ? Percentile(loaded, 0.99) / Percentile(idle, 0.99)
          : 0.0);
  std::printf(
      "  reads meanwhile: %llu (%llu failed); digest of the %llu-genome "
      "run median %.0f ms\n",
      static_cast<unsigned long long>(reads.load()),
      static_cast<unsigned long long>(read_errors.load()),
      static_cast<unsigned long long>(o.history_genomes),
      Percentile(digest_ms, 0.5));
  st->reset();

  // Restart: a coordinator on this store, timed to its first answer.
  std::printf("  restart (%s)\n", LoadAverage().c_str());
  const absl::Time r0 = absl::Now();
  std::optional<Loopback> c = StartLoopback(path);
  if (!c.has_value()) return 1;
  auto runs = skerry::v1::RunService::NewStub(
      grpc::CreateChannel(c->address, grpc::InsecureChannelCredentials()));
  grpc::ClientContext ctx;
  ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(60));
  skerry::v1::ListRunsResponse listed;
  grpc::Status s = runs->ListRuns(&ctx, skerry::v1::ListRunsRequest(), &listed);
  const double restart_s = absl::ToDoubleSeconds(absl::Now() - r0);
  std::printf(
      "restart to first answer (ListRuns, %d runs)  %.3f s on %.1f MB, "
      "%llu genomes  (goal <= 2 s on 10M genomes)%s\n",
      listed.runs_size(), restart_s,
      (FileBytes(path) + FileBytes(path + "-wal")) / 1e6,
      static_cast<unsigned long long>(o.history_genomes + pending.size()),
      s.ok() ? "" : absl::StrCat("  FAILED: ", s.error_message()).c_str());
  c->coordinator->Shutdown();
  c.reset();
  if (!o.keep) RemoveDb(path);
  return s.ok() ? 0 : 1;
}

}  // namespace skerry::bench
