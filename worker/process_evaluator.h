// An Evaluator that runs in a child process: the user's own program (an
// external evaluator) or skerry-worker --evaluator-host serving a built-in one
// (EvaluatorSpec.isolate). Requests and responses are the JSON lines of
// proto/skerry/v1/evaluator.proto; docs/evaluator-protocol.md is the reference.
//
// Invariant: a ProcessEvaluator has at most one child, started when the first
// evaluation needs it and kept for the next ones. Whatever the child does
// (crash, hang past the time limit, print garbage, answer with another id,
// close its pipes), the evaluation returns a non-OK status that says what
// happened and quotes the last stderr_tail_bytes of the child's stderr; the
// child's whole process group is then killed with SIGKILL and reaped, and the
// next evaluation starts a fresh child. Nothing the child does can end or block
// the worker beyond the time limit. A child that exits between evaluations is
// restarted silently.
//
// Create() makes SIGPIPE ignored in the whole process (if it was at its
// default), so a write to a dead child is an EPIPE error instead of a signal.
// The child gets the default signal mask and dispositions, its own process
// group, whose every process dies with the worker, even one killed by SIGKILL
// (a guardian process leads the group: child_process.h), no core files, a
// scrubbed environment (no token, nothing of the worker's but PATH, locale
// and the like) and no descriptor of the worker's but its stdin, stdout and
// stderr. With a sandbox (sandbox.h) it runs inside bubblewrap.
//
// Thread safety: one thread at a time (the worker makes one per evaluation
// thread, through EvaluatorCache). Distinct instances are independent.
//
// Usage:
//   ProcessEvaluatorOptions o;
//   o.argv = {"/usr/bin/python3", "/opt/vents/evaluate.py"};
//   o.time_limit = absl::Seconds(5);
//   absl::StatusOr<std::unique_ptr<ProcessEvaluator>> e =
//       ProcessEvaluator::Create(std::move(o));
//   if (!e.ok()) ...;              // argv[0] cannot be found or run
//   absl::StatusOr<double> score = (*e)->Evaluate(genes, seed);
#ifndef SKERRY_WORKER_PROCESS_EVALUATOR_H_
#define SKERRY_WORKER_PROCESS_EVALUATOR_H_

#include <sys/types.h>

#include <cstddef>
#include <cstdint>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "absl/types/span.h"
#include "common/clock.h"
#include "common/evaluator.h"
#include "skerry/v1/evaluator.pb.h"
#include "skerry/v1/spec.pb.h"
#include "worker/child_process.h"
#include "worker/sandbox.h"

namespace skerry::worker {

struct ProcessEvaluatorOptions {
  // The program and its arguments. argv[0]: an absolute path, or a name
  // without '/' looked up on the worker's PATH.
  std::vector<std::string> argv;
  std::string working_dir;  // empty: the worker's
  // Added to the scrubbed environment (sandbox.h, ScrubbedEnvironment).
  std::map<std::string, std::string> env;
  // Null or disabled: no sandbox. Else the child runs inside it.
  std::shared_ptr<const Sandbox> sandbox;
  bool network = false;          // inside the sandbox
  uint32_t memory_limit_mb = 0;  // RLIMIT_AS; 0: none
  // Where started children are recorded, so the worker can end them all at
  // once (and no new one starts after that). Null: none.
  std::shared_ptr<child::ChildRegistry> registry;
  // Time limits and grace periods are measured on it. Null: the real clock.
  Clock* clock = nullptr;
  // From sending a request to reading its whole answer (for a fresh child,
  // its start-up counts too).
  absl::Duration time_limit = absl::Seconds(60);
  // Requests per evaluation (EvaluatorSpec.episodes), one per episode; the
  // score is their aggregate. 1: one request carrying the evaluation seed.
  uint32_t episodes = 1;
  skerry::v1::EpisodeAggregate aggregate = skerry::v1::AGGREGATE_MEAN;
  size_t stderr_tail_bytes = 2048;
  // Longest response line accepted.
  size_t max_line_bytes = 16 << 20;
  // On destruction the child's stdin is closed and it has this long to exit
  // before SIGKILL.
  absl::Duration shutdown_grace = absl::Milliseconds(500);
};

class ProcessEvaluator : public Evaluator {
 public:
  // InvalidArgument when argv is empty, argv[0] is relative, cannot be found
  // on PATH or is not executable, or the time limit is not positive. Starts no
  // process.
  static absl::StatusOr<std::unique_ptr<ProcessEvaluator>> Create(
      ProcessEvaluatorOptions options);
  ~ProcessEvaluator() override;
  ProcessEvaluator(const ProcessEvaluator&) = delete;
  ProcessEvaluator& operator=(const ProcessEvaluator&) = delete;

  // One request per episode (seed: the evaluation seed when there is one
  // episode, else episode e's own; see docs/evaluator-protocol.md), then their
  // aggregate.
  absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                  uint64_t seed) override;
  // One request with case_name set (episode 0).
  absl::StatusOr<double> EvaluateCase(absl::Span<const double> genes,
                                      const std::string& case_name,
                                      uint64_t seed) override;

  // Sends one request (its id is assigned here) and returns the checked
  // answer: same id, and a score unless error is set. A response whose error
  // is set is returned as is (OK status); the child stays.
  absl::StatusOr<skerry::v1::EvaluationResponse> Exchange(
      skerry::v1::EvaluationRequest request);

  // Children started so far (the first start included).
  int starts() const { return starts_; }
  // Evaluations that ended with the child killed.
  int failures() const { return failures_; }
  // The running child's pid, or -1.
  pid_t child_pid() const;
  // The metrics of the last successful Evaluate (each the mean over its
  // episodes) or EvaluateCase.
  const std::map<std::string, double>& last_metrics() const {
    return last_metrics_;
  }
  const std::map<std::string, double>& LastMetrics() const override {
    return last_metrics_;
  }
  // When the last request was sent (on the clock), or creation time.
  absl::Time last_used() const { return last_used_; }
  // argv[0] as resolved on PATH.
  const std::string& program() const { return program_; }

 private:
  struct Child;
  ProcessEvaluator(ProcessEvaluatorOptions options, std::string program);

  absl::Status EnsureChild();
  // Exchange, then the score, or the program's error as a failed attempt.
  absl::StatusOr<double> Score(skerry::v1::EvaluationRequest request);
  absl::StatusOr<std::string> Transact(const std::string& line,
                                       absl::Time deadline);
  absl::StatusOr<skerry::v1::EvaluationResponse> CheckResponse(
      const std::string& line, uint64_t id);
  // Kills the child (if any) and returns `what` with the child's fate and
  // stderr tail appended. may_be_exiting: it closed its pipes, so give it a
  // moment to exit by itself and report its exit status.
  absl::Status Fail(absl::StatusCode code, const std::string& what,
                    bool may_be_exiting);
  // Appends what the child's stderr holds now to stderr_tail_ (no waiting).
  void DrainStderr();
  void KillChild();
  // Removes pid from the registry (if any).
  void Forget(pid_t pid);
  std::string Name() const;

  // Constant after construction.
  const ProcessEvaluatorOptions options_;
  const std::string program_;
  const std::vector<std::string> env_;  // NAME=value, the child's environment
  Clock* const clock_;

  std::unique_ptr<Child> child_;
  uint64_t next_id_ = 1;
  int starts_ = 0;
  int failures_ = 0;
  std::string stderr_tail_;  // of the current (or last) child
  absl::Time last_used_;
  std::map<std::string, double> last_metrics_;
};

// The child-process options for an evaluator spec: `external` runs its argv;
// any other kind (with `isolate`) runs host_command followed by
// --evaluator-spec=<base64 of the spec>. host_command empty: this executable
// (/proc/self/exe) with --evaluator-host. InvalidArgument names the field.
absl::StatusOr<ProcessEvaluatorOptions> ProcessOptionsForSpec(
    const skerry::v1::EvaluatorSpec& spec,
    const std::vector<std::string>& host_command);

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_PROCESS_EVALUATOR_H_
