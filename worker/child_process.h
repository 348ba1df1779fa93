// Helpers for running an evaluator program as a child process: finding the
// program, its environment, the fork-to-exec path, non-blocking pipes,
// deadlines in poll(2) milliseconds, and wording for how a child ended. Used by
// ProcessEvaluator (process_evaluator.h) only.
//
// Thread safety: ExecChild runs between fork and exec and calls only
// async-signal-safe functions; the others are safe from any thread.
#ifndef SKERRY_WORKER_CHILD_PROCESS_H_
#define SKERRY_WORKER_CHILD_PROCESS_H_

#include <sys/types.h>

#include <cstdint>
#include <map>
#include <set>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"

namespace skerry::worker::child {

// SIGPIPE is ignored once per process (unless someone set a handler), so a
// child that closes its stdin makes write(2) fail with EPIPE instead.
void IgnoreSigpipeOnce();
bool IsExecutableFile(const std::string& path);
// An absolute path, or a name looked up on `search_path` (a PATH value;
// empty: this process's PATH). InvalidArgument names
// evaluator.external.argv[0] and says why.
absl::StatusOr<std::string> ResolveProgram(const std::string& name,
                                           const std::string& search_path = "");
// Milliseconds for poll(2), rounded up, from a real-time slice.
int PollMillis(absl::Duration slice);
void SetNonBlocking(int fd);

// What the child sets up between fork and exec besides its pipes.
struct ChildLimits {
  pid_t parent = 0;            // the forking process: the child dies with it
  uint64_t address_space = 0;  // RLIMIT_AS in bytes; 0: unchanged
};
// In the child after fork: own process group, no core files, default
// signals, the three pipes as stdin/stdout/stderr, every other descriptor
// closed; then it forks once more. The program runs in the second child
// (SIGKILL when its parent dies, the limits, exec). The first stays as the
// group's guardian: when the worker dies, even by SIGKILL (PR_SET_PDEATHSIG,
// and an exit if it is already gone), it kills the whole group, so nothing
// the program started outlives the worker; otherwise it waits for the
// program and ends as the program ended (exit status or signal). On failure
// errno is written to status_fd (negated for chdir) and it exits 127.
// Why fork and not posix_spawn (which the sandbox probe and the tests'
// processes use): PR_SET_PDEATHSIG, the rlimits and the check that the parent
// is still there cannot be set through posix_spawn attributes.
[[noreturn]] void ExecChild(int in, int out, int err, int status_fd,
                            const char* program, char* const* argv,
                            char* const* envp, const char* working_dir,
                            int max_fd, const ChildLimits& limits);

// The live evaluator children of one worker (each the leader of its own
// process group), so that stopping the worker ends them all at once.
// Thread safety: every method from any thread.
class ChildRegistry {
 public:
  // Records a started child. False once KillAll was called: the caller must
  // kill the child it just started and start no other.
  bool Add(pid_t pid);
  void Remove(pid_t pid);
  // Kills the process group of every recorded child with SIGKILL (the
  // caller reaps them); from now on Add fails.
  void KillAll();
  bool stopped();

 private:
  absl::Mutex mu_;
  std::set<pid_t> pids_ ABSL_GUARDED_BY(mu_);
  bool stopped_ ABSL_GUARDED_BY(mu_) = false;
};
// "exited with status 3", "was killed by signal 9 (Killed)".
std::string DescribeWaitStatus(int status);
// At most `max` bytes of s, C-escaped and quoted, "..." when cut.
std::string Quote(absl::string_view s, size_t max);

}  // namespace skerry::worker::child

#endif  // SKERRY_WORKER_CHILD_PROCESS_H_
