// The sandbox evaluator programs run in, so that user code run by a worker
// cannot reach the worker's credentials (its token, TLS key, config folder)
// or any other file of the worker's. docs/safety.md says what it guarantees.
//
// With bubblewrap (Debian package `bubblewrap`, program `bwrap`), each
// evaluator child is started as
//   bwrap --unshare-all [--share-net] --die-with-parent --new-session
//         (environment: ScrubbedEnvironment, passed through bwrap)
//         --ro-bind /usr, the library links and a few files of /etc
//         --proc /proc --dev /dev --tmpfs /tmp (the private scratch folder)
//         --ro-bind each program folder (the folder of argv[0] and of every
//                   argument that names an existing file, and working_dir),
//                   but only folders inside the worker's evaluator folders
//                   (--evaluator-dirs; default: its current folder), after
//                   resolving symbolic links
//         --ro-bind /dev/null over each hidden file inside a bound folder,
//         --tmpfs over each hidden folder inside one
//         --chdir the working directory  -- PROGRAM ARGS...
// so the program sees its own folder read-only, a private /tmp, its own pid
// namespace (the worker's /proc entries do not exist there), and no network
// unless its spec asks for it (ExternalEvaluator.network).
//
// Invariant: a Sandbox made by SetUpSandbox with kBwrap has run bwrap once
// successfully with these very arguments; kAuto falls back to no sandbox (and
// says so in `warning` and state()) only when that probe fails.
//
// Thread safety: a Sandbox is immutable after SetUpSandbox; share it freely.
#ifndef SKERRY_WORKER_SANDBOX_H_
#define SKERRY_WORKER_SANDBOX_H_

#include <map>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace skerry::worker {

enum class SandboxMode { kAuto, kBwrap, kNone };

// "auto", "bwrap", "none"; InvalidArgument names --sandbox otherwise.
absl::StatusOr<SandboxMode> ParseSandboxMode(absl::string_view text);

class Sandbox {
 public:
  // A sandbox that confines nothing (state() "none: <reason>").
  static std::shared_ptr<const Sandbox> None(std::string reason);

  bool enabled() const { return !bwrap_.empty(); }
  // What the worker reports at Join: "bwrap", or "none: <reason>".
  const std::string& state() const { return state_; }

  // The command that runs `program args...` (program resolved, args[0] is
  // the name the program sees) in the sandbox: bwrap's argv. working_dir is
  // where it starts (empty: the worker's current folder, which is created
  // empty inside unless a program folder holds it). InvalidArgument naming
  // evaluator.external.argv[0] when the program lies outside /usr and the
  // evaluator folders, so it could not be seen inside.
  absl::StatusOr<std::vector<std::string>> Wrap(
      const std::string& program, const std::vector<std::string>& args,
      const std::string& working_dir, bool network) const;

 private:
  friend absl::StatusOr<std::shared_ptr<const Sandbox>> SetUpSandbox(
      SandboxMode, std::vector<std::string>, std::vector<std::string>,
      std::string*);
  Sandbox(std::string bwrap, std::vector<std::string> hidden,
          std::vector<std::string> roots, std::string state);

  const std::string bwrap_;  // empty: no sandbox
  const std::vector<std::string> hidden_;
  const std::vector<std::string> roots_;  // evaluator folders, resolved
  const std::string state_;
};

// Decides the worker's sandbox. hidden_paths: files and folders no evaluator
// may see even where they lie inside a program's folder (the token file, the
// config folder, TLS files). evaluator_dirs: the folders program folders may
// be shown from (empty: the current folder). kBwrap: FailedPrecondition when
// bwrap is missing or cannot run here, with its own error; InvalidArgument
// for an evaluator folder that does not exist. kAuto: a failing bwrap gives a
// no-sandbox Sandbox and a loud `warning` for stderr.
absl::StatusOr<std::shared_ptr<const Sandbox>> SetUpSandbox(
    SandboxMode mode, std::vector<std::string> hidden_paths,
    std::vector<std::string> evaluator_dirs, std::string* warning);

// The environment of every evaluator child (with or without sandbox): only
// PATH, LANG, LANGUAGE, LC_*, TZ, TERM and (without sandbox) HOME, USER,
// LOGNAME, TMPDIR from `parent` (NAME=value entries), then `overrides`. With
// a sandbox HOME and TMPDIR are /tmp. No SKERRY_* variable is ever passed on
// unless the spec sets it.
std::vector<std::string> ScrubbedEnvironment(
    const std::vector<std::string>& parent,
    const std::map<std::string, std::string>& overrides, bool sandboxed);
// This process's environment as NAME=value entries.
std::vector<std::string> ProcessEnvironmentEntries();

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_SANDBOX_H_
