#include "worker/sandbox.h"

#include <errno.h>
#include <fcntl.h>
#include <spawn.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cstdlib>
#include <cstring>
#include <set>
#include <utility>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "worker/child_process.h"

extern char** environ;

namespace skerry::worker {
namespace {

// Where programs are looked up inside the sandbox, and its PATH.
constexpr char kSandboxPath[] = "/usr/local/bin:/usr/bin:/bin";

// Files of /etc that programs commonly need (dynamic linker, time zone, user
// names, TLS roots, Python's own settings); nothing that holds secrets.
// common practice
constexpr const char* kEtcFiles[] = {
    "/etc/ld.so.cache",     "/etc/ld.so.conf", "/etc/ld.so.conf.d",
    "/etc/alternatives",    "/etc/localtime",  "/etc/timezone",
    "/etc/nsswitch.conf",   "/etc/passwd",     "/etc/group",
    "/etc/hosts",           "/etc/host.conf",  "/etc/ssl",
    "/etc/ca-certificates", "/etc/python3",    "/etc/python3.11",
    "/etc/mime.types",      "/etc/os-release"};

// The path with every symbolic link resolved; "" when it does not exist.
std::string RealPath(const std::string& path) {
  char* real = realpath(path.c_str(), nullptr);
  if (real == nullptr) return "";
  std::string out(real);
  free(real);
  return out;
}

bool IsDir(const std::string& path) {
  struct stat st {};
  return stat(path.c_str(), &st) == 0 && S_ISDIR(st.st_mode);
}

bool Exists(const std::string& path) {
  struct stat st {};
  return stat(path.c_str(), &st) == 0;
}

std::string Dirname(const std::string& path) {
  const size_t slash = path.rfind('/');
  if (slash == std::string::npos) return ".";
  if (slash == 0) return "/";
  return path.substr(0, slash);
}

std::string CurrentDir() {
  char buf[4096];
  if (getcwd(buf, sizeof buf) == nullptr) return "/";
  return buf;
}

// a is b or lies inside it.
bool Inside(const std::string& a, const std::string& b) {
  if (b == "/") return true;
  return a == b || absl::StartsWith(a, absl::StrCat(b, "/"));
}

// The arguments every sandboxed program gets, before its own folders.
std::vector<std::string> BaseArguments() {
  std::vector<std::string> a = {"--unshare-all", "--die-with-parent",
                                "--new-session", "--ro-bind",
                                "/usr",          "/usr"};
  // Merged-/usr systems link these into /usr; others have real folders.
  for (const char* top : {"/bin", "/sbin", "/lib", "/lib32", "/lib64"}) {
    struct stat st {};
    if (lstat(top, &st) != 0) continue;
    if (S_ISLNK(st.st_mode)) {
      char target[4096];
      const ssize_t n = readlink(top, target, sizeof target - 1);
      if (n <= 0) continue;
      a.insert(a.end(),
               {"--symlink", std::string(target, static_cast<size_t>(n)), top});
    } else if (S_ISDIR(st.st_mode)) {
      a.insert(a.end(), {"--ro-bind", top, top});
    }
  }
  for (const char* etc : kEtcFiles) {
    a.insert(a.end(), {"--ro-bind-try", etc, etc});
  }
  a.insert(a.end(), {"--proc", "/proc", "--dev", "/dev", "--tmpfs", "/tmp"});
  return a;
}

std::string ProbeFailure(const std::string& bwrap) {
  if (!child::IsExecutableFile(bwrap)) {
    return "bwrap not found (install the Debian package bubblewrap)";
  }
  // Run `true` in the sandbox exactly as evaluators will be run.
  std::vector<std::string> argv = {bwrap};
  for (std::string& s : BaseArguments()) argv.push_back(std::move(s));
  argv.insert(argv.end(), {"--", "/bin/true"});
  std::vector<char*> cargv;
  for (std::string& s : argv) cargv.push_back(s.data());
  cargv.push_back(nullptr);
  int err[2];
  if (pipe2(err, O_CLOEXEC) != 0) return "cannot make a pipe";
  // A short probe that the worker waits for: no process group or parent-death
  // signal needed (unlike evaluators, child_process.h), so posix_spawn.
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_adddup2(&actions, err[1],
                                   2);  // first: err[1] may be 0
  posix_spawn_file_actions_addopen(&actions, 0, "/dev/null", O_RDWR, 0);
  posix_spawn_file_actions_adddup2(&actions, 0, 1);
  posix_spawn_file_actions_addclosefrom_np(&actions, 3);
  char* const envp[] = {nullptr};
  pid_t pid = -1;
  const int spawn_error =
      posix_spawn(&pid, cargv[0], &actions, nullptr, cargv.data(), envp);
  posix_spawn_file_actions_destroy(&actions);
  close(err[1]);
  if (spawn_error != 0) {
    close(err[0]);
    return absl::StrCat("cannot start bwrap: ", std::strerror(spawn_error));
  }
  std::string text;
  char buf[512];
  ssize_t n;
  while ((n = read(err[0], buf, sizeof buf)) > 0 || (n < 0 && errno == EINTR)) {
    if (n > 0 && text.size() < 2048) text.append(buf, static_cast<size_t>(n));
  }
  close(err[0]);
  int status = 0;
  while (waitpid(pid, &status, 0) < 0 && errno == EINTR) {
  }
  if (WIFEXITED(status) && WEXITSTATUS(status) == 0) return "";
  while (!text.empty() && (text.back() == '\n' || text.back() == '\r')) {
    text.pop_back();
  }
  return absl::StrCat("bwrap ", child::DescribeWaitStatus(status),
                      text.empty() ? "" : ": ", text);
}

}  // namespace

absl::StatusOr<SandboxMode> ParseSandboxMode(absl::string_view text) {
  if (text == "auto") return SandboxMode::kAuto;
  if (text == "bwrap") return SandboxMode::kBwrap;
  if (text == "none") return SandboxMode::kNone;
  return absl::InvalidArgumentError(
      absl::StrCat("--sandbox: expected auto, bwrap or none, got \"",
                   text.substr(0, 64), "\""));
}

Sandbox::Sandbox(std::string bwrap, std::vector<std::string> hidden,
                 std::vector<std::string> roots, std::string state)
    : bwrap_(std::move(bwrap)),
      hidden_(std::move(hidden)),
      roots_(std::move(roots)),
      state_(std::move(state)) {}

std::shared_ptr<const Sandbox> Sandbox::None(std::string reason) {
  return std::shared_ptr<const Sandbox>(
      new Sandbox("", {}, {}, absl::StrCat("none: ", reason)));
}

absl::StatusOr<std::shared_ptr<const Sandbox>> SetUpSandbox(
    SandboxMode mode, std::vector<std::string> hidden_paths,
    std::vector<std::string> evaluator_dirs, std::string* warning) {
  if (mode == SandboxMode::kNone) return Sandbox::None("--sandbox none");
  if (evaluator_dirs.empty()) evaluator_dirs.push_back(CurrentDir());
  std::vector<std::string> roots;
  for (const std::string& dir : evaluator_dirs) {
    std::string real = RealPath(dir);
    if (real.empty() || !IsDir(real)) {
      return absl::InvalidArgumentError(absl::StrCat(
          "--evaluator-dirs: \"", dir, "\" is not a folder on this machine"));
    }
    roots.push_back(std::move(real));
  }
  const std::string bwrap = "/usr/bin/bwrap";
  const std::string failure = ProbeFailure(bwrap);
  if (failure.empty()) {
    return std::shared_ptr<const Sandbox>(
        new Sandbox(bwrap, std::move(hidden_paths), std::move(roots), "bwrap"));
  }
  if (mode == SandboxMode::kBwrap) {
    return absl::FailedPreconditionError(absl::StrCat(
        "--sandbox bwrap: the sandbox cannot run here: ", failure));
  }
  *warning = absl::StrCat(
      "WARNING: evaluator programs run WITHOUT a sandbox (", failure,
      "). User code run by this worker can read every file this user can, "
      "including the worker's token. Install bubblewrap, or pass "
      "--sandbox none to accept this.");
  return Sandbox::None(absl::StrCat("bubblewrap unavailable: ", failure));
}

absl::StatusOr<std::vector<std::string>> Sandbox::Wrap(
    const std::string& program, const std::vector<std::string>& args,
    const std::string& working_dir, bool network) const {
  std::vector<std::string> a = {bwrap_};
  for (std::string& s : BaseArguments()) a.push_back(std::move(s));
  if (network) {
    a.emplace_back("--share-net");
    a.insert(a.end(),
             {"--ro-bind-try", "/etc/resolv.conf", "/etc/resolv.conf"});
  }
  const std::string cwd = working_dir.empty() ? CurrentDir() : working_dir;
  // The program's folders: of the program, of every argument that names an
  // existing file (relative ones from the working directory), and the
  // working directory itself when it was given. /usr is there already.
  // Symbolic links are resolved first, so none can lead out of the
  // evaluator folders.
  std::set<std::string> folders;
  auto add_folder = [&](const std::string& path) {
    const std::string dir = RealPath(path);
    if (dir.empty() || Inside(dir, "/usr") || !IsDir(dir)) return true;
    for (const std::string& root : roots_) {
      if (Inside(dir, root)) {
        folders.insert(dir);
        return true;
      }
    }
    return false;
  };
  if (!add_folder(Dirname(program))) {
    return absl::InvalidArgumentError(absl::StrCat(
        "evaluator.external.argv[0]: \"", program,
        "\" lies outside the folders this worker's sandbox shows (/usr and "
        "--evaluator-dirs ",
        absl::StrJoin(roots_, ":"), ")"));
  }
  for (size_t i = 1; i < args.size(); ++i) {
    const std::string& arg = args[i];
    if (arg.empty() || arg.size() > 4096) continue;
    const std::string path = arg[0] == '/' ? arg : absl::StrCat(cwd, "/", arg);
    if (Exists(path) && !IsDir(path)) add_folder(Dirname(path));
  }
  if (!working_dir.empty()) add_folder(working_dir);
  for (const std::string& dir : folders) {
    a.insert(a.end(), {"--ro-bind", dir, dir});
  }
  // Secrets inside a bound folder are covered up.
  for (const std::string& hidden : hidden_) {
    bool exposed = false;
    for (const std::string& dir : folders) exposed |= Inside(hidden, dir);
    if (!exposed || !Exists(hidden)) continue;
    if (IsDir(hidden)) {
      a.insert(a.end(), {"--tmpfs", hidden});
    } else {
      a.insert(a.end(), {"--ro-bind", "/dev/null", hidden});
    }
  }
  a.insert(a.end(), {"--dir", cwd, "--chdir", cwd, "--", program});
  for (size_t i = 1; i < args.size(); ++i) a.push_back(args[i]);
  return a;
}

std::vector<std::string> ScrubbedEnvironment(
    const std::vector<std::string>& parent,
    const std::map<std::string, std::string>& overrides, bool sandboxed) {
  static const std::set<std::string> kKept = {"PATH", "LANG",    "LANGUAGE",
                                              "TZ",   "TERM",    "HOME",
                                              "USER", "LOGNAME", "TMPDIR"};
  std::map<std::string, std::string> env;
  for (const std::string& entry : parent) {
    const size_t eq = entry.find('=');
    if (eq == std::string::npos) continue;
    const std::string name = entry.substr(0, eq);
    if (kKept.count(name) == 0 && !absl::StartsWith(name, "LC_")) continue;
    env[name] = entry.substr(eq + 1);
  }
  if (sandboxed) {
    // Only /usr is visible inside: the worker's PATH would name folders
    // that do not exist there.
    env["PATH"] = kSandboxPath;
    env["HOME"] = "/tmp";
    env["TMPDIR"] = "/tmp";
  } else if (env.count("PATH") == 0) {
    env["PATH"] = kSandboxPath;
  }
  for (const auto& [name, value] : overrides) env[name] = value;
  std::vector<std::string> out;
  out.reserve(env.size());
  for (const auto& [name, value] : env)
    out.push_back(absl::StrCat(name, "=", value));
  return out;
}

std::vector<std::string> ProcessEnvironmentEntries() {
  std::vector<std::string> out;
  for (char** e = environ; e != nullptr && *e != nullptr; ++e) {
    out.emplace_back(*e);
  }
  return out;
}

}  // namespace skerry::worker
