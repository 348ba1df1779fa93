#include "bench/scale_bench.h"

#include <signal.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cstdio>
#include <fstream>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/clock.h"
#include "bench/bench_util.h"
#include "common/clock.h"
#include "common/random.h"
#include "common/spec.h"
#include "google/protobuf/message_lite.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/support/client_interceptor.h"
#include "server/engine/strategy.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "tests/support/process.h"
#include "worker/worker.h"

namespace skerry::bench {
namespace {

// "zero" after a fixed sleep: an evaluation-bound fleet, as with a real
// simulator, without the sleep taking a CPU from the coordinator.
class SleepyZero final : public Evaluator {
 public:
  explicit SleepyZero(double ms) : busy_(absl::Microseconds(ms * 1000)) {}
  absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                  uint64_t) override {
    if (busy_ > absl::ZeroDuration()) absl::SleepFor(busy_);
    return genes.empty() ? 0.0 : 0.0 * genes[0];
  }

 private:
  absl::Duration busy_;
};

// Counts the protobuf payload of every message a worker sends and receives
// (not HTTP/2 framing or headers): the bytes that grow with the genomes.
// Also times every Report call, from its first byte sent to its status.
struct WireCount {
  std::atomic<uint64_t> sent{0};
  std::atomic<uint64_t> received{0};
  absl::Mutex mu;
  std::vector<double> report_ms ABSL_GUARDED_BY(mu);
};

class CountingInterceptor final : public grpc::experimental::Interceptor {
 public:
  CountingInterceptor(WireCount* count, bool timed)
      : count_(count), timed_(timed) {}
  void Intercept(grpc::experimental::InterceptorBatchMethods* m) override {
    using grpc::experimental::InterceptionHookPoints;
    if (timed_ && m->QueryInterceptionHookPoint(
                      InterceptionHookPoints::PRE_SEND_INITIAL_METADATA)) {
      start_ = absl::Now();
    }
    if (timed_ && m->QueryInterceptionHookPoint(
                      InterceptionHookPoints::POST_RECV_STATUS)) {
      const double ms = absl::ToDoubleMilliseconds(absl::Now() - start_);
      absl::MutexLock l(&count_->mu);
      count_->report_ms.push_back(ms);
    }
    if (m->QueryInterceptionHookPoint(
            InterceptionHookPoints::PRE_SEND_MESSAGE)) {
      const void* msg = m->GetSendMessage();
      if (msg != nullptr) {
        count_->sent += static_cast<const google::protobuf::MessageLite*>(msg)
                            ->ByteSizeLong();
      }
    }
    if (m->QueryInterceptionHookPoint(
            InterceptionHookPoints::POST_RECV_MESSAGE)) {
      void* msg = m->GetRecvMessage();
      if (msg != nullptr) {
        count_->received +=
            static_cast<google::protobuf::MessageLite*>(msg)->ByteSizeLong();
      }
    }
    m->Proceed();
  }

 private:
  WireCount* count_;
  const bool timed_;
  absl::Time start_;
};

class CountingFactory final
    : public grpc::experimental::ClientInterceptorFactoryInterface {
 public:
  explicit CountingFactory(WireCount* count) : count_(count) {}
  grpc::experimental::Interceptor* CreateClientInterceptor(
      grpc::experimental::ClientRpcInfo* info) override {
    return new CountingInterceptor(
        count_,
        absl::string_view(info->method()) == "/skerry.v1.FleetService/Report");
  }

 private:
  WireCount* count_;
};

std::shared_ptr<grpc::Channel> CountedChannel(const std::string& address,
                                              WireCount* count) {
  grpc::ChannelArguments args;
  args.SetMaxReceiveMessageSize(256 << 20);
  args.SetMaxSendMessageSize(256 << 20);
  std::vector<
      std::unique_ptr<grpc::experimental::ClientInterceptorFactoryInterface>>
      factories;
  factories.push_back(std::make_unique<CountingFactory>(count));
  return grpc::experimental::CreateCustomChannelWithInterceptors(
      address, grpc::InsecureChannelCredentials(), args, std::move(factories));
}

uint64_t FileBytes(const std::string& path) {
  struct stat st;
  return stat(path.c_str(), &st) == 0 ? static_cast<uint64_t>(st.st_size) : 0;
}

// VmHWM of the process whose status file is `status`, in KiB; 0 if unread.
uint64_t PeakRssKib(const std::string& status) {
  std::ifstream in(status);
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("VmHWM:", 0) == 0) {
      return std::strtoull(line.c_str() + 6, nullptr, 10);
    }
  }
  return 0;
}

}  // namespace

std::unique_ptr<Evaluator> BenchEvaluator(double eval_ms) {
  return std::make_unique<SleepyZero>(eval_ms);
}

std::string LoadAverage() {
  std::ifstream in("/proc/loadavg");
  double a = 0, b = 0, c = 0;
  in >> a >> b >> c;
  char buf[64];
  std::snprintf(buf, sizeof(buf), "load average %.2f, %.2f, %.2f", a, b, c);
  return buf;
}

skerry::v1::RunSpec EndToEndSpec(const EndToEndOptions& o) {
  skerry::v1::RunSpec out;
  skerry::v1::RunSpec* spec = &out;
  spec->set_name("bench-zero");
  spec->set_seed(1);
  spec->set_genome_length(o.genome_length);
  spec->mutable_evaluator()->mutable_builtin()->set_function("zero");
  if (o.natural_es) {
    spec->mutable_strategy()->mutable_natural_es()->set_population_size(
        o.population + o.population % 2);
    spec->set_init_lower(-1.0);
    spec->set_init_upper(1.0);
  } else {
    spec->mutable_ga()->set_population_size(o.population);
    spec->mutable_ga()->set_elites(0);
  }
  spec->mutable_stop()->set_max_generations(o.generations);
  if (o.float32) spec->set_gene_precision(skerry::v1::FLOAT32);
  return out;
}

absl::StatusOr<EndToEndFigures> RunEndToEnd(const EndToEndOptions& o) {
  const std::string path = TempDb(o.dir, "e2e");
  std::optional<Loopback> c;
  std::optional<skerry::testing::StartedCoordinator> own;
  std::string address;
  if (o.coordinator_binary.empty()) {
    c = StartLoopback(path);
    if (!c.has_value()) return absl::UnavailableError("no coordinator");
    address = c->address;
  } else {
    absl::StatusOr<skerry::testing::StartedCoordinator> started =
        skerry::testing::StartCoordinator(o.coordinator_binary, path,
                                          path + ".log");
    if (!started.ok()) return started.status();
    own = *std::move(started);
    address = own->address();
  }
  auto runs = skerry::v1::RunService::NewStub(
      grpc::CreateChannel(address, grpc::InsecureChannelCredentials()));
  skerry::v1::SubmitRunRequest req;
  *req.mutable_spec() = EndToEndSpec(o);

  WireCount wire;
  std::vector<std::unique_ptr<worker::Worker>> workers;
  std::vector<std::thread> threads;
  for (int i = 0; i < o.workers; ++i) {
    worker::WorkerOptions wo;
    wo.name = absl::StrCat("bench-", i);
    wo.threads = o.threads;
    wo.batch = o.batch;
    const double ms = o.eval_ms;
    wo.make_evaluator = [ms](const skerry::v1::EvaluatorSpec&)
        -> absl::StatusOr<std::unique_ptr<Evaluator>> {
      return BenchEvaluator(ms);
    };
    workers.push_back(std::make_unique<worker::Worker>(
        skerry::v1::FleetService::NewStub(CountedChannel(address, &wire)), wo,
        Clock::Real()));
  }
  for (auto& w : workers) {
    threads.emplace_back([&w] { w->Run().IgnoreError(); });
  }
  const absl::Time start = absl::Now();
  {
    grpc::ClientContext ctx;
    skerry::v1::SubmitRunResponse resp;
    grpc::Status s = runs->SubmitRun(&ctx, req, &resp);
    if (!s.ok()) {
      for (auto& w : workers) w->Stop();
      for (auto& t : threads) t.join();
      if (own.has_value()) own->process.Kill();
      if (c.has_value()) c->coordinator->Shutdown();
      RemoveDb(path);
      return absl::InvalidArgumentError(
          absl::StrCat("submit: ", s.error_message()));
    }
  }
  std::atomic<bool> reading{true};
  std::atomic<uint64_t> reads{0};
  std::vector<std::thread> readers;
  for (int r = 0; r < o.readers; ++r) {
    readers.emplace_back([&] {
      auto stub = skerry::v1::RunService::NewStub(
          grpc::CreateChannel(address, grpc::InsecureChannelCredentials()));
      skerry::v1::RunRef ref;
      ref.set_run_id(1);
      skerry::v1::GetHistoryRequest hist;
      hist.set_run_id(1);
      hist.set_all_islands(true);
      auto deadline = [] {
        return std::chrono::system_clock::now() + std::chrono::seconds(30);
      };
      // Bounded by the run: the loop ends when the run has finished.
      while (reading) {
        {
          grpc::ClientContext ctx;
          ctx.set_deadline(deadline());
          skerry::v1::ListRunsResponse out;
          stub->ListRuns(&ctx, skerry::v1::ListRunsRequest(), &out);
        }
        {
          grpc::ClientContext ctx;
          ctx.set_deadline(deadline());
          skerry::v1::GetRunResponse out;
          stub->GetRun(&ctx, ref, &out);
        }
        {
          grpc::ClientContext ctx;
          ctx.set_deadline(deadline());
          skerry::v1::GetHistoryResponse out;
          stub->GetHistory(&ctx, hist, &out);
        }
        {
          grpc::ClientContext ctx;
          ctx.set_deadline(deadline());
          skerry::v1::DigestResponse out;
          stub->GetDigest(&ctx, ref, &out);
        }
        reads += 4;
      }
    });
  }
  skerry::v1::GetRunResponse got;
  // Bounded: at most 60,000 polls of 5 ms.
  for (int polls = 0; polls < 60000; ++polls) {
    grpc::ClientContext ctx;
    skerry::v1::RunRef ref;
    ref.set_run_id(1);
    got.Clear();
    runs->GetRun(&ctx, ref, &got);
    if (got.run().state() == skerry::v1::FINISHED) break;
    absl::SleepFor(absl::Milliseconds(5));
  }
  EndToEndFigures f;
  f.seconds = absl::ToDoubleSeconds(absl::Now() - start);
  f.evaluations = got.run().evaluations();
  f.rate = static_cast<double>(f.evaluations) / std::max(1e-9, f.seconds);
  reading = false;
  for (auto& t : readers) t.join();
  f.reads = reads;
  for (auto& w : workers) w->Stop();
  for (auto& t : threads) t.join();
  {
    absl::MutexLock l(&wire.mu);
    f.report_ms = wire.report_ms;
  }
  f.db_bytes = FileBytes(path) + FileBytes(path + "-wal");
  f.sent_bytes = wire.sent;
  f.received_bytes = wire.received;
  if (own.has_value()) {
    f.coordinator_peak_rss_kib =
        PeakRssKib(absl::StrCat("/proc/", own->process.pid(), "/status"));
    own->process.Signal(SIGTERM);
    absl::StatusOr<int> code = own->process.Wait(absl::Seconds(60));
    if (!code.ok() || *code != 0) {
      std::fprintf(stderr, "coordinator exit: %s\n%s\n",
                   code.ok() ? absl::StrCat(*code).c_str()
                             : code.status().ToString().c_str(),
                   own->process.Log().c_str());
    }
    unlink((path + ".log").c_str());
  } else {
    c->coordinator->Shutdown();
  }
  f.peak_rss_kib = PeakRssKib("/proc/self/status");
  RemoveDb(path);
  return f;
}

absl::StatusOr<double> InProcessStrategyRate(const EndToEndOptions& o,
                                             int threads,
                                             uint64_t* evaluations) {
  absl::StatusOr<skerry::v1::RunSpec> spec = PrepareSpec(EndToEndSpec(o));
  if (!spec.ok()) return spec.status();
  absl::StatusOr<std::unique_ptr<engine::Strategy>> strategy =
      engine::MakeStrategy(*spec, 0);
  if (!strategy.ok()) return strategy.status();
  *evaluations = 0;
  const absl::Time start = absl::Now();
  absl::StatusOr<std::vector<store::GenomeRecord>> gen = (*strategy)->Start();
  for (uint32_t g = 0; gen.ok(); ++g) {
    // Each thread builds and evaluates every threads-th genome, as the
    // workers' threads would.
    std::vector<store::GenomeRecord>& genomes = *gen;
    std::vector<std::thread> pool;
    std::atomic<bool> failed{false};
    for (int t = 0; t < threads; ++t) {
      pool.emplace_back([&, t] {
        std::unique_ptr<Evaluator> ev = BenchEvaluator(o.eval_ms);
        for (size_t i = t; i < genomes.size(); i += threads) {
          absl::StatusOr<std::vector<double>> genes =
              engine::SampleGenes(genomes, genomes[i]);
          absl::StatusOr<double> score =
              genes.ok() ? ev->Evaluate(*genes, 0) : genes.status();
          if (!score.ok()) failed = true;
          genomes[i].score = score.ok() ? *score : 0.0;
          genomes[i].state = skerry::v1::EVALUATED;
          genomes[i].attempts = 1;
        }
      });
    }
    for (auto& th : pool) th.join();
    if (failed) return absl::InternalError("an in-process evaluation failed");
    *evaluations += genomes.size();
    if (g + 1 >= static_cast<uint32_t>(o.generations)) break;
    gen = (*strategy)->TellAndAsk(genomes, {});
  }
  if (!gen.ok()) return gen.status();
  const double secs =
      std::max(1e-9, absl::ToDoubleSeconds(absl::Now() - start));
  return static_cast<double>(*evaluations) / secs;
}

double InProcessRate(const EndToEndOptions& o, uint64_t evaluations,
                     int threads) {
  std::vector<std::thread> pool;
  std::atomic<uint64_t> next{0};
  const absl::Time start = absl::Now();
  for (int t = 0; t < threads; ++t) {
    pool.emplace_back([&, t] {
      std::unique_ptr<Evaluator> ev = BenchEvaluator(o.eval_ms);
      StreamKey key;
      key.run_seed = static_cast<uint64_t>(t) + 1;
      RandomStream rng(key);
      std::vector<double> genes(o.genome_length);
      while (next.fetch_add(1) < evaluations) {
        for (double& g : genes) g = rng.Uniform01();
        ev->Evaluate(genes, 0).IgnoreError();
      }
    });
  }
  for (auto& t : pool) t.join();
  const double secs =
      std::max(1e-9, absl::ToDoubleSeconds(absl::Now() - start));
  return static_cast<double>(evaluations) / secs;
}

}  // namespace skerry::bench
