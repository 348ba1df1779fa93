#include "worker/child_process.h"

#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/prctl.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/syscall.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <cstring>
#include <mutex>

#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"

namespace skerry::worker::child {

void IgnoreSigpipeOnce() {
  static std::once_flag once;
  std::call_once(once, [] {
    struct sigaction old {};
    if (sigaction(SIGPIPE, nullptr, &old) == 0 && old.sa_handler == SIG_DFL) {
      signal(SIGPIPE, SIG_IGN);
    }
  });
}

bool IsExecutableFile(const std::string& path) {
  struct stat st {};
  return stat(path.c_str(), &st) == 0 && S_ISREG(st.st_mode) &&
         access(path.c_str(), X_OK) == 0;
}

absl::StatusOr<std::string> ResolveProgram(const std::string& name,
                                           const std::string& search_path) {
  const std::string field = "evaluator.external.argv[0]";
  if (name.empty()) {
    return absl::InvalidArgumentError(field + ": empty program name");
  }
  if (name.find('/') != std::string::npos) {
    if (name[0] != '/') {
      return absl::InvalidArgumentError(absl::StrCat(
          field, ": \"", name,
          "\" is a relative path; give an absolute path or a program name "
          "found on the worker's PATH"));
    }
    if (!IsExecutableFile(name)) {
      return absl::InvalidArgumentError(absl::StrCat(
          field, ": \"", name, "\" is not an executable file on this worker"));
    }
    return name;
  }
  const char* path = std::getenv("PATH");
  const std::string search = !search_path.empty() ? search_path
                             : path != nullptr    ? path
                                                  : "/usr/bin:/bin";
  for (absl::string_view dir : absl::StrSplit(search, ':')) {
    const std::string candidate =
        absl::StrCat(dir.empty() ? "." : dir, "/", name);
    if (IsExecutableFile(candidate)) return candidate;
  }
  return absl::InvalidArgumentError(absl::StrCat(
      field, ": \"", name, "\" not found on the worker's PATH (", search, ")"));
}

int PollMillis(absl::Duration slice) {
  if (slice <= absl::ZeroDuration()) return 0;
  return static_cast<int>(
      std::min<int64_t>(absl::ToInt64Milliseconds(slice) + 1, 1 << 30));
}

void SetNonBlocking(int fd) {
  const int flags = fcntl(fd, F_GETFL);
  if (flags >= 0) fcntl(fd, F_SETFL, flags | O_NONBLOCK);
}

namespace {

// The guardian's answer to its worker's death (and to a SIGTERM from anyone):
// the whole process group goes, itself included.
void KillOwnGroup(int) { kill(0, SIGKILL); }

// In the guardian: waits for the program and ends as it ended, so that the
// worker's waitpid(2) sees the program's own exit status or signal.
[[noreturn]] void EndAsTheProgramEnds(pid_t program) {
  int status = 0;
  while (waitpid(program, &status, 0) < 0) {
    if (errno != EINTR) _exit(127);
  }
  if (WIFEXITED(status)) _exit(WEXITSTATUS(status));
  const int sig = WTERMSIG(status);
  struct sigaction dfl {};
  dfl.sa_handler = SIG_DFL;
  sigaction(sig, &dfl, nullptr);
  kill(getpid(), sig);
  _exit(128 + sig);
}

}  // namespace

// Between fork and exec only async-signal-safe calls are allowed.
[[noreturn]] void ExecChild(int in, int out, int err, int status_fd,
                            const char* program, char* const* argv,
                            char* const* envp, const char* working_dir,
                            int max_fd, const ChildLimits& limits) {
  setpgid(0, 0);
  // This process stays as the group's guardian: when the worker dies, even by
  // SIGKILL, it kills the whole group, so that no process the program
  // started outlives the worker (PR_SET_PDEATHSIG reaches only a direct
  // child, and the kernel clears it in that child's own children).
  struct sigaction guard {};
  guard.sa_handler = KillOwnGroup;
  sigaction(SIGTERM, &guard, nullptr);
  prctl(PR_SET_PDEATHSIG, SIGTERM);
  if (getppid() != limits.parent) _exit(127);  // it died before the prctl
  struct rlimit no_core {};
  setrlimit(RLIMIT_CORE, &no_core);
  sigset_t none;
  sigemptyset(&none);
  sigprocmask(SIG_SETMASK, &none, nullptr);
  struct sigaction dfl {};
  dfl.sa_handler = SIG_DFL;
  for (int sig = 1; sig < NSIG; ++sig) {
    if (sig != SIGTERM) sigaction(sig, &dfl, nullptr);
  }
  if (dup2(in, 0) < 0 || dup2(out, 1) < 0 || dup2(err, 2) < 0) {
    const int e = errno;
    (void)!write(status_fd, &e, sizeof e);
    _exit(127);
  }
  // Every other descriptor goes, except the status pipe (close-on-exec).
  bool closed = false;
#ifdef SYS_close_range
  closed = (status_fd <= 3 ||
            syscall(SYS_close_range, 3u, static_cast<unsigned>(status_fd - 1),
                    0u) == 0) &&
           syscall(SYS_close_range, static_cast<unsigned>(status_fd + 1), ~0u,
                   0u) == 0;
#endif
  for (int fd = 3; !closed && fd < max_fd; ++fd) {
    if (fd != status_fd) close(fd);
  }
  if (working_dir[0] != '\0' && chdir(working_dir) != 0) {
    const int e = -errno;  // negative: chdir, not exec
    (void)!write(status_fd, &e, sizeof e);
    _exit(127);
  }
  const pid_t guardian = getpid();
  const pid_t child = _Fork();  // async-signal-safe, unlike fork(3)
  if (child < 0) {
    const int e = errno;
    (void)!write(status_fd, &e, sizeof e);
    _exit(127);
  }
  if (child > 0) {
    // The guardian keeps no end of the program's pipes: their ends close
    // when the program's do, and the status pipe when it execs.
    for (int fd : {0, 1, 2, status_fd}) close(fd);
    EndAsTheProgramEnds(child);
  }
  prctl(PR_SET_PDEATHSIG, SIGKILL);
  if (getppid() != guardian) _exit(127);
  sigaction(SIGTERM, &dfl, nullptr);
  if (limits.address_space > 0) {  // the program's alone
    struct rlimit as {};
    as.rlim_cur = as.rlim_max = static_cast<rlim_t>(limits.address_space);
    setrlimit(RLIMIT_AS, &as);
  }
  execve(program, argv, envp);
  const int e = errno;
  (void)!write(status_fd, &e, sizeof e);
  _exit(127);
}

bool ChildRegistry::Add(pid_t pid) {
  absl::MutexLock l(&mu_);
  if (stopped_) return false;
  pids_.insert(pid);
  return true;
}

void ChildRegistry::Remove(pid_t pid) {
  absl::MutexLock l(&mu_);
  pids_.erase(pid);
}

void ChildRegistry::KillAll() {
  absl::MutexLock l(&mu_);
  stopped_ = true;
  for (pid_t pid : pids_) {
    kill(-pid, SIGKILL);
    kill(pid, SIGKILL);  // in case its setpgid had not happened yet
  }
}

bool ChildRegistry::stopped() {
  absl::MutexLock l(&mu_);
  return stopped_;
}

std::string DescribeWaitStatus(int status) {
  if (WIFEXITED(status)) {
    return absl::StrCat("exited with status ", WEXITSTATUS(status));
  }
  if (WIFSIGNALED(status)) {
    const int sig = WTERMSIG(status);
    return absl::StrCat("was killed by signal ", sig, " (", strsignal(sig),
                        ")");
  }
  return "ended";
}

std::string Quote(absl::string_view s, size_t max) {
  std::string out = absl::CHexEscape(s.substr(0, max));
  if (s.size() > max) absl::StrAppend(&out, "...");
  return absl::StrCat("\"", out, "\"");
}

}  // namespace skerry::worker::child
