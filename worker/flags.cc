#include "worker/flags.h"

#include <unistd.h>

#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <set>

#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/strings/string_view.h"
#include "common/host_port.h"

namespace skerry::worker {
namespace {

constexpr size_t kMaxNameLength = 256;

absl::Status FlagError(absl::string_view flag, absl::string_view what) {
  return absl::InvalidArgumentError(absl::StrCat(flag, ": ", what));
}

// Digits only (no sign, no spaces), within [lo, hi].
absl::StatusOr<uint64_t> ParseWholeNumber(absl::string_view flag,
                                          absl::string_view text, uint64_t lo,
                                          uint64_t hi) {
  auto bad = [&] {
    return FlagError(flag, absl::StrCat("expected a whole number from ", lo,
                                        " to ", hi, ", got \"", text, "\""));
  };
  if (text.empty() || text.size() > 19) return bad();
  uint64_t value = 0;
  for (char c : text) {
    if (c < '0' || c > '9') return bad();
    value = value * 10 + static_cast<uint64_t>(c - '0');
  }
  if (value < lo || value > hi) return bad();
  return value;
}

// HOST:PORT, the syntax all three programs share (common/host_port.h).
absl::Status CheckAddress(absl::string_view flag, absl::string_view text) {
  return ParseHostPort(flag, text).status();
}

absl::Status CheckName(absl::string_view flag, absl::string_view text) {
  if (text.empty()) return FlagError(flag, "must not be empty");
  if (text.size() > kMaxNameLength) {
    return FlagError(flag, absl::StrCat("at most ", kMaxNameLength,
                                        " characters, got ", text.size()));
  }
  for (char c : text) {
    if (static_cast<unsigned char>(c) < 0x20 || c == 0x7f) {
      return FlagError(flag, "must not contain control characters");
    }
  }
  return absl::OkStatus();
}

absl::Status Apply(absl::string_view flag, absl::string_view value,
                   WorkerFlags& out) {
  if (flag == "--coordinator") {
    if (absl::Status s = CheckAddress(flag, value); !s.ok()) return s;
    out.coordinator = std::string(value);
  } else if (flag == "--threads") {
    absl::StatusOr<uint64_t> n =
        ParseWholeNumber(flag, value, 1, kMaxThreadsFlag);
    if (!n.ok()) return n.status();
    out.options.threads = static_cast<int>(*n);
  } else if (flag == "--name") {
    if (absl::Status s = CheckName(flag, value); !s.ok()) return s;
    out.options.name = std::string(value);
  } else if (flag == "--batch") {
    absl::StatusOr<uint64_t> n =
        ParseWholeNumber(flag, value, 1, kMaxBatchFlag);
    if (!n.ok()) return n.status();
    out.options.batch = static_cast<uint32_t>(*n);
  } else if (flag == "--wait-ms") {
    absl::StatusOr<uint64_t> n =
        ParseWholeNumber(flag, value, 0, kMaxWaitMsFlag);
    if (!n.ok()) return n.status();
    out.options.wait = absl::Milliseconds(static_cast<int64_t>(*n));
  } else if (flag == "--sandbox") {
    absl::StatusOr<SandboxMode> mode = ParseSandboxMode(value);
    if (!mode.ok()) return mode.status();
    out.sandbox = *mode;
  } else if (flag == "--evaluator-dirs") {
    for (absl::string_view dir : absl::StrSplit(value, ':')) {
      if (dir.empty() || dir[0] != '/') {
        return FlagError(flag, absl::StrCat("expected absolute folders "
                                            "separated by ':', got \"",
                                            value.substr(0, 256), "\""));
      }
      out.evaluator_dirs.emplace_back(dir);
    }
  } else if (flag == "--timeout") {
    absl::StatusOr<uint64_t> n =
        ParseWholeNumber(flag, value, 1, kMaxTimeoutFlag);
    if (!n.ok()) return n.status();
    out.options.rpc_deadline = absl::Seconds(static_cast<int64_t>(*n));
    out.connect_timeout = out.options.rpc_deadline;
  } else if (flag == "--exit-when-idle") {
    absl::StatusOr<uint64_t> n =
        ParseWholeNumber(flag, value, 1, kMaxExitWhenIdleFlag);
    if (!n.ok()) return n.status();
    out.options.exit_when_idle = absl::Seconds(static_cast<int64_t>(*n));
  } else if (flag == "--token") {
    if (value.empty()) return FlagError(flag, "must not be empty");
    out.token = std::string(value);
  } else if (flag == "--token-file" || flag == "--tls-ca" ||
             flag == "--tls-cert" || flag == "--tls-key" ||
             flag == "--tls-server-name") {
    if (value.empty()) return FlagError(flag, "must not be empty");
    std::string& field = flag == "--token-file" ? out.token_file
                         : flag == "--tls-ca"   ? out.security.tls_ca_file
                         : flag == "--tls-cert" ? out.security.tls_cert_file
                         : flag == "--tls-key"  ? out.security.tls_key_file
                                                : out.security.tls_server_name;
    field = std::string(value);
  } else {
    // Never echo a value: it might be a token given under a mistyped flag.
    return absl::InvalidArgumentError(
        absl::StrCat("unknown flag \"", flag, "\" (see --help)"));
  }
  return absl::OkStatus();
}

}  // namespace

absl::StatusOr<WorkerFlags> ParseWorkerFlags(
    const std::vector<std::string>& args) {
  WorkerFlags out;
  std::set<std::string> seen;
  for (size_t i = 0; i < args.size(); ++i) {
    absl::string_view arg = args[i];
    if (arg == "--help" || arg == "-h") {
      out.help = true;
      return out;
    }
    if (arg == "--version") {
      out.version = true;
      return out;
    }
    if (!absl::StartsWith(arg, "--")) {
      return absl::InvalidArgumentError(absl::StrCat(
          "unexpected argument \"", arg, "\" (flags start with --)"));
    }
    std::string flag;
    std::string value;
    const size_t eq = arg.find('=');
    if (eq != absl::string_view::npos) {
      flag = std::string(arg.substr(0, eq));
      value = std::string(arg.substr(eq + 1));
    } else {
      flag = std::string(arg);
      if (i + 1 >= args.size()) return FlagError(flag, "missing value");
      value = args[++i];
    }
    if (!seen.insert(flag).second) {
      return FlagError(flag, "given more than once");
    }
    if (absl::Status s = Apply(flag, value, out); !s.ok()) return s;
  }
  if (out.coordinator.empty()) {
    return absl::InvalidArgumentError(
        "--coordinator HOST:PORT is required (see --help)");
  }
  if (seen.count("--threads") == 0) {
    return absl::InvalidArgumentError(
        "--threads N is required: the number of evaluation threads (see "
        "--help)");
  }
  return out;
}

absl::StatusOr<WorkerFlags> ParseWorkerFlags(int argc, char** argv) {
  std::vector<std::string> args;
  for (int i = 1; i < argc; ++i) args.emplace_back(argv[i]);
  return ParseWorkerFlags(args);
}

absl::StatusOr<std::shared_ptr<grpc::Channel>> ConnectFromFlags(
    const WorkerFlags& flags, const Getenv& getenv, std::string* warning) {
  absl::StatusOr<ResolvedToken> token =
      ResolveToken(flags.token, flags.token_file, getenv);
  if (!token.ok()) return token.status();
  *warning = token->warning;
  ClientSecurity security = flags.security;
  security.token = token->token;
  return OpenCoordinatorChannel(flags.coordinator, security,
                                flags.options.max_backoff,
                                flags.connect_timeout);
}

std::vector<std::string> SecretPaths(const WorkerFlags& flags,
                                     const Getenv& getenv) {
  std::vector<std::string> out;
  auto absolute = [](const std::string& path) {
    if (path.empty() || path[0] == '/') return path;
    char buf[4096];
    return getcwd(buf, sizeof buf) == nullptr ? path
                                              : absl::StrCat(buf, "/", path);
  };
  for (const std::string* p :
       {&flags.token_file, &flags.security.tls_key_file,
        &flags.security.tls_cert_file, &flags.security.tls_ca_file}) {
    if (!p->empty()) out.push_back(absolute(*p));
  }
  std::string config = getenv("XDG_CONFIG_HOME");
  if (config.empty() && !getenv("HOME").empty()) {
    config = getenv("HOME") + "/.config";
  }
  if (!config.empty()) out.push_back(absolute(config + "/skerry"));
  return out;
}

void ScrubTokenFromProcess(int argc, char** argv) {
  for (int i = 1; i < argc; ++i) {
    char* value = nullptr;
    if (std::strcmp(argv[i], "--token") == 0 && i + 1 < argc) {
      value = argv[i + 1];
    } else if (std::strncmp(argv[i], "--token=", 8) == 0) {
      value = argv[i] + 8;
    }
    if (value != nullptr) std::memset(value, 'x', std::strlen(value));
  }
  if (char* env = std::getenv(kTokenEnv); env != nullptr) {
    std::memset(env, 0, std::strlen(env));
    unsetenv(kTokenEnv);
  }
}

std::string WorkerUsage() {
  return absl::StrCat(
      "Usage: skerry-worker --coordinator HOST:PORT --threads N [--name NAME]\n"
      "                     [--batch N] [--wait-ms N] [--exit-when-idle S]\n"
      "                     [--token-file FILE] [--sandbox auto|bwrap|none]\n"
      "                     [--evaluator-dirs DIRS] [--timeout SECONDS]\n"
      "                     [--tls-ca FILE [--tls-cert FILE --tls-key FILE]]\n"
      "\n"
      "A stateless evaluation worker. It joins the coordinator at HOST:PORT,\n"
      "leases batches of genome evaluations, evaluates them on N threads and\n"
      "reports the results in batches. The next lease is fetched while the\n"
      "current batch is being evaluated, so threads do not wait for the "
      "network.\n"
      "When the coordinator is unreachable or restarts, the worker retries "
      "with\n"
      "capped exponential backoff; its results for tasks leased before a\n"
      "coordinator restart are still taken. Tasks a worker held are "
      "re-offered\n"
      "by the coordinator, so stopping or killing a worker loses nothing.\n"
      "\n"
      "Flags:\n"
      "  --coordinator HOST:PORT  the coordinator's address (required);\n"
      "                           IPv6 as [::1]:7431\n"
      "  --threads N              evaluation threads, 1 to ",
      kMaxThreadsFlag,
      " (required)\n"
      "  --name NAME              shown in the coordinator's worker list\n"
      "                           (default: host name and process id)\n"
      "  --batch N                tasks per lease, 1 to ",
      kMaxBatchFlag,
      "\n"
      "                           (default: 4 x threads)\n"
      "  --wait-ms N              how long a lease waits for work when there "
      "is\n"
      "                           none, 0 to ",
      kMaxWaitMsFlag,
      " (default: 5000);\n"
      "                           the coordinator may cap it\n"
      "  --timeout SECONDS        how long each call beyond its wait, and "
      "each\n"
      "                           connection attempt, may take, 1 to ",
      kMaxTimeoutFlag,
      "\n"
      "                           (default: 30 s per call, 20 s to connect)\n"
      "  --exit-when-idle SECONDS\n"
      "                           exit (code 0) after holding no task and "
      "being\n"
      "                           given none for SECONDS, 1 to ",
      kMaxExitWhenIdleFlag,
      ";\n"
      "                           time the coordinator is unreachable counts\n"
      "                           (default: never; for batch allocations)\n"
      "  --token TOKEN            bearer token of role worker (visible to "
      "other\n"
      "                           users in the process list until the worker\n"
      "                           has read it: prefer the next)\n"
      "  --token-file FILE        read the token from FILE's first line\n"
      "                           (default: $SKERRY_TOKEN, else\n"
      "                           ~/.config/skerry/token, else no token)\n"
      "  --tls-ca FILE            TLS: the CA that signed the coordinator's\n"
      "                           certificate (PEM)\n"
      "  --tls-cert FILE          TLS client certificate (PEM), with "
      "--tls-key,\n"
      "  --tls-key FILE           for a coordinator that checks clients\n"
      "  --tls-server-name NAME   name to expect in the coordinator's\n"
      "                           certificate (default: the host of the "
      "address)\n"
      "  --sandbox MODE           where evaluator programs run: bwrap (a\n"
      "                           bubblewrap sandbox: their own folder "
      "read-only,\n"
      "                           a private /tmp, no other file of this "
      "machine's\n"
      "                           outside /usr, no view of other processes, "
      "no\n"
      "                           network unless the spec asks; refuse to "
      "start\n"
      "                           when bwrap cannot run), none (no sandbox: "
      "user\n"
      "                           code can read the worker's token), or auto\n"
      "                           (default: bwrap where it works, else none "
      "with\n"
      "                           a warning); reported to the coordinator\n"
      "  --evaluator-dirs DIR[:DIR...]  with bwrap: the folders evaluator\n"
      "                           programs may come from (default: the "
      "current\n"
      "                           folder); a program's folder inside them is\n"
      "                           shown read-only, except the token file and\n"
      "                           config folder; nothing outside them and "
      "/usr\n"
      "  --help                   this text\n"
      "  --version                print the version and the worker protocol\n"
      "\n"
      "SIGINT, SIGTERM or SIGHUP stops the worker: it kills its evaluator "
      "programs, "
      "reports\n"
      "the results it has, hands every other task back to the coordinator "
      "(another\n"
      "worker can take it at once) and exits. A second signal kills the "
      "evaluator\n"
      "programs and exits at once. Evaluator programs die with the worker "
      "even\n"
      "when it is killed.\n"
      "Exit codes: 0 stopped, 1 the coordinator refused the worker, 2 usage "
      "error\n"
      "(or --sandbox bwrap where bwrap cannot run).\n");
}

}  // namespace skerry::worker
