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
#include <cstdio>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "bench/bench_util.h"
#include "common/evaluator.h"
#include "common/genes.h"
#include "common/random.h"
#include "grpcpp/grpcpp.h"
#include "server/coordinator.h"
#include "server/store/store.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "worker/channel.h"
#include "worker/worker.h"

namespace skerry {
namespace {

struct BenchOptions {
  int genome_length = 10;
  int population = 1000;
  int generations = 50;
  int workers = 2;
  int threads = 1;
  int insert_rows = 200000;
  std::string dir = "/tmp";
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
  sqlite3* db = nullptr;
  sqlite3_open(path.c_str(), &db);
  sqlite3_exec(db, "PRAGMA synchronous=FULL", nullptr, nullptr, nullptr);
  sqlite3_stmt* ins = nullptr;
  sqlite3_prepare_v2(db,
                     "INSERT INTO genomes (run_id, island, generation, slot, "
                     "origin, parent_a, parent_b, genes, score, eval_state, "
                     "attempts) VALUES (1, 0, ?, ?, 3, ?, ?, ?, ?, 2, 1)",
                     -1, &ins, nullptr);
  StreamKey key;
  RandomStream rng(key);
  std::vector<double> genes(o.genome_length);
  const int per_txn = 1000;
  const absl::Time start = absl::Now();
  for (int row = 0; row < o.insert_rows; ++row) {
    if (row % per_txn == 0)
      sqlite3_exec(db, "BEGIN", nullptr, nullptr, nullptr);
    for (double& g : genes) g = rng.Uniform01();
    const std::string packed = PackGenes(genes);
    sqlite3_bind_int(ins, 1, row / o.population);
    sqlite3_bind_int(ins, 2, row % o.population);
    sqlite3_bind_int64(ins, 3, row > 0 ? row : 1);
    sqlite3_bind_int64(ins, 4, row > 1 ? row - 1 : 1);
    sqlite3_bind_blob(ins, 5, packed.data(), static_cast<int>(packed.size()),
                      SQLITE_TRANSIENT);
    sqlite3_bind_double(ins, 6, rng.Uniform01());
    sqlite3_step(ins);
    sqlite3_reset(ins);
    if (row % per_txn == per_txn - 1 || row == o.insert_rows - 1) {
      sqlite3_exec(db, "COMMIT", nullptr, nullptr, nullptr);
    }
  }
  const double secs = absl::ToDoubleSeconds(absl::Now() - start);
  sqlite3_finalize(ins);
  sqlite3_close(db);
  bench::RemoveDb(path);
  return o.insert_rows / secs;
}

// Group commit: the same results committed one per transaction (as a
// coordinator without group commit would, each synced) and in batches of
// `batch`, through Store::CommitResults. Returns results per second.
double CommitRate(const BenchOptions& o, int batch) {
  const std::string path = TempDb(o, absl::StrCat("commit", batch).c_str());
  absl::StatusOr<std::unique_ptr<store::Store>> st = store::Store::Open(path);
  if (!st.ok()) return 0;
  store::RunRecord run;
  run.name = "bench";
  run.spec.set_genome_length(o.genome_length);
  run.spec.mutable_islands()->set_count(1);
  std::vector<store::GenomeRecord> genomes(2000);
  for (uint32_t i = 0; i < genomes.size(); ++i) {
    genomes[i].slot = i;
    genomes[i].genes.assign(o.genome_length, 0.5);
  }
  if (!(*st)->CreateRun(&run, &genomes).ok()) return 0;
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
      if (!(*st)->CommitResults(updates).ok()) return 0;
      updates.clear();
    }
  }
  if (!updates.empty() && !(*st)->CommitResults(updates).ok()) return 0;
  const double secs = absl::ToDoubleSeconds(absl::Now() - start);
  st->reset();
  bench::RemoveDb(path);
  return static_cast<double>(genomes.size()) / secs;
}

// 2. A real coordinator on loopback, real workers (in this process, over TCP).
double EndToEndRate(const BenchOptions& o, uint64_t* evaluations) {
  const std::string path = TempDb(o, "e2e");
  std::optional<bench::Loopback> c = bench::StartLoopback(path);
  if (!c.has_value()) return 0;
  const std::string& address = c->address;
  auto runs = skerry::v1::RunService::NewStub(
      grpc::CreateChannel(address, grpc::InsecureChannelCredentials()));
  skerry::v1::SubmitRunRequest req;
  skerry::v1::RunSpec* spec = req.mutable_spec();
  spec->set_name("bench-zero");
  spec->set_seed(1);
  spec->set_genome_length(o.genome_length);
  spec->mutable_evaluator()->mutable_builtin()->set_function("zero");
  spec->mutable_ga()->set_population_size(o.population);
  spec->mutable_ga()->set_elites(0);
  spec->mutable_stop()->set_max_generations(o.generations);

  std::vector<std::unique_ptr<worker::Worker>> workers;
  std::vector<std::thread> threads;
  for (int i = 0; i < o.workers; ++i) {
    worker::WorkerOptions wo;
    wo.name = absl::StrCat("bench-", i);
    wo.threads = o.threads;
    wo.batch = 256;
    workers.push_back(std::make_unique<worker::Worker>(
        skerry::v1::FleetService::NewStub(
            worker::CreateCoordinatorChannel(address)),
        wo, Clock::Real()));
  }
  for (auto& w : workers) {
    threads.emplace_back([&w] { w->Run().IgnoreError(); });
  }
  const absl::Time start = absl::Now();
  {
    grpc::ClientContext ctx;
    skerry::v1::SubmitRunResponse resp;
    grpc::Status s = runs->SubmitRun(&ctx, req, &resp);
    if (!s.ok())
      std::fprintf(stderr, "submit: %s\n", s.error_message().c_str());
  }
  skerry::v1::GetRunResponse got;
  for (int polls = 0; polls < 60000; ++polls) {
    grpc::ClientContext ctx;
    skerry::v1::RunRef ref;
    ref.set_run_id(1);
    got.Clear();
    runs->GetRun(&ctx, ref, &got);
    if (got.run().state() == skerry::v1::FINISHED) break;
    absl::SleepFor(absl::Milliseconds(5));
  }
  const double secs = absl::ToDoubleSeconds(absl::Now() - start);
  *evaluations = got.run().evaluations();
  for (auto& w : workers) w->Stop();
  for (auto& t : threads) t.join();
  c->coordinator->Shutdown();
  bench::RemoveDb(path);
  return static_cast<double>(*evaluations) / secs;
}

// 3. The same evaluations with no coordinator: the evaluator alone.
double InProcessRate(const BenchOptions& o, uint64_t evaluations) {
  skerry::v1::EvaluatorSpec es;
  es.mutable_builtin()->set_function("zero");
  absl::StatusOr<std::unique_ptr<Evaluator>> ev = MakeEvaluator(es);
  if (!ev.ok()) return 0;
  StreamKey key;
  RandomStream rng(key);
  std::vector<double> genes(o.genome_length);
  double sink = 0;
  const absl::Time start = absl::Now();
  for (uint64_t i = 0; i < evaluations; ++i) {
    for (double& g : genes) g = rng.Uniform01();
    absl::StatusOr<double> s = (*ev)->Evaluate(genes, i);
    if (s.ok()) sink += *s;
  }
  const double secs =
      std::max(1e-9, absl::ToDoubleSeconds(absl::Now() - start));
  if (sink != 0) std::printf("(checksum %g)\n", sink);
  return static_cast<double>(evaluations) / secs;
}

}  // namespace
}  // namespace skerry

int main(int argc, char** argv) {
  skerry::BenchOptions o;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    const bool has_value = i + 1 < argc;
    bool ok = true;
    if (a == "--help") {
      std::puts(
          "Usage: skerry-bench [--population N] [--generations N] "
          "[--genome-length N] [--workers N] [--threads N] [--insert-rows N] "
          "[--dir DIR]\n\nMeasures raw SQLite genome inserts, end-to-end "
          "evaluations per second through a loopback coordinator and workers, "
          "and in-process evaluation, and prints the ratios.");
      return 0;
    } else if (a == "--population" && has_value) {
      ok = skerry::bench::ParseInt("--population", argv[++i], 2, 1000000,
                                   &o.population);
    } else if (a == "--generations" && has_value) {
      ok = skerry::bench::ParseInt("--generations", argv[++i], 1, 100000,
                                   &o.generations);
    } else if (a == "--genome-length" && has_value) {
      ok = skerry::bench::ParseInt("--genome-length", argv[++i], 1, 100000,
                                   &o.genome_length);
    } else if (a == "--workers" && has_value) {
      ok = skerry::bench::ParseInt("--workers", argv[++i], 1, 64, &o.workers);
    } else if (a == "--threads" && has_value) {
      ok = skerry::bench::ParseInt("--threads", argv[++i], 1, 64, &o.threads);
    } else if (a == "--insert-rows" && has_value) {
      ok = skerry::bench::ParseInt("--insert-rows", argv[++i], 1000, 100000000,
                                   &o.insert_rows);
    } else if (a == "--dir" && has_value) {
      o.dir = argv[++i];
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
  uint64_t evaluations = 0;
  const double e2e = skerry::EndToEndRate(o, &evaluations);
  std::printf(
      "end to end (loopback)    %12.0f evaluations/s  (%llu evaluations)\n",
      e2e, static_cast<unsigned long long>(evaluations));
  const double local = skerry::InProcessRate(o, evaluations);
  std::printf("in process (no network)  %12.0f evaluations/s\n", local);
  std::printf("ratio end-to-end / raw insert   %.3f  (first target >= 0.25)\n",
              raw > 0 ? e2e / raw : 0.0);
  std::printf("ratio end-to-end / in process   %.5f\n",
              local > 0 ? e2e / local : 0.0);
  return 0;
}
