#include "cli/local.h"

#include <memory>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "common/clock.h"
#include "server/coordinator.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "worker/worker.h"

namespace skerry::cli {
namespace {

// Workers running on their own threads; Stop() stops and joins them all and
// keeps the first error any of them returned.
class LocalFleet {
 public:
  LocalFleet(const std::shared_ptr<grpc::Channel>& channel, uint32_t count) {
    for (uint32_t i = 0; i < count; ++i) {
      worker::WorkerOptions options;
      options.name = absl::StrCat("local-", i);
      options.threads = 1;
      workers_.push_back(std::make_unique<worker::Worker>(
          skerry::v1::FleetService::NewStub(channel), options, Clock::Real()));
    }
    for (auto& w : workers_) {
      worker::Worker* raw = w.get();
      threads_.emplace_back([this, raw] { Keep(raw->Run()); });
    }
  }
  ~LocalFleet() { Stop().IgnoreError(); }

  [[nodiscard]] absl::Status Stop() {
    for (auto& w : workers_) w->Stop();
    for (auto& t : threads_) {
      if (t.joinable()) t.join();
    }
    absl::MutexLock lock(&mu_);
    return first_error_;
  }

 private:
  void Keep(const absl::Status& status) {
    absl::MutexLock lock(&mu_);
    if (first_error_.ok()) first_error_ = status;
  }

  std::vector<std::unique_ptr<worker::Worker>> workers_;
  std::vector<std::thread> threads_;
  absl::Mutex mu_;
  absl::Status first_error_ ABSL_GUARDED_BY(mu_);
};

int RunOnCoordinator(server::Coordinator& coordinator,
                     const std::string& spec_path, uint32_t workers, Io& io) {
  std::shared_ptr<grpc::Channel> channel = coordinator.InProcessChannel();
  LocalFleet fleet(channel, workers);
  RunClient client(skerry::v1::RunService::NewStub(channel), "in-process");
  uint64_t run_id = 0;
  int code = SubmitCommand(client, spec_path, io, &run_id);
  if (code == kExitOk) code = WatchCommand(client, run_id, io);
  if (code == kExitOk) code = ChampionCommand(client, run_id, false, "", io);
  if (code == kExitOk) {
    *io.out << "digest      ";
    code = DigestCommand(client, run_id, io);
  }
  absl::Status stopped = fleet.Stop();
  if (!stopped.ok()) {
    *io.err << "skerry: a local worker failed: " << stopped.message() << "\n";
    if (code == kExitOk) code = kExitFailure;
  }
  return code;
}

}  // namespace

int LocalCommand(const ParsedArgs& args, Io& io) {
  absl::StatusOr<uint32_t> workers =
      ParseBoundedUint("--workers", args.Get("workers"), 1, kMaxLocalWorkers);
  if (!workers.ok()) {
    *io.err << "skerry: local: " << workers.status().message() << "\n";
    return kExitUsage;
  }
  const std::string& spec_path = args.positionals[0];
  // Check the spec before starting anything, to fail fast on a typo.
  absl::StatusOr<LoadedSpec> loaded = LoadSpecFile(spec_path);
  if (!loaded.ok()) {
    *io.err << "skerry: " << loaded.status().message() << "\n";
    return kExitUsage;
  }
  server::CoordinatorOptions options;
  options.db_path = args.Get("db");
  options.listen_address = "";  // in-process channels only
  // Nobody outside this process can reach it: no tokens to check.
  options.auth = auth::AuthMode::kOff;
  // The same live page as `skerry-coordinator --http` (docs/report.md).
  if (args.Has("http")) options.http_address = args.Get("http");
  auto coordinator = server::Coordinator::Start(options);
  if (!coordinator.ok()) {
    *io.err << "skerry: cannot start a coordinator on " << options.db_path
            << ": " << coordinator.status().message() << "\n";
    return kExitFailure;
  }
  if ((*coordinator)->http_port() != 0) {
    const std::string& address = options.http_address;
    *io.out << "live page   http://"
            << address.substr(0, address.rfind(':') + 1)
            << (*coordinator)->http_port() << "/\n"
            << std::flush;
  }
  int code = RunOnCoordinator(**coordinator, spec_path, *workers, io);
  (*coordinator)->Shutdown();
  return code;
}

}  // namespace skerry::cli
