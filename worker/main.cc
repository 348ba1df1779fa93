// skerry-worker: flags, a channel, a Worker, and signals that stop it. With
// --evaluator-host first, it is instead the child process that serves a
// built-in evaluator over the external-evaluator protocol (evaluator_host.h).
#include <pthread.h>
#include <signal.h>
#include <unistd.h>

#include <atomic>
#include <cstdio>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "common/clock.h"
#include "common/version.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "worker/channel.h"
#include "worker/evaluator_host.h"
#include "worker/flags.h"
#include "worker/worker.h"

namespace {

// SIGINT, SIGTERM and SIGHUP are blocked in every thread and taken by this one
// with sigwait, so no work happens inside a signal handler. The first signal
// stops the worker promptly (Worker::Stop: evaluators killed, results reported,
// the rest handed back); a second one kills the evaluators and exits at once.
class SignalWatcher {
 public:
  explicit SignalWatcher(skerry::worker::Worker* worker) : worker_(worker) {
    thread_ = std::thread([this] { Watch(); });
  }
  // Wakes the watcher after Run() returned and joins it.
  ~SignalWatcher() {
    done_.store(true);
    pthread_kill(thread_.native_handle(), SIGTERM);
    thread_.join();
  }

  // Call before any other thread starts, so every thread inherits the mask.
  static void BlockSignals() {
    sigset_t set = Signals();
    pthread_sigmask(SIG_BLOCK, &set, nullptr);
  }

 private:
  static sigset_t Signals() {
    sigset_t set;
    sigemptyset(&set);
    sigaddset(&set, SIGINT);
    sigaddset(&set, SIGTERM);
    // A hangup (the terminal closed, or `kill -HUP`) stops it the same way:
    // it has no configuration to reload and logs to stderr
    // (docs/operations.md).
    sigaddset(&set, SIGHUP);
    return set;
  }

  void Watch() {
    const sigset_t set = Signals();
    int signals_seen = 0;
    while (true) {
      int sig = 0;
      if (sigwait(&set, &sig) != 0) continue;
      if (done_.load()) return;
      if (++signals_seen == 1) {
        std::fprintf(
            stderr, "skerry-worker: stopping (signal again to exit at once)\n");
        worker_->Stop();
      } else {
        worker_->KillEvaluators();
        _exit(128 + sig);
      }
    }
  }

  skerry::worker::Worker* const worker_;
  std::atomic<bool> done_{false};
  std::thread thread_;
};

}  // namespace

int main(int argc, char** argv) {
  if (argc >= 2 && std::string(argv[1]) == "--evaluator-host") {
    return skerry::worker::EvaluatorHostMain(
        std::vector<std::string>(argv + 1, argv + argc));
  }
  // Writing to an evaluator child that died must be an error, not a signal.
  signal(SIGPIPE, SIG_IGN);
  absl::StatusOr<skerry::worker::WorkerFlags> flags =
      skerry::worker::ParseWorkerFlags(argc, argv);
  if (!flags.ok()) {
    std::fprintf(stderr, "skerry-worker: %s\n",
                 std::string(flags.status().message()).c_str());
    return 2;
  }
  if (flags->help) {
    std::fputs(skerry::worker::WorkerUsage().c_str(), stdout);
    return 0;
  }
  if (flags->version) {
    std::fputs(skerry::VersionLine("skerry-worker").c_str(), stdout);
    return 0;
  }
  SignalWatcher::BlockSignals();
  const skerry::worker::Getenv getenv = skerry::worker::ProcessEnvironment();
  std::string warning;
  // The token is read here, once; then it leaves argv and the environment.
  auto channel = skerry::worker::ConnectFromFlags(*flags, getenv, &warning);
  skerry::worker::ScrubTokenFromProcess(argc, argv);
  if (!channel.ok()) {
    std::fprintf(stderr, "skerry-worker: %s\n",
                 std::string(channel.status().message()).c_str());
    return 2;
  }
  if (!warning.empty())
    std::fprintf(stderr, "skerry-worker: %s\n", warning.c_str());
  std::string sandbox_warning;
  auto sandbox = skerry::worker::SetUpSandbox(
      flags->sandbox, skerry::worker::SecretPaths(*flags, getenv),
      flags->evaluator_dirs, &sandbox_warning);
  if (!sandbox.ok()) {
    std::fprintf(stderr, "skerry-worker: %s\n",
                 std::string(sandbox.status().message()).c_str());
    return 2;
  }
  if (!sandbox_warning.empty()) {
    std::fprintf(stderr, "skerry-worker: %s\n", sandbox_warning.c_str());
  }
  flags->options.sandbox = *sandbox;
  skerry::worker::Worker worker(skerry::v1::FleetService::NewStub(*channel),
                                flags->options, skerry::Clock::Real());
  absl::Status status;
  {
    SignalWatcher watcher(&worker);
    status = worker.Run();
  }
  if (!status.ok()) {
    std::fprintf(stderr, "skerry-worker: %s\n", status.ToString().c_str());
    return 1;
  }
  if (worker.exited_idle()) {
    std::fprintf(stderr, "skerry-worker: no work for %s (--exit-when-idle)\n",
                 absl::FormatDuration(flags->options.exit_when_idle).c_str());
  }
  std::fprintf(stderr, "skerry-worker: stopped after reporting %llu results\n",
               static_cast<unsigned long long>(worker.results_reported()));
  return 0;
}
