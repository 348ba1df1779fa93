#include "cli/local.h"

#include <unistd.h>

#include <cstdlib>
#include <memory>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/synchronization/mutex.h"
#include "common/clock.h"
#include "server/coordinator.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "worker/sandbox.h"
#include "worker/worker.h"

namespace skerry::cli {
namespace {

// Workers running on their own threads; Stop() stops and joins them all and
// keeps the first error any of them returned.
class LocalFleet {
 public:
  LocalFleet(const std::shared_ptr<grpc::Channel>& channel, uint32_t count,
             const std::shared_ptr<const worker::Sandbox>& sandbox) {
    for (uint32_t i = 0; i < count; ++i) {
      worker::WorkerOptions options;
      options.name = absl::StrCat("local-", i);
      options.threads = 1;
      options.sandbox = sandbox;
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
                     const std::string& spec_path, uint32_t workers,
                     const std::shared_ptr<const worker::Sandbox>& sandbox,
                     Io& io) {
  std::shared_ptr<grpc::Channel> channel = coordinator.InProcessChannel();
  LocalFleet fleet(channel, workers, sandbox);
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

// The in-process workers' sandbox, as skerry-worker's (worker/sandbox.h):
// --sandbox (default auto) and --evaluator-dirs. Evaluator programs never see
// the database (and its journal files) or the client's config folder, where
// tokens live. A usage error or a bwrap that cannot run under --sandbox bwrap
// is an error; auto's fallback prints its loud warning to io.err.
absl::StatusOr<std::shared_ptr<const worker::Sandbox>> LocalSandbox(
    const ParsedArgs& args, const std::string& db, Io& io) {
  worker::SandboxMode mode = worker::SandboxMode::kAuto;
  if (args.Has("sandbox")) {
    absl::StatusOr<worker::SandboxMode> parsed =
        worker::ParseSandboxMode(args.Get("sandbox"));
    if (!parsed.ok()) return parsed.status();
    mode = *parsed;
  }
  std::vector<std::string> dirs;
  if (args.Has("evaluator-dirs")) {
    const std::string value = args.Get("evaluator-dirs");
    for (absl::string_view dir : absl::StrSplit(value, ':')) {
      if (dir.empty() || dir[0] != '/') {
        return absl::InvalidArgumentError(absl::StrCat(
            "--evaluator-dirs: expected absolute folders separated by ':', "
            "got \"",
            value.substr(0, 256), "\""));
      }
      dirs.emplace_back(dir);
    }
  }
  std::vector<std::string> hidden;
  std::string path = db;
  if (!path.empty() && path[0] != '/') {
    char cwd[4096];
    if (getcwd(cwd, sizeof cwd) != nullptr) path = absl::StrCat(cwd, "/", path);
  }
  for (const char* suffix : {"", "-wal", "-shm", "-journal"}) {
    hidden.push_back(path + suffix);
  }
  const char* config = std::getenv("XDG_CONFIG_HOME");
  const char* home = std::getenv("HOME");
  if (config != nullptr && config[0] == '/') {
    hidden.push_back(absl::StrCat(config, "/skerry"));
  } else if (home != nullptr && home[0] == '/') {
    hidden.push_back(absl::StrCat(home, "/.config/skerry"));
  }
  std::string warning;
  absl::StatusOr<std::shared_ptr<const worker::Sandbox>> sandbox =
      worker::SetUpSandbox(mode, std::move(hidden), std::move(dirs), &warning);
  if (sandbox.ok() && !warning.empty()) {
    *io.err << "skerry: local: " << warning << "\n";
  }
  return sandbox;
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
  absl::StatusOr<std::shared_ptr<const worker::Sandbox>> sandbox =
      LocalSandbox(args, args.Get("db"), io);
  if (!sandbox.ok()) {
    *io.err << "skerry: local: " << sandbox.status().message() << "\n";
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
  int code = RunOnCoordinator(**coordinator, spec_path, *workers, *sandbox, io);
  (*coordinator)->Shutdown();
  return code;
}

}  // namespace skerry::cli
