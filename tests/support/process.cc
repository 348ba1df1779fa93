#include "tests/support/process.h"

#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <stdlib.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"

namespace skerry::testing {

TempDir::TempDir() {
  const char* base = getenv("TMPDIR");
  std::string tmpl =
      absl::StrCat(base != nullptr ? base : "/tmp", "/skerry-test-XXXXXX");
  std::vector<char> buf(tmpl.begin(), tmpl.end());
  buf.push_back('\0');
  const char* made = mkdtemp(buf.data());
  path_ = made != nullptr ? made : "/tmp";
}

TempDir::~TempDir() {
  if (path_ == "/tmp" || path_.empty()) return;
  // Best effort: a leftover folder in /tmp is harmless.
  std::error_code ignored;
  std::filesystem::remove_all(path_, ignored);
}

absl::StatusOr<Process> Process::Start(const std::vector<std::string>& argv,
                                       const std::string& log_path) {
  const int fd = open(log_path.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
  if (fd < 0) {
    return absl::InternalError(
        absl::StrCat("cannot open ", log_path, ": ", std::strerror(errno)));
  }
  // stdout and stderr to the log; no other descriptor of the test (sockets,
  // databases, pipes of other children) leaks into the child.
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_adddup2(&actions, fd, 1);
  posix_spawn_file_actions_adddup2(&actions, fd, 2);
  posix_spawn_file_actions_addclosefrom_np(&actions, 3);
  // Children must not inherit a blocked signal mask from test threads.
  posix_spawnattr_t attr;
  posix_spawnattr_init(&attr);
  sigset_t none;
  sigemptyset(&none);
  posix_spawnattr_setsigmask(&attr, &none);
  posix_spawnattr_setflags(&attr, POSIX_SPAWN_SETSIGMASK);
  std::vector<char*> args;
  for (const std::string& a : argv)
    args.push_back(const_cast<char*>(a.c_str()));
  args.push_back(nullptr);
  pid_t pid = -1;
  const int err =
      posix_spawn(&pid, args[0], &actions, &attr, args.data(), environ);
  posix_spawnattr_destroy(&attr);
  posix_spawn_file_actions_destroy(&actions);
  close(fd);
  if (err != 0) {
    return absl::InternalError(
        absl::StrCat("cannot start ", argv[0], ": ", std::strerror(err)));
  }
  return Process(pid, log_path);
}

Process::Process(Process&& other) noexcept { *this = std::move(other); }

Process& Process::operator=(Process&& other) noexcept {
  if (this != &other) {
    if (pid_ > 0) Kill();
    pid_ = other.pid_;
    log_path_ = std::move(other.log_path_);
    other.pid_ = -1;
  }
  return *this;
}

Process::~Process() {
  if (pid_ > 0) Kill();
}

void Process::Signal(int sig) {
  if (pid_ > 0) kill(pid_, sig);
}

absl::StatusOr<int> Process::Wait(absl::Duration timeout) {
  if (pid_ <= 0) return absl::FailedPreconditionError("no process");
  const absl::Time give_up = absl::Now() + timeout;
  while (true) {
    int status = 0;
    const pid_t r = waitpid(pid_, &status, WNOHANG);
    if (r == pid_) {
      pid_ = -1;
      if (WIFEXITED(status)) return WEXITSTATUS(status);
      if (WIFSIGNALED(status)) return 128 + WTERMSIG(status);
      return -1;
    }
    if (absl::Now() >= give_up) {
      return absl::DeadlineExceededError("process still running");
    }
    absl::SleepFor(absl::Milliseconds(20));
  }
}

void Process::Kill() {
  if (pid_ <= 0) return;
  kill(pid_, SIGCONT);  // a stopped process cannot be reaped otherwise
  kill(pid_, SIGKILL);
  int status = 0;
  waitpid(pid_, &status, 0);
  pid_ = -1;
}

std::string Process::Log() const {
  std::ifstream in(log_path_);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

CommandResult RunCommand(const std::vector<std::string>& argv,
                         absl::Duration timeout) {
  static int counter = 0;
  const std::string log =
      absl::StrCat("/tmp/skerry-cmd-", getpid(), "-", counter++, ".log");
  unlink(log.c_str());
  CommandResult out;
  absl::StatusOr<Process> p = Process::Start(argv, log);
  if (!p.ok()) {
    out.output = std::string(p.status().message());
    return out;
  }
  absl::StatusOr<int> code = p->Wait(timeout);
  out.exit_code = code.ok() ? *code : -1;
  if (!code.ok()) p->Kill();
  out.output = p->Log();
  unlink(log.c_str());
  return out;
}

std::string StartedCoordinator::address() const {
  return absl::StrCat("127.0.0.1:", port);
}

absl::StatusOr<StartedCoordinator> StartCoordinator(
    const std::string& binary, const std::string& db, const std::string& log,
    const std::vector<std::string>& extra_flags) {
  return StartCoordinatorOnPort(binary, db, log, 0, extra_flags);
}

absl::StatusOr<StartedCoordinator> StartCoordinatorOnPort(
    const std::string& binary, const std::string& db, const std::string& log,
    int port, const std::vector<std::string>& extra_flags) {
  std::vector<std::string> argv = {binary, "--db", db, "--listen",
                                   absl::StrCat("127.0.0.1:", port)};
  argv.insert(argv.end(), extra_flags.begin(), extra_flags.end());
  unlink(log.c_str());
  absl::StatusOr<Process> p = Process::Start(argv, log);
  if (!p.ok()) return p.status();
  StartedCoordinator c{std::move(*p), 0};
  const std::string marker = "listening on port ";
  const bool up = WaitFor(
      [&] {
        const std::string text = c.process.Log();
        const size_t at = text.find(marker);
        if (at == std::string::npos) return false;
        size_t end = at + marker.size();
        while (end < text.size() &&
               isdigit(static_cast<unsigned char>(text[end])))
          ++end;
        return absl::SimpleAtoi(
                   text.substr(at + marker.size(), end - at - marker.size()),
                   &c.port) &&
               c.port > 0;
      },
      absl::Seconds(30));
  if (!up) {
    return absl::UnavailableError(
        absl::StrCat("coordinator did not start:\n", c.process.Log()));
  }
  return c;
}

CommandResult RunCli(const std::string& cli_bin, const std::string& address,
                     const std::vector<std::string>& args,
                     absl::Duration timeout) {
  std::vector<std::string> argv = {cli_bin, "--coordinator", address};
  argv.insert(argv.end(), args.begin(), args.end());
  return RunCommand(argv, timeout);
}

absl::StatusOr<std::vector<Process>> StartWorkers(
    const std::string& worker_bin, const std::string& address, int count,
    int threads, const std::string& name_prefix,
    const std::string& log_prefix) {
  std::vector<Process> fleet;
  for (int i = 0; i < count; ++i) {
    absl::StatusOr<Process> w =
        Process::Start({worker_bin, "--coordinator", address, "--threads",
                        absl::StrCat(threads), "--batch", "8", "--name",
                        absl::StrCat(name_prefix, i)},
                       absl::StrCat(log_prefix, i, ".log"));
    if (!w.ok()) return w.status();
    fleet.push_back(std::move(*w));
  }
  return fleet;
}

bool WriteTextFile(const std::string& path, const std::string& text) {
  std::ofstream out(path, std::ios::trunc);
  out << text;
  return static_cast<bool>(out);
}

std::string DigestIn(const std::string& output) {
  size_t run = 0;
  for (size_t i = 0; i <= output.size(); ++i) {
    const bool hex =
        i < output.size() && ((output[i] >= '0' && output[i] <= '9') ||
                              (output[i] >= 'a' && output[i] <= 'f'));
    if (hex) {
      ++run;
      continue;
    }
    const bool word_end = i == output.size() || output[i] == ' ' ||
                          output[i] == '\n' || output[i] == '\t';
    if (run == 64 && word_end) return output.substr(i - 64, 64);
    run = 0;
  }
  return "";
}

bool WaitFor(const std::function<bool()>& condition, absl::Duration timeout) {
  const absl::Time give_up = absl::Now() + timeout;
  while (true) {
    if (condition()) return true;
    if (absl::Now() >= give_up) return false;
    absl::SleepFor(absl::Milliseconds(50));
  }
}

}  // namespace skerry::testing
