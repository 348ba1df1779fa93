#include "worker/flags.h"

#include <unistd.h>

#include <cstdint>
#include <cstdlib>
#include <cstring>

#include "absl/flags/flag.h"
#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/strings/string_view.h"
#include "common/daemon_flags.h"
#include "common/host_port.h"
#include "common/quote.h"

// The worker's flags, written with '-' for '_' (common/daemon_flags.h). They
// hold what the command line says; WorkerFlags keeps the defaults of the
// flags not given. The help of each is WorkerUsage().
using skerry::HostPort;
using ThreadCount = skerry::WholeNumber<1, skerry::worker::kMaxThreadsFlag>;
using BatchSize = skerry::WholeNumber<1, skerry::worker::kMaxBatchFlag>;
using WaitMs = skerry::WholeNumber<0, skerry::worker::kMaxWaitMsFlag>;
using TimeoutSeconds = skerry::WholeNumber<1, skerry::worker::kMaxTimeoutFlag>;
using IdleSeconds =
    skerry::WholeNumber<1, skerry::worker::kMaxExitWhenIdleFlag>;
ABSL_FLAG(HostPort, coordinator, HostPort(),
          "the coordinator's address (required)");
ABSL_FLAG(ThreadCount, threads, {}, "evaluation threads (required)");
ABSL_FLAG(std::string, name, "", "shown in the coordinator's worker list");
ABSL_FLAG(BatchSize, batch, {}, "tasks per lease (default: 4 x threads)");
ABSL_FLAG(WaitMs, wait_ms, {5000}, "how long a lease waits for work");
ABSL_FLAG(TimeoutSeconds, timeout, {30}, "bound of each call and connection");
ABSL_FLAG(IdleSeconds, exit_when_idle, {}, "exit after SECONDS without work");
ABSL_FLAG(std::string, token, "", "bearer token of role worker");
ABSL_FLAG(std::string, token_file, "", "read the token from FILE");
ABSL_FLAG(std::string, tls_ca, "", "TLS: the coordinator's CA (PEM)");
ABSL_FLAG(std::string, tls_cert, "", "TLS client certificate (PEM)");
ABSL_FLAG(std::string, tls_key, "", "TLS client key (PEM)");
ABSL_FLAG(std::string, tls_server_name, "",
          "name to expect in the coordinator's certificate");
ABSL_FLAG(std::string, sandbox, "auto", "auto, bwrap or none");
ABSL_FLAG(std::string, evaluator_dirs, "",
          "with bwrap: folders evaluator programs may come from");

namespace skerry::worker {
namespace {

constexpr size_t kMaxNameLength = 256;

constexpr DaemonFlag kFlags[] = {
    {"coordinator"},     {"threads"}, {"name"},           {"batch"},
    {"wait-ms"},         {"timeout"}, {"exit-when-idle"}, {"token"},
    {"token-file"},      {"tls-ca"},  {"tls-cert"},       {"tls-key"},
    {"tls-server-name"}, {"sandbox"}, {"evaluator-dirs"},
};

absl::Status FlagError(absl::string_view flag, absl::string_view what) {
  return absl::InvalidArgumentError(absl::StrCat(flag, ": ", what));
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

// A file or name flag's value, refused when empty.
absl::Status NonEmpty(absl::string_view flag, const std::string& value,
                      std::string* field) {
  if (value.empty()) return FlagError(flag, "must not be empty");
  *field = value;
  return absl::OkStatus();
}

}  // namespace

absl::StatusOr<WorkerFlags> ParseWorkerFlags(
    const std::vector<std::string>& args) {
  absl::StatusOr<DaemonCommandLine> line =
      ParseDaemonFlags(args, kFlags, /*repeats=*/false);
  if (!line.ok()) return line.status();
  WorkerFlags out;
  out.help = line->help;
  out.version = line->version;
  if (out.help || out.version) return out;
  // Only the flags given are read: each parse sets them afresh, so one left
  // from an earlier parse in this process (tests) is never seen.
  auto given = [&](const char* name) { return line->given.count(name) > 0; };
  if (!given("coordinator")) {
    return absl::InvalidArgumentError(
        "--coordinator HOST:PORT is required (see --help)");
  }
  const HostPort coordinator = absl::GetFlag(FLAGS_coordinator);
  // Port 0 asks a listener for a free port; a client must name one.
  absl::Status address =
      ParseHostPort("--coordinator", coordinator.ToString()).status();
  if (!address.ok()) return address;
  out.coordinator = coordinator.ToString();
  if (!given("threads")) {
    return absl::InvalidArgumentError(
        "--threads N is required: the number of evaluation threads (see "
        "--help)");
  }
  out.options.threads = static_cast<int>(absl::GetFlag(FLAGS_threads).value);
  if (given("name")) {
    const std::string name = absl::GetFlag(FLAGS_name);
    if (absl::Status s = CheckName("--name", name); !s.ok()) return s;
    out.options.name = name;
  }
  if (given("batch")) {
    out.options.batch = static_cast<uint32_t>(absl::GetFlag(FLAGS_batch).value);
  }
  if (given("wait-ms")) {
    out.options.wait = absl::Milliseconds(
        static_cast<int64_t>(absl::GetFlag(FLAGS_wait_ms).value));
  }
  if (given("timeout")) {
    out.options.rpc_deadline =
        absl::Seconds(static_cast<int64_t>(absl::GetFlag(FLAGS_timeout).value));
    out.connect_timeout = out.options.rpc_deadline;
  }
  if (given("exit-when-idle")) {
    out.options.exit_when_idle = absl::Seconds(
        static_cast<int64_t>(absl::GetFlag(FLAGS_exit_when_idle).value));
  }
  if (given("sandbox")) {
    absl::StatusOr<SandboxMode> mode =
        ParseSandboxMode(absl::GetFlag(FLAGS_sandbox));
    if (!mode.ok()) return mode.status();
    out.sandbox = *mode;
  }
  if (given("evaluator-dirs")) {
    const std::string dirs = absl::GetFlag(FLAGS_evaluator_dirs);
    for (absl::string_view dir : absl::StrSplit(dirs, ':')) {
      if (dir.empty() || dir[0] != '/') {
        return FlagError("--evaluator-dirs",
                         absl::StrCat("expected absolute folders "
                                      "separated by ':', got ",
                                      QuotePrefix(dirs, 256)));
      }
      out.evaluator_dirs.emplace_back(dir);
    }
  }
  struct Text {
    const char* flag;
    const absl::Flag<std::string>& value;
    std::string* field;
  };
  for (const Text& t : {
           Text{"token", FLAGS_token, &out.token},
           Text{"token-file", FLAGS_token_file, &out.token_file},
           Text{"tls-ca", FLAGS_tls_ca, &out.security.tls_ca_file},
           Text{"tls-cert", FLAGS_tls_cert, &out.security.tls_cert_file},
           Text{"tls-key", FLAGS_tls_key, &out.security.tls_key_file},
           Text{"tls-server-name", FLAGS_tls_server_name,
                &out.security.tls_server_name},
       }) {
    if (!given(t.flag)) continue;
    absl::Status s =
        NonEmpty(absl::StrCat("--", t.flag), absl::GetFlag(t.value), t.field);
    if (!s.ok()) return s;
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
