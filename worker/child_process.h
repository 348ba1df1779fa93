// Helpers for running an evaluator program as a child process: finding the
// program, its environment, the fork-to-exec path, non-blocking pipes,
// deadlines in poll(2) milliseconds, and wording for how a child ended. Used by
// ProcessEvaluator (process_evaluator.h) only.
//
// Thread safety: ExecChild runs between fork and exec and calls only
// async-signal-safe functions; the others are safe from any thread.
#ifndef SKERRY_WORKER_CHILD_PROCESS_H_
#define SKERRY_WORKER_CHILD_PROCESS_H_

#include <map>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"

namespace skerry::worker::child {

// SIGPIPE is ignored once per process (unless someone set a handler), so a
// child that closes its stdin makes write(2) fail with EPIPE instead.
void IgnoreSigpipeOnce();
bool IsExecutableFile(const std::string& path);
// An absolute path, or a name looked up on PATH. InvalidArgument names
// evaluator.external.argv[0] and says why.
absl::StatusOr<std::string> ResolveProgram(const std::string& name);
// This process's environment with `overrides` added or replacing entries.
std::vector<std::string> ChildEnvironment(
    const std::map<std::string, std::string>& overrides);
// Milliseconds left until `deadline` (real time), for poll(2); 0 when past.
int RemainingMillis(absl::Time deadline);
void SetNonBlocking(int fd);
// In the child after fork: own process group, default signals, the three
// pipes as stdin/stdout/stderr, every other descriptor closed, then exec. On
// failure errno is written to status_fd (negated for chdir) and it exits 127.
[[noreturn]] void ExecChild(int in, int out, int err, int status_fd,
                            const char* program, char* const* argv,
                            char* const* envp, const char* working_dir,
                            int max_fd);
// "exited with status 3", "was killed by signal 9 (Killed)".
std::string DescribeWaitStatus(int status);
// At most `max` bytes of s, C-escaped and quoted, "..." when cut.
std::string Quote(absl::string_view s, size_t max);

}  // namespace skerry::worker::child

#endif  // SKERRY_WORKER_CHILD_PROCESS_H_
