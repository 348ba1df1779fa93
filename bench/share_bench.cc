// skerry-share-bench: the fleet's fair share across runs, measured
// (docs/sharing.md; the figure is in docs/performance.md).
//
// Starts a real coordinator on a loopback port and real workers (in this
// process, over TCP), submits one run per priority given (default 1 and 3),
// each with far more tasks waiting than the fleet has threads, and evaluates
// with the built-in "zero" function plus a fixed sleep per evaluation: the
// fleet is evaluation-bound, as with a real simulator, without the sleep
// taking the CPU from the coordinator. After a warm-up it counts every run's
// committed evaluations over the measuring window and compares the split with
// the priorities. Exit 0 when every run's ratio to the first run is within
// --tolerance of the ratio of their priorities, 1 when not, 2 on bad flags
// or when the setup fails. Not a test: it takes a minute and the machine.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/time/clock.h"
#include "bench/bench_util.h"
#include "common/evaluator.h"
#include "grpcpp/grpcpp.h"
#include "server/coordinator.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "worker/channel.h"
#include "worker/worker.h"

namespace skerry {
namespace {

struct ShareOptions {
  std::vector<uint32_t> priorities = {1, 3};
  int seconds = 60;  // measuring window
  int warmup = 5;    // seconds before it
  int workers = 4;
  int threads = 4;       // per worker
  int eval_ms = 10;      // sleep per evaluation
  int islands = 8;       // per run
  int population = 400;  // per island
  double tolerance = 0.10;
  std::string dir = "/tmp";
};

// An evaluator that takes a fixed time: the inner one after a sleep.
class SlowEvaluator final : public Evaluator {
 public:
  SlowEvaluator(std::unique_ptr<Evaluator> inner, absl::Duration busy)
      : inner_(std::move(inner)), busy_(busy) {}
  absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                  uint64_t seed) override {
    absl::SleepFor(busy_);
    return inner_->Evaluate(genes, seed);
  }

 private:
  std::unique_ptr<Evaluator> inner_;
  absl::Duration busy_;
};

skerry::v1::SubmitRunRequest RunRequest(const ShareOptions& o, size_t index) {
  skerry::v1::SubmitRunRequest req;
  req.set_priority(o.priorities[index]);
  skerry::v1::RunSpec* spec = req.mutable_spec();
  spec->set_name(absl::StrCat("share-", index + 1));
  spec->set_seed(index + 1);
  spec->set_genome_length(10);
  spec->mutable_evaluator()->mutable_builtin()->set_function("zero");
  spec->mutable_ga()->set_population_size(o.population);
  spec->mutable_ga()->set_elites(0);
  spec->mutable_islands()->set_count(o.islands);
  spec->mutable_stop()->set_max_generations(100000);  // stopped by the bench
  return req;
}

// Committed evaluations of every run, in submission order; empty on error.
std::vector<uint64_t> Evaluations(skerry::v1::RunService::Stub& runs,
                                  const std::vector<uint64_t>& ids) {
  std::vector<uint64_t> out;
  for (uint64_t id : ids) {
    grpc::ClientContext ctx;
    ctx.set_deadline(absl::ToChronoTime(absl::Now() + absl::Seconds(30)));
    skerry::v1::RunRef ref;
    ref.set_run_id(id);
    skerry::v1::GetRunResponse got;
    grpc::Status s = runs.GetRun(&ctx, ref, &got);
    if (!s.ok()) {
      std::fprintf(stderr, "run %llu: %s\n",
                   static_cast<unsigned long long>(id),
                   s.error_message().c_str());
      return {};
    }
    out.push_back(got.run().evaluations());
  }
  return out;
}

int Measure(const ShareOptions& o) {
  const std::string path = bench::TempDb(o.dir, "share");
  std::optional<bench::Loopback> c = bench::StartLoopback(path);
  if (!c.has_value()) return 2;
  const std::string& address = c->address;
  auto runs = skerry::v1::RunService::NewStub(
      grpc::CreateChannel(address, grpc::InsecureChannelCredentials()));
  std::vector<uint64_t> ids;
  for (size_t i = 0; i < o.priorities.size(); ++i) {
    grpc::ClientContext ctx;
    skerry::v1::SubmitRunResponse resp;
    grpc::Status s = runs->SubmitRun(&ctx, RunRequest(o, i), &resp);
    if (!s.ok()) {
      std::fprintf(stderr, "submit: %s\n", s.error_message().c_str());
      return 2;
    }
    ids.push_back(resp.run().id());
  }

  const absl::Duration busy = absl::Milliseconds(o.eval_ms);
  std::vector<std::unique_ptr<worker::Worker>> workers;
  std::vector<std::thread> threads;
  for (int i = 0; i < o.workers; ++i) {
    worker::WorkerOptions wo;
    wo.name = absl::StrCat("share-", i);
    wo.threads = o.threads;
    wo.make_evaluator = [busy](const skerry::v1::EvaluatorSpec& spec)
        -> absl::StatusOr<std::unique_ptr<Evaluator>> {
      absl::StatusOr<std::unique_ptr<Evaluator>> inner = MakeEvaluator(spec);
      if (!inner.ok()) return inner.status();
      return std::make_unique<SlowEvaluator>(*std::move(inner), busy);
    };
    workers.push_back(std::make_unique<worker::Worker>(
        skerry::v1::FleetService::NewStub(
            worker::CreateCoordinatorChannel(address)),
        wo, Clock::Real()));
  }
  for (auto& w : workers) {
    threads.emplace_back([&w] { w->Run().IgnoreError(); });
  }
  absl::SleepFor(absl::Seconds(o.warmup));
  const std::vector<uint64_t> before = Evaluations(*runs, ids);
  const absl::Time start = absl::Now();
  absl::SleepFor(absl::Seconds(o.seconds));
  const std::vector<uint64_t> after = Evaluations(*runs, ids);
  const double secs = absl::ToDoubleSeconds(absl::Now() - start);
  for (auto& w : workers) w->Stop();
  for (auto& t : threads) t.join();
  c->coordinator->Shutdown();
  bench::RemoveDb(path);
  if (before.size() != ids.size() || after.size() != ids.size()) return 2;

  uint64_t total = 0;
  uint32_t weights = 0;
  for (size_t i = 0; i < ids.size(); ++i) {
    total += after[i] - before[i];
    weights += o.priorities[i];
  }
  if (total == 0 || after[0] == before[0]) {
    std::fprintf(stderr, "no evaluations in the window\n");
    return 2;
  }
  const double capacity = o.workers * o.threads * 1000.0 / o.eval_ms;
  std::printf(
      "%.0f s measured: %llu evaluations, %.0f/s (fleet capacity %.0f/s)\n",
      secs, static_cast<unsigned long long>(total), total / secs, capacity);
  const double first = static_cast<double>(after[0] - before[0]);
  double worst = 0;
  for (size_t i = 0; i < ids.size(); ++i) {
    const double got = static_cast<double>(after[i] - before[i]);
    const double ratio = got / first;
    const double want = static_cast<double>(o.priorities[i]) / o.priorities[0];
    const double off = std::abs(ratio / want - 1);
    worst = std::max(worst, off);
    std::printf(
        "run %llu  priority %4u  evaluations %8.0f  share %.4f (by weight "
        "%.4f)  ratio to run %llu %.3f (by weight %.3f, %.1f%% off)\n",
        static_cast<unsigned long long>(ids[i]), o.priorities[i], got,
        got / total, static_cast<double>(o.priorities[i]) / weights,
        static_cast<unsigned long long>(ids[0]), ratio, want, 100 * off);
  }
  const bool pass = worst <= o.tolerance;
  std::printf("largest deviation %.1f%%: %s (target within %.0f%%)\n",
              100 * worst, pass ? "PASS" : "FAIL", 100 * o.tolerance);
  return pass ? 0 : 1;
}

bool ParsePriorities(const char* text, std::vector<uint32_t>* out) {
  out->clear();
  for (absl::string_view part : absl::StrSplit(text, ',')) {
    uint32_t p = 0;
    if (!absl::SimpleAtoi(part, &p) || p < 1 || p > 1000) {
      std::fprintf(stderr,
                   "--priorities: expected numbers from 1 to 1000 separated "
                   "by commas, got \"%s\"\n",
                   text);
      return false;
    }
    out->push_back(p);
  }
  if (out->size() < 2 || out->size() > 16) {
    std::fprintf(stderr, "--priorities: give 2 to 16 runs, got %zu\n",
                 out->size());
    return false;
  }
  return true;
}

}  // namespace
}  // namespace skerry

int main(int argc, char** argv) {
  skerry::ShareOptions o;
  using skerry::bench::ParseInt;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    const bool has_value = i + 1 < argc;
    bool ok = true;
    if (a == "--help") {
      std::puts(
          "Usage: skerry-share-bench [--priorities 1,3] [--seconds 60] "
          "[--warmup 5] [--workers 4] [--threads 4] [--eval-ms 10] "
          "[--islands 8] [--population 400] [--tolerance-percent 10] "
          "[--dir DIR]\n\nRuns one run per priority on a loopback coordinator "
          "with evaluation-bound workers and prints how the evaluations split "
          "between them against their priorities.");
      return 0;
    } else if (a == "--priorities" && has_value) {
      ok = skerry::ParsePriorities(argv[++i], &o.priorities);
    } else if (a == "--seconds" && has_value) {
      ok = ParseInt("--seconds", argv[++i], 1, 86400, &o.seconds);
    } else if (a == "--warmup" && has_value) {
      ok = ParseInt("--warmup", argv[++i], 0, 3600, &o.warmup);
    } else if (a == "--workers" && has_value) {
      ok = ParseInt("--workers", argv[++i], 1, 64, &o.workers);
    } else if (a == "--threads" && has_value) {
      ok = ParseInt("--threads", argv[++i], 1, 256, &o.threads);
    } else if (a == "--eval-ms" && has_value) {
      ok = ParseInt("--eval-ms", argv[++i], 1, 60000, &o.eval_ms);
    } else if (a == "--islands" && has_value) {
      ok = ParseInt("--islands", argv[++i], 1, 256, &o.islands);
    } else if (a == "--population" && has_value) {
      ok = ParseInt("--population", argv[++i], 2, 1000000, &o.population);
    } else if (a == "--tolerance-percent" && has_value) {
      int percent = 0;
      ok = ParseInt("--tolerance-percent", argv[++i], 0, 100, &percent);
      o.tolerance = percent / 100.0;
    } else if (a == "--dir" && has_value) {
      o.dir = argv[++i];
    } else {
      std::fprintf(
          stderr, "skerry-share-bench: unknown or incomplete argument \"%s\"\n",
          a.c_str());
      return 2;
    }
    if (!ok) return 2;
  }
  std::string priorities;
  for (uint32_t p : o.priorities) absl::StrAppend(&priorities, " ", p);
  std::printf(
      "skerry-share-bench: %zu runs, priorities%s; %d x %d islands each; %d "
      "workers x %d threads; %d ms per evaluation; %d s warm-up, %d s "
      "measured\n",
      o.priorities.size(), priorities.c_str(), o.islands, o.population,
      o.workers, o.threads, o.eval_ms, o.warmup, o.seconds);
  return skerry::Measure(o);
}
