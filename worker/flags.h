// The command line of skerry-worker, read through its Abseil flags
// (common/daemon_flags.h) into WorkerOptions.
//
// Invariant: a WorkerFlags returned by ParseWorkerFlags is complete and valid
// (unless help is set, in which case nothing else is looked at): the
// coordinator address has a host and a port in [1, 65535], every number is in
// its range. Errors name the flag and quote the bad value.
//
// Thread safety: ParseWorkerFlags sets the process's flags: one parse at a
// time (common/daemon_flags.h); the other functions are pure.
//
// Usage:
//   absl::StatusOr<WorkerFlags> flags = ParseWorkerFlags(argc, argv);
//   if (!flags.ok()) { print flags.status().message(); exit(2); }
//   if (flags->help) { print WorkerUsage(); exit(0); }
#ifndef SKERRY_WORKER_FLAGS_H_
#define SKERRY_WORKER_FLAGS_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "grpcpp/channel.h"
#include "worker/channel.h"
#include "worker/sandbox.h"
#include "worker/worker.h"

namespace skerry::worker {

// Ranges accepted on the command line.
inline constexpr int kMaxThreadsFlag = 1024;
inline constexpr uint32_t kMaxBatchFlag = 100000;
inline constexpr uint32_t kMaxWaitMsFlag = 600000;        // ten minutes
inline constexpr uint32_t kMaxExitWhenIdleFlag = 604800;  // a week, in seconds
inline constexpr uint32_t kMaxTimeoutFlag = 3600;         // seconds

struct WorkerFlags {
  bool help = false;
  bool version = false;     // --version: print it and exit
  std::string coordinator;  // HOST:PORT
  WorkerOptions options;    // threads, name, batch, wait filled from flags
  // TLS files and server name from flags; the token is found by
  // ConnectFromFlags (flag, file, environment, config file).
  ClientSecurity security;
  std::string token;                         // --token
  std::string token_file;                    // --token-file
  SandboxMode sandbox = SandboxMode::kAuto;  // --sandbox
  std::vector<std::string> evaluator_dirs;   // --evaluator-dirs, split at ':'
  // --timeout: one connection attempt's bound (options.rpc_deadline too).
  absl::Duration connect_timeout = kDefaultConnectTimeout;
};

// args excludes the program name. Accepts "--flag value" and "--flag=value".
absl::StatusOr<WorkerFlags> ParseWorkerFlags(
    const std::vector<std::string>& args);
absl::StatusOr<WorkerFlags> ParseWorkerFlags(int argc, char** argv);

// The channel the flags ask for, with the token resolved as channel.h says.
// `warning` gets a line for stderr when there is something to say (never the
// token). Errors name the flag or the source of the token.
absl::StatusOr<std::shared_ptr<grpc::Channel>> ConnectFromFlags(
    const WorkerFlags& flags, const Getenv& getenv, std::string* warning);

// Files and folders no evaluator may see: the token file, the config folder
// the token may come from, the TLS files.
std::vector<std::string> SecretPaths(const WorkerFlags& flags,
                                     const Getenv& getenv);

// Once the token has been read: overwrites the value of --token in this
// process's argv and of $SKERRY_TOKEN in its environment (and unsets it), so
// neither /proc/PID/cmdline nor /proc/PID/environ shows it from now on.
void ScrubTokenFromProcess(int argc, char** argv);

// The --help text.
std::string WorkerUsage();

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_FLAGS_H_
