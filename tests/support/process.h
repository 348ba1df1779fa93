// Test support: real child processes (the coordinator, workers, the CLI) and
// temporary folders. Every wait is bounded; a test never hangs.
//
// Thread safety: a Process is used from the test's thread.
#ifndef SKERRY_TESTS_SUPPORT_PROCESS_H_
#define SKERRY_TESTS_SUPPORT_PROCESS_H_

#include <sys/types.h>

#include <functional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/time/time.h"

namespace skerry::testing {

// A fresh folder under $TMPDIR (or /tmp), removed with its contents on
// destruction.
class TempDir {
 public:
  TempDir();
  ~TempDir();
  const std::string& path() const { return path_; }
  std::string File(const std::string& name) const { return path_ + "/" + name; }

 private:
  std::string path_;
};

class Process {
 public:
  // Starts argv[0] with the arguments; stdout and stderr go to log_path.
  static absl::StatusOr<Process> Start(const std::vector<std::string>& argv,
                                       const std::string& log_path);
  Process(Process&& other) noexcept;
  Process& operator=(Process&& other) noexcept;
  Process(const Process&) = delete;
  Process& operator=(const Process&) = delete;
  ~Process();  // SIGKILLs a process still running

  pid_t pid() const { return pid_; }
  void Signal(int sig);
  // Waits up to `timeout` for the exit; returns the exit code (128 + signal
  // when killed), or DeadlineExceeded.
  absl::StatusOr<int> Wait(absl::Duration timeout);
  // Kills with SIGKILL and reaps.
  void Kill();
  std::string Log() const;
  const std::string& log_path() const { return log_path_; }

 private:
  Process(pid_t pid, std::string log_path)
      : pid_(pid), log_path_(std::move(log_path)) {}
  pid_t pid_ = -1;
  std::string log_path_;
};

// Runs a command to completion (bounded) and returns exit code and output.
struct CommandResult {
  int exit_code = -1;
  std::string output;  // stdout and stderr together
};
CommandResult RunCommand(const std::vector<std::string>& argv,
                         absl::Duration timeout = absl::Seconds(60));

// Starts skerry-coordinator on 127.0.0.1 port 0 with the given database and
// extra flags, and waits until it prints its port.
struct StartedCoordinator {
  Process process;
  int port = 0;
  std::string address() const;
};
absl::StatusOr<StartedCoordinator> StartCoordinator(
    const std::string& binary, const std::string& db, const std::string& log,
    const std::vector<std::string>& extra_flags = {});
// The same on a given port of 127.0.0.1 (0: any), as a restart on the port
// the fleet knows needs.
absl::StatusOr<StartedCoordinator> StartCoordinatorOnPort(
    const std::string& binary, const std::string& db, const std::string& log,
    int port, const std::vector<std::string>& extra_flags = {});

// Runs the `skerry` CLI at `cli_bin` against the coordinator at `address`:
// `cli_bin --coordinator address args...`, bounded by `timeout`.
CommandResult RunCli(const std::string& cli_bin, const std::string& address,
                     const std::vector<std::string>& args,
                     absl::Duration timeout = absl::Seconds(60));

// Starts `count` skerry-worker processes (`worker_bin`) against the
// coordinator at `address`, each with `threads` threads taking batches of 8,
// worker i named `<name_prefix>i` and logging to `<log_prefix>i.log`. The
// workers already started are stopped when one cannot start.
absl::StatusOr<std::vector<Process>> StartWorkers(
    const std::string& worker_bin, const std::string& address, int count,
    int threads, const std::string& name_prefix, const std::string& log_prefix);

// Writes `text` to `path` (replacing it); false when it cannot.
bool WriteTextFile(const std::string& path, const std::string& text);

// The first 64-hex-digit word in `output` (the digest that `skerry digest` and
// `skerry local` print), or "" when there is none.
std::string DigestIn(const std::string& output);

// Polls `condition` every 50 ms until it holds or `timeout` passes.
bool WaitFor(const std::function<bool()>& condition, absl::Duration timeout);

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_SUPPORT_PROCESS_H_
