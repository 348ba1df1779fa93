#include "worker/process_evaluator.h"

#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <utility>

#include "absl/status/status.h"
#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/time/clock.h"
#include "common/clock.h"
#include "common/episodes.h"
#include "common/random.h"
#include "google/protobuf/util/json_util.h"
#include "worker/child_process.h"

namespace skerry::worker {

using skerry::v1::EvaluationRequest;
using skerry::v1::EvaluationResponse;

struct ProcessEvaluator::Child {
  pid_t pid = -1;
  int in = -1;   // the child's stdin, written here
  int out = -1;  // the child's stdout
  int err = -1;  // the child's stderr
  std::string out_buffer;

  ~Child() {
    for (int fd : {in, out, err}) {
      if (fd >= 0) close(fd);
    }
  }
};

using child::DescribeWaitStatus;
using child::ExecChild;
using child::IgnoreSigpipeOnce;
using child::PollMillis;
using child::Quote;
using child::ResolveProgram;
using child::SetNonBlocking;

namespace {
// Inside the sandbox only /usr is visible: program names are found there.
constexpr char kSandboxSearchPath[] = "/usr/local/bin:/usr/bin:/bin";
// How often a wait for a child's exit looks again (real time; the wait's
// bound is on the clock).
constexpr absl::Duration kExitPoll = absl::Milliseconds(5);
// How long a child whose pipes closed gets to exit by itself, so its exit
// status and traceback can be reported.
constexpr absl::Duration kExitGrace = absl::Milliseconds(200);

bool Sandboxed(const ProcessEvaluatorOptions& o) {
  return o.sandbox != nullptr && o.sandbox->enabled();
}
}  // namespace

absl::StatusOr<std::unique_ptr<ProcessEvaluator>> ProcessEvaluator::Create(
    ProcessEvaluatorOptions options) {
  if (options.argv.empty()) {
    return absl::InvalidArgumentError(
        "evaluator.external.argv: no program given");
  }
  if (!(options.time_limit > absl::ZeroDuration()) ||
      options.time_limit == absl::InfiniteDuration()) {
    return absl::InvalidArgumentError(
        absl::StrCat("evaluator.time_limit_seconds: must be positive and "
                     "finite (got ",
                     absl::FormatDuration(options.time_limit), ")"));
  }
  if (options.episodes == 0) options.episodes = 1;
  if (options.memory_limit_mb > (1u << 20)) {
    return absl::InvalidArgumentError(absl::StrCat(
        "evaluator.external.memory_limit_mb: at most 1048576 (1 TiB), got ",
        options.memory_limit_mb));
  }
  absl::StatusOr<std::string> program = ResolveProgram(
      options.argv[0], Sandboxed(options) ? kSandboxSearchPath : "");
  if (!program.ok()) return program.status();
  IgnoreSigpipeOnce();
  return std::unique_ptr<ProcessEvaluator>(
      new ProcessEvaluator(std::move(options), *std::move(program)));
}

ProcessEvaluator::ProcessEvaluator(ProcessEvaluatorOptions options,
                                   std::string program)
    : options_(std::move(options)),
      program_(std::move(program)),
      env_(ScrubbedEnvironment(ProcessEnvironmentEntries(), options_.env,
                               Sandboxed(options_))),
      clock_(options_.clock != nullptr ? options_.clock : Clock::Real()),
      last_used_(clock_->Now()) {}

ProcessEvaluator::~ProcessEvaluator() {
  if (child_ == nullptr) return;
  // Closing stdin asks a well-behaved program to finish.
  close(child_->in);
  child_->in = -1;
  const absl::Time deadline = clock_->Now() + options_.shutdown_grace;
  while (clock_->Now() < deadline) {
    if (waitpid(child_->pid, nullptr, WNOHANG) == child_->pid) {
      kill(-child_->pid, SIGKILL);  // anything it left behind
      Forget(child_->pid);
      child_.reset();
      return;
    }
    if (options_.registry != nullptr && options_.registry->stopped()) break;
    // A real pause (the exit is a real event); the grace is on the clock.
    absl::SleepFor(std::min(kExitPoll, clock_->PollSlice(deadline)));
  }
  KillChild();
}

pid_t ProcessEvaluator::child_pid() const {
  return child_ == nullptr ? -1 : child_->pid;
}

std::string ProcessEvaluator::Name() const {
  return absl::StrCat("evaluator `", absl::StrJoin(options_.argv, " "), "`");
}

absl::Status ProcessEvaluator::EnsureChild() {
  if (child_ != nullptr) {
    int status = 0;
    if (waitpid(child_->pid, &status, WNOHANG) != child_->pid) {
      return absl::OkStatus();
    }
    // It exited after its last answer: start another quietly.
    kill(-child_->pid, SIGKILL);
    Forget(child_->pid);
    child_.reset();
  }
  if (options_.registry != nullptr && options_.registry->stopped()) {
    return absl::CancelledError(
        absl::StrCat(Name(), ": not started: the worker is stopping"));
  }
  const bool sandboxed = Sandboxed(options_);
  if (sandboxed && !options_.working_dir.empty()) {
    struct stat st {};
    if (stat(options_.working_dir.c_str(), &st) != 0 || !S_ISDIR(st.st_mode)) {
      return absl::FailedPreconditionError(absl::StrCat(
          Name(), ": cannot enter working_dir \"", options_.working_dir,
          "\": ", std::strerror(errno == 0 ? ENOTDIR : errno)));
    }
  }
  // The command: the program itself, or bwrap running it.
  std::vector<std::string> command = {program_};
  command.insert(command.end(), options_.argv.begin() + 1, options_.argv.end());
  if (sandboxed) {
    absl::StatusOr<std::vector<std::string>> wrapped = options_.sandbox->Wrap(
        program_, options_.argv, options_.working_dir, options_.network);
    if (!wrapped.ok()) return wrapped.status();
    command = *std::move(wrapped);
  }
  int pipes[4][2];
  for (int i = 0; i < 4; ++i) {
    if (pipe2(pipes[i], O_CLOEXEC) != 0) {
      const int e = errno;
      for (int j = 0; j < i; ++j) {
        close(pipes[j][0]);
        close(pipes[j][1]);
      }
      return absl::ResourceExhaustedError(
          absl::StrCat(Name(), ": cannot make pipes: ", std::strerror(e)));
    }
  }
  int* in = pipes[0];
  int* out = pipes[1];
  int* err = pipes[2];
  int* st = pipes[3];
  std::vector<char*> argv;
  for (std::string& c : command) argv.push_back(c.data());
  argv.push_back(nullptr);
  child::ChildLimits limits;
  limits.parent = getpid();
  limits.address_space = uint64_t{options_.memory_limit_mb} << 20;
  std::vector<char*> envp;
  for (const std::string& e : env_)
    envp.push_back(const_cast<char*>(e.c_str()));
  envp.push_back(nullptr);
  const long open_max = sysconf(_SC_OPEN_MAX);
  const int max_fd = static_cast<int>(std::clamp<long>(open_max, 256, 1 << 16));

  const pid_t pid = fork();
  if (pid == 0) {
    ExecChild(in[0], out[1], err[1], st[1], argv[0], argv.data(), envp.data(),
              sandboxed ? "" : options_.working_dir.c_str(), max_fd, limits);
  }
  const int fork_errno = errno;
  for (int fd : {in[0], out[1], err[1], st[1]}) close(fd);
  if (pid < 0) {
    for (int fd : {in[1], out[0], err[0], st[0]}) close(fd);
    return absl::ResourceExhaustedError(absl::StrCat(
        Name(), ": cannot start a process: ", std::strerror(fork_errno)));
  }
  setpgid(pid, pid);  // also done in the child; whichever runs first wins
  const bool recorded =
      options_.registry == nullptr || options_.registry->Add(pid);
  child_ = std::make_unique<Child>();
  child_->pid = pid;
  child_->in = in[1];
  child_->out = out[0];
  child_->err = err[0];
  ++starts_;
  stderr_tail_.clear();
  // The status pipe closes on exec; before that the child may send an errno.
  int child_errno = 0;
  ssize_t n;
  do {
    n = read(st[0], &child_errno, sizeof child_errno);
  } while (n < 0 && errno == EINTR);
  close(st[0]);
  if (!recorded) {
    KillChild();
    return absl::CancelledError(
        absl::StrCat(Name(), ": not started: the worker is stopping"));
  }
  if (n == static_cast<ssize_t>(sizeof child_errno)) {
    KillChild();
    const bool in_chdir = child_errno < 0;
    return absl::FailedPreconditionError(absl::StrCat(
        Name(), ": cannot ",
        in_chdir
            ? absl::StrCat("enter working_dir \"", options_.working_dir, "\"")
            : absl::StrCat("execute \"", command[0], "\""),
        ": ", std::strerror(std::abs(child_errno))));
  }
  for (int fd : {child_->in, child_->out, child_->err}) SetNonBlocking(fd);
  return absl::OkStatus();
}

void ProcessEvaluator::KillChild() {
  if (child_ == nullptr) return;
  kill(-child_->pid, SIGKILL);
  kill(child_->pid, SIGKILL);  // in case setpgid had not happened yet
  int status = 0;
  while (waitpid(child_->pid, &status, 0) < 0 && errno == EINTR) {
  }
  Forget(child_->pid);
  child_.reset();
}

void ProcessEvaluator::Forget(pid_t pid) {
  if (options_.registry != nullptr) options_.registry->Remove(pid);
}

void ProcessEvaluator::DrainStderr() {
  if (child_ == nullptr || child_->err < 0) return;
  char buf[4096];
  while (true) {
    const ssize_t n = read(child_->err, buf, sizeof buf);
    if (n > 0) {
      stderr_tail_.append(buf, static_cast<size_t>(n));
      if (stderr_tail_.size() > options_.stderr_tail_bytes) {
        stderr_tail_.erase(0, stderr_tail_.size() - options_.stderr_tail_bytes);
      }
      continue;
    }
    if (n < 0 && errno == EINTR) continue;
    if (n == 0) {  // EOF: every holder of the write end is gone
      close(child_->err);
      child_->err = -1;
    }
    return;  // EAGAIN: nothing more for now
  }
}

absl::Status ProcessEvaluator::Fail(absl::StatusCode code,
                                    const std::string& what,
                                    bool may_be_exiting) {
  ++failures_;
  std::string fate = "was killed with SIGKILL";
  if (child_ != nullptr) {
    const pid_t pid = child_->pid;
    // A child that is exiting by itself gets a moment, so its status (and a
    // traceback on stderr) can be reported.
    int status = 0;
    bool exited = false;
    const absl::Time grace_end =
        clock_->Now() + (may_be_exiting ? kExitGrace : absl::ZeroDuration());
    while (true) {
      DrainStderr();
      exited = waitpid(pid, &status, WNOHANG) == pid;
      if (exited || clock_->Now() >= grace_end) break;
      if (options_.registry != nullptr && options_.registry->stopped()) break;
      absl::SleepFor(std::min(kExitPoll, clock_->PollSlice(grace_end)));
    }
    if (exited) {
      fate = DescribeWaitStatus(status);
      kill(-pid, SIGKILL);
    } else {
      kill(-pid, SIGKILL);
      kill(pid, SIGKILL);
      while (waitpid(pid, &status, 0) < 0 && errno == EINTR) {
      }
      fate = "was killed with SIGKILL";
    }
    DrainStderr();  // what the dead group left in the pipe
    fate = absl::StrCat("pid ", pid, " ", fate);
    Forget(pid);
    child_.reset();
  }
  std::string tail = stderr_tail_;
  while (!tail.empty() && (tail.back() == '\n' || tail.back() == '\r')) {
    tail.pop_back();
  }
  return absl::Status(
      code, absl::StrCat(Name(), ": ", what, " (", fate,
                         "; it is restarted for the next evaluation); ",
                         tail.empty() ? "stderr was empty"
                                      : absl::StrCat("stderr tail:\n", tail)));
}

absl::StatusOr<std::string> ProcessEvaluator::Transact(const std::string& line,
                                                       absl::Time deadline) {
  size_t written = 0;
  char buf[65536];
  while (true) {
    std::string& pending = child_->out_buffer;
    if (written == line.size()) {
      const size_t nl = pending.find('\n');
      if (nl != std::string::npos) {
        std::string answer = pending.substr(0, nl);
        pending.erase(0, nl + 1);
        return answer;
      }
    }
    if (pending.size() > options_.max_line_bytes) {
      return absl::OutOfRangeError(absl::StrCat(
          "printed a line longer than ", options_.max_line_bytes, " bytes"));
    }
    pollfd fds[3];
    int n = 0;
    const int out_at = n;
    fds[n++] = {child_->out, POLLIN, 0};
    const int err_at = child_->err >= 0 ? n : -1;
    if (err_at >= 0) fds[n++] = {child_->err, POLLIN, 0};
    const int in_at = written < line.size() ? n : -1;
    if (in_at >= 0) fds[n++] = {child_->in, POLLOUT, 0};
    const absl::Duration slice = clock_->PollSlice(deadline);
    if (slice <= absl::ZeroDuration()) return absl::DeadlineExceededError("");
    const int ms = PollMillis(slice);
    const int ready = poll(fds, static_cast<nfds_t>(n), ms);
    if (ready < 0 && errno == EINTR) continue;
    if (ready < 0) {
      return absl::InternalError(absl::StrCat("poll: ", std::strerror(errno)));
    }
    if (ready == 0) continue;  // the clock is looked at again above
    if (err_at >= 0 && fds[err_at].revents != 0) DrainStderr();
    if (in_at >= 0 && fds[in_at].revents != 0) {
      const ssize_t w =
          write(child_->in, line.data() + written, line.size() - written);
      if (w > 0) {
        written += static_cast<size_t>(w);
      } else if (w < 0 && errno != EAGAIN && errno != EINTR) {
        return absl::UnavailableError(
            absl::StrCat("closed its stdin before reading the request (",
                         std::strerror(errno), ")"));
      }
    }
    if (fds[out_at].revents != 0) {
      const ssize_t r = read(child_->out, buf, sizeof buf);
      if (r > 0) {
        pending.append(buf, static_cast<size_t>(r));
      } else if (r == 0) {
        return absl::UnavailableError(
            pending.empty() ? "closed its stdout without answering"
                            : absl::StrCat("closed its stdout after a partial "
                                           "line ",
                                           Quote(pending, 200)));
      } else if (errno != EAGAIN && errno != EINTR) {
        return absl::InternalError(
            absl::StrCat("reading its stdout: ", std::strerror(errno)));
      }
    }
  }
}

absl::StatusOr<EvaluationResponse> ProcessEvaluator::CheckResponse(
    const std::string& line, uint64_t id) {
  EvaluationResponse response;
  google::protobuf::util::JsonParseOptions parse;
  parse.ignore_unknown_fields = false;
  const auto parsed =
      google::protobuf::util::JsonStringToMessage(line, &response, parse);
  if (!parsed.ok()) {
    return absl::InvalidArgumentError(
        absl::StrCat("answered request ", id,
                     " with a line that is not an EvaluationResponse in JSON (",
                     std::string(parsed.message()), "): ", Quote(line, 200)));
  }
  if (response.id() != id) {
    return absl::InvalidArgumentError(
        absl::StrCat("answered request ", id, " with id ", response.id()));
  }
  if (response.error().empty() && !response.has_score()) {
    return absl::InvalidArgumentError(
        absl::StrCat("answered request ", id,
                     " with neither score nor error: ", Quote(line, 200)));
  }
  return response;
}

absl::StatusOr<EvaluationResponse> ProcessEvaluator::Exchange(
    EvaluationRequest request) {
  const absl::Time deadline = clock_->Now() + options_.time_limit;
  last_used_ = clock_->Now();
  if (absl::Status s = EnsureChild(); !s.ok()) return s;
  const uint64_t id = next_id_++;
  request.set_id(id);
  std::string line;
  google::protobuf::util::JsonPrintOptions print;
  print.always_print_primitive_fields = true;
  print.preserve_proto_field_names = true;
  if (!google::protobuf::util::MessageToJsonString(request, &line, print)
           .ok()) {
    return absl::InternalError("cannot print the request as JSON");
  }
  line.push_back('\n');
  absl::StatusOr<std::string> answer = Transact(line, deadline);
  if (!answer.ok()) {
    if (absl::IsDeadlineExceeded(answer.status())) {
      return Fail(absl::StatusCode::kDeadlineExceeded,
                  absl::StrCat("no answer to request ", id,
                               " within the time limit of ",
                               absl::FormatDuration(options_.time_limit)),
                  /*may_be_exiting=*/false);
    }
    return Fail(answer.status().code(),
                absl::StrCat("request ", id, ": ",
                             std::string(answer.status().message())),
                absl::IsUnavailable(answer.status()));
  }
  absl::StatusOr<EvaluationResponse> response = CheckResponse(*answer, id);
  if (!response.ok()) {
    return Fail(absl::StatusCode::kDataLoss,
                std::string(response.status().message()),
                /*may_be_exiting=*/false);
  }
  return response;
}

absl::StatusOr<double> ProcessEvaluator::Evaluate(
    absl::Span<const double> genes, uint64_t seed) {
  std::vector<double> scores;
  scores.reserve(options_.episodes);
  // Each metric's mean over the episodes that reported it.
  std::map<std::string, std::pair<double, int>> sums;
  for (uint32_t e = 0; e < options_.episodes; ++e) {
    EvaluationRequest request;
    request.mutable_genes()->Add(genes.begin(), genes.end());
    request.set_seed(options_.episodes == 1 ? seed
                                            : EpisodeStream(seed, e).NextU64());
    request.set_episode(e);
    absl::StatusOr<double> score = Score(std::move(request));
    if (!score.ok()) return score.status();
    scores.push_back(*score);
    for (const auto& [name, value] : last_metrics_) {
      sums[name].first += value;
      ++sums[name].second;
    }
  }
  last_metrics_.clear();
  for (const auto& [name, sum] : sums) {
    last_metrics_[name] = sum.first / sum.second;
  }
  return AggregateEpisodes(options_.aggregate, std::move(scores));
}

absl::StatusOr<double> ProcessEvaluator::EvaluateCase(
    absl::Span<const double> genes, const std::string& case_name,
    uint64_t seed) {
  EvaluationRequest request;
  request.mutable_genes()->Add(genes.begin(), genes.end());
  request.set_seed(seed);
  request.set_case_name(case_name);
  return Score(std::move(request));
}

absl::StatusOr<double> ProcessEvaluator::Score(EvaluationRequest request) {
  absl::StatusOr<EvaluationResponse> response = Exchange(std::move(request));
  if (!response.ok()) return response.status();
  if (!response->error().empty()) {
    return absl::UnknownError(
        absl::StrCat(Name(), " reported: ", response->error()));
  }
  last_metrics_.clear();
  last_metrics_.insert(response->metrics().begin(), response->metrics().end());
  return response->score();
}

}  // namespace skerry::worker
