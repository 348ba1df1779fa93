#include "cli/commands.h"

#include <sys/stat.h>

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cstring>
#include <fstream>
#include <random>
#include <sstream>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "cli/access.h"
#include "cli/archive.h"
#include "cli/backup.h"
#include "cli/compare.h"
#include "cli/compare_page.h"
#include "cli/fork.h"
#include "cli/format.h"
#include "cli/housekeeping.h"
#include "cli/lineage.h"
#include "cli/metrics_text.h"
#include "cli/network_command.h"
#include "cli/report.h"
#include "cli/series.h"
#include "cli/validate.h"
#include "cli/workers.h"
#include "common/spec.h"
#include "common/version.h"
#include "google/protobuf/util/json_util.h"

namespace skerry::cli {

int UsageFailure(const absl::Status& status, absl::string_view command,
                 Io& io) {
  *io.err << "skerry: " << Redact(std::string(status.message()), io) << "\n";
  if (!command.empty()) {
    *io.err << "run `skerry " << command << " --help` for its usage\n";
  }
  return kExitUsage;
}

absl::StatusOr<std::string> MessageJson(const google::protobuf::Message& m) {
  std::string out;
  auto status = google::protobuf::util::MessageToJsonString(m, &out);
  if (!status.ok()) {
    return absl::InternalError(
        absl::StrCat("cannot encode the answer as JSON: ", status.ToString()));
  }
  return out + "\n";
}

int PrintJson(const google::protobuf::Message& m, Io& io) {
  absl::StatusOr<std::string> text = MessageJson(m);
  if (!text.ok()) return ReportError(text.status(), io);
  *io.out << *text << std::flush;
  return kExitOk;
}

namespace {

using skerry::v1::RunSummary;

absl::Status WriteFile(const std::string& path, const std::string& contents) {
  std::ofstream file(path, std::ios::binary | std::ios::trunc);
  if (file) file << contents;
  if (file) file.close();
  if (!file) {
    return absl::PermissionDeniedError(
        absl::StrCat("cannot write ", path, ": ", std::strerror(errno)));
  }
  return absl::OkStatus();
}

// Where `watch` stands: the last summary and whether a progress line is open.
struct WatchState {
  RunSummary last;
  uint32_t max_generations = 0;
  bool line_open = false;
};

void Draw(const RunSummary& summary, WatchState& state, Io& io) {
  state.last = summary;
  std::string line = FormatProgressLine(summary, state.max_generations);
  if (io.interactive) {
    *io.out << "\r" << line << "\x1b[K" << std::flush;
    state.line_open = true;
  } else {
    *io.out << line << "\n" << std::flush;
  }
}

void EndLine(WatchState& state, Io& io) {
  if (state.line_open) *io.out << "\n" << std::flush;
  state.line_open = false;
}

void Sleep(absl::Duration d, Io& io) {
  if (io.sleep) {
    io.sleep(d);
  } else {
    absl::SleepFor(d);
  }
}

int Dispatch(const ParsedArgs& args, RunClient& client, Io& io) {
  uint64_t run_id = 0;
  if (!args.positionals.empty() && args.command != "submit" &&
      args.command != "series" && args.command != "compare") {
    absl::StatusOr<uint64_t> id = ParseRunId(args.positionals[0]);
    if (!id.ok()) return UsageFailure(id.status(), args.command, io);
    run_id = *id;
  }
  const std::string& command = args.command;
  if (command == "submit") {
    if (args.Has("series")) {
      return UsageFailure(absl::InvalidArgumentError(
                              "--series: names a series, so it goes with "
                              "--seeds LIST"),
                          command, io);
    }
    uint32_t priority = 0;
    if (args.Has("priority")) {
      // The bounds of scheduler::kMinWeight and kMaxWeight.
      absl::StatusOr<uint32_t> n =
          ParseBoundedUint("--priority", args.Get("priority"), 1, 1000);
      if (!n.ok()) return UsageFailure(n.status(), command, io);
      priority = *n;
    }
    int code =
        SubmitCommand(client, args.positionals[0], io, &run_id, priority);
    if (code != kExitOk || !args.Has("watch")) return code;
    return WatchCommand(client, run_id, io);
  }
  if (command == "fork") {
    uint64_t fork_id = 0;
    return ForkCommand(args, client, run_id, io, &fork_id);
  }
  if (command == "delete") return DeleteCommand(client, run_id, io);
  if (command == "list") return ListCommand(client, io);
  if (command == "series") return SeriesCommand(args, client, io);
  if (command == "compare") return CompareCommand(args, client, io);
  if (command == "show")
    return ShowCommand(client, run_id, args.Has("all"), io);
  if (command == "watch") return WatchCommand(client, run_id, io);
  if (command == "pause" || command == "resume" || command == "stop") {
    return SteerCommand(client, run_id, command, io);
  }
  if (command == "digest") return DigestCommand(client, run_id, io);
  if (command == "priority") {
    absl::StatusOr<uint32_t> n =
        ParseBoundedUint("PRIORITY", args.positionals[1], 1, 1000);
    if (!n.ok()) return UsageFailure(n.status(), command, io);
    absl::StatusOr<RunSummary> run = client.SetPriority(run_id, *n);
    if (!run.ok()) return ReportError(run.status(), io);
    *io.out << "run " << run->id() << " priority " << run->priority() << "\n";
    return kExitOk;
  }
  if (command == "network") {
    return NetworkCommand(client, run_id, args.Get("out"), io);
  }
  if (command == "champion") {
    return ChampionCommand(client, run_id, args.Has("json"), args.Get("out"),
                           io);
  }
  if (command == "history") {
    std::optional<uint32_t> island;
    if (args.Has("island")) {
      absl::StatusOr<uint32_t> n =
          ParseBoundedUint("--island", args.Get("island"), 0, 255);
      if (!n.ok()) return UsageFailure(n.status(), command, io);
      island = *n;
    }
    return HistoryCommand(client, run_id, island, io);
  }
  return UsageFailure(absl::InvalidArgumentError(
                          absl::StrCat("command '", command, "' not handled")),
                      "", io);
}

int Help(const ParsedArgs& args, Io& io) {
  if (args.command == "help" && !args.positionals.empty()) {
    const CommandSpec* command = FindCommand(args.positionals[0]);
    if (command == nullptr) {
      return UsageFailure(
          absl::InvalidArgumentError(absl::StrCat("help: unknown command '",
                                                  args.positionals[0], "'")),
          "help", io);
    }
    *io.out << CommandHelp(*command);
    return kExitOk;
  }
  if (args.command == "help") {
    *io.out << GeneralHelp();
  } else {
    *io.out << CommandHelp(*FindCommand(args.command));
  }
  return kExitOk;
}

}  // namespace

std::string Redact(const std::string& text, const Io& io) {
  std::string out = text;
  for (const std::string& secret : io.secrets) {
    if (secret.empty()) continue;
    for (size_t at = out.find(secret); at != std::string::npos;
         at = out.find(secret, at)) {
      out.replace(at, secret.size(), "[hidden]");
    }
  }
  // Anything shaped like one of our tokens: "skt_" and 64 hex digits.
  for (size_t at = out.find("skt_"); at != std::string::npos;
       at = out.find("skt_", at + 1)) {
    size_t end = at + 4;
    while (end < out.size() &&
           std::isxdigit(static_cast<unsigned char>(out[end])))
      ++end;
    if (end - at - 4 >= 16) out.replace(at + 4, end - at - 4, "[hidden]");
  }
  return out;
}

int ReportError(const absl::Status& status, Io& io) {
  *io.err << "skerry: " << Redact(std::string(status.message()), io) << "\n";
  return IsUnreachable(status) ? kExitUnreachable : kExitFailure;
}

absl::StatusOr<LoadedSpec> LoadSpecFile(const std::string& path) {
  // An ifstream opens a directory and reads it as empty: a spec of defaults.
  struct stat st {};
  if (stat(path.c_str(), &st) == 0 && S_ISDIR(st.st_mode)) {
    return absl::InvalidArgumentError(
        absl::StrCat(path, " is a directory, not a spec file"));
  }
  std::ifstream file(path, std::ios::binary);
  if (!file) {
    return absl::NotFoundError(
        absl::StrCat("cannot read ", path, ": ", std::strerror(errno)));
  }
  std::ostringstream text;
  text << file.rdbuf();
  if (file.bad()) {
    return absl::DataLossError(
        absl::StrCat("cannot read ", path, ": ", std::strerror(errno)));
  }
  LoadedSpec loaded;
  loaded.text = text.str();
  absl::StatusOr<skerry::v1::RunSpec> spec = ParseSpecText(loaded.text, path);
  if (!spec.ok()) return spec.status();
  absl::StatusOr<skerry::v1::RunSpec> prepared = PrepareSpec(*spec);
  if (!prepared.ok()) {
    return absl::InvalidArgumentError(
        absl::StrCat(path, ": ", prepared.status().message()));
  }
  loaded.spec = *std::move(spec);
  return loaded;
}

// Retries of a submission nothing answered (1 s, then 2 s apart).
constexpr int kSubmitRetries = 2;

std::string NewRequestId() {
  std::random_device device;
  std::string id;
  for (int i = 0; i < 4; ++i)
    absl::StrAppend(&id, absl::Hex(device(), absl::kZeroPad8));
  return id;
}

int SubmitCommand(RunClient& client, const std::string& spec_path, Io& io,
                  uint64_t* run_id, uint32_t priority) {
  absl::StatusOr<LoadedSpec> loaded = LoadSpecFile(spec_path);
  if (!loaded.ok()) {
    *io.err << "skerry: " << loaded.status().message() << "\n";
    return kExitUsage;
  }
  // One id per invocation, reused on retry: a submission that reached the
  // coordinator but whose answer was lost is not made twice.
  const std::string request_id = NewRequestId();
  absl::StatusOr<RunSummary> run =
      client.Submit(loaded->spec, loaded->text, priority, request_id);
  for (int retry = 0;
       retry < kSubmitRetries && !run.ok() && IsUnreachable(run.status());
       ++retry) {
    if (io.sleep) {
      io.sleep(absl::Seconds(1 << retry));
    } else {
      absl::SleepFor(absl::Seconds(1 << retry));
    }
    run = client.Submit(loaded->spec, loaded->text, priority, request_id);
  }
  if (!run.ok()) return ReportError(run.status(), io);
  *run_id = run->id();
  *io.out << run->id() << "\n" << std::flush;
  return kExitOk;
}

int WatchCommand(RunClient& client, uint64_t run_id, Io& io) {
  absl::StatusOr<skerry::v1::GetRunResponse> run = client.Get(run_id);
  if (!run.ok()) return ReportError(run.status(), io);
  WatchState state;
  state.last = run->run();
  state.max_generations = run->spec().stop().max_generations();
  int failures = 0;
  absl::Duration backoff = absl::Seconds(1);
  while (!IsTerminal(state.last.state())) {
    bool updated = false;
    absl::Status status = client.Watch(run_id, [&](const RunSummary& summary) {
      updated = true;
      Draw(summary, state, io);
    });
    if (updated) {
      failures = 0;
      backoff = absl::Seconds(1);
    }
    if (status.ok() && IsTerminal(state.last.state())) break;
    // The stream ended without the run ending: the coordinator went away (or
    // shut down cleanly). Reconnect, a bounded number of times in a row.
    if (!status.ok() && !absl::IsUnavailable(status)) {
      EndLine(state, io);
      return ReportError(status, io);
    }
    if (++failures > kWatchRetries) {
      EndLine(state, io);
      *io.err << "skerry: gave up watching run " << run_id << " after "
              << kWatchRetries << " reconnection attempts\n";
      return status.ok() ? kExitFailure : ReportError(status, io);
    }
    EndLine(state, io);
    *io.err << "skerry: "
            << (status.ok() ? "the watch stream ended early"
                            : std::string(status.message()))
            << "; retrying in " << absl::FormatDuration(backoff) << "\n";
    Sleep(backoff, io);
    backoff = std::min(backoff * 2, kWatchMaxBackoff);
  }
  EndLine(state, io);
  *io.out << FormatFinalState(state.last) << std::flush;
  return state.last.state() == skerry::v1::FAILED_RUN ? kExitFailure : kExitOk;
}

int ChampionCommand(RunClient& client, uint64_t run_id, bool json,
                    const std::string& out_path, Io& io) {
  absl::StatusOr<skerry::v1::GetRunResponse> run = client.Get(run_id);
  if (!run.ok()) return ReportError(run.status(), io);
  absl::StatusOr<skerry::v1::Genome> genome = client.Champion(run_id);
  if (!genome.ok()) return ReportError(genome.status(), io);
  const std::string& name = run->spec().name();
  std::string text;
  if (json) {
    absl::StatusOr<std::string> encoded = ChampionJson(*genome, run_id, name);
    if (!encoded.ok()) return ReportError(encoded.status(), io);
    text = *std::move(encoded);
  } else {
    text = FormatChampion(*genome, name);
    // The seed its evaluator was given: re-score it outside Skerry with it.
    absl::StrAppend(&text, "eval seed   ", GenomeEvalSeed(run->spec(), *genome),
                    "\n");
    text += FormatGenomeMetrics(genome->metrics());
  }
  if (out_path.empty()) {
    *io.out << text << std::flush;
    return kExitOk;
  }
  absl::Status written = WriteFile(out_path, text);
  if (!written.ok()) return ReportError(written, io);
  *io.out << "champion of run " << run_id << " written to " << out_path << "\n";
  return kExitOk;
}

int ListCommand(RunClient& client, Io& io) {
  absl::StatusOr<std::vector<RunSummary>> runs = client.List();
  if (!runs.ok()) return ReportError(runs.status(), io);
  *io.out << FormatGroupedRunList(*runs, io.zone);
  return kExitOk;
}

int ShowCommand(RunClient& client, uint64_t run_id, bool all_rows, Io& io) {
  absl::StatusOr<skerry::v1::GetRunResponse> run = client.Get(run_id);
  if (!run.ok()) return ReportError(run.status(), io);
  auto history = client.History(run_id, std::nullopt);
  if (!history.ok()) return ReportError(history.status(), io);
  *io.out << FormatRunDetails(*run) << "\n"
          << FormatGenerationTable(*history, run->run().objective(),
                                   all_rows ? 0 : kDefaultHistoryRows)
          << FormatMetricMeans(*history, all_rows ? 0 : kDefaultHistoryRows);
  return kExitOk;
}

int HistoryCommand(RunClient& client, uint64_t run_id,
                   std::optional<uint32_t> island, Io& io) {
  auto history = client.History(run_id, island);
  if (!history.ok()) return ReportError(history.status(), io);
  *io.out << FormatHistory(*history) << FormatMetricMeans(*history);
  return kExitOk;
}

int DigestCommand(RunClient& client, uint64_t run_id, Io& io) {
  absl::StatusOr<skerry::v1::DigestResponse> digest = client.Digest(run_id);
  if (!digest.ok()) return ReportError(digest.status(), io);
  *io.out << digest->sha256() << "  " << FormatCount(digest->genomes())
          << " genomes\n";
  return kExitOk;
}

int SteerCommand(RunClient& client, uint64_t run_id, absl::string_view action,
                 Io& io) {
  absl::StatusOr<RunSummary> run;
  if (action == "pause") {
    run = client.Pause(run_id);
  } else if (action == "resume") {
    run = client.Resume(run_id);
  } else {
    run = client.Stop(run_id);
  }
  if (!run.ok()) return ReportError(run.status(), io);
  *io.out << "run " << run->id() << " " << RunStateName(run->state()) << "\n";
  return kExitOk;
}

namespace {

// The values given to --token, so that no error ever echoes them.
std::vector<std::string> TokenArguments(const std::vector<std::string>& args) {
  std::vector<std::string> out;
  for (size_t i = 0; i < args.size(); ++i) {
    if (args[i] == "--token" && i + 1 < args.size()) out.push_back(args[i + 1]);
    if (absl::StartsWith(args[i], "--token=")) out.push_back(args[i].substr(8));
  }
  return out;
}

// The token (flag, file, environment, config file) and TLS files (flag, else
// environment) of this invocation.
absl::StatusOr<worker::ClientSecurity> Security(const ParsedArgs& args,
                                                Io& io) {
  const worker::Getenv getenv =
      io.getenv ? io.getenv : worker::ProcessEnvironment();
  absl::StatusOr<worker::ResolvedToken> token = worker::ResolveToken(
      args.Global("token"), args.Global("token-file"), getenv);
  if (!token.ok()) return token.status();
  if (!token->warning.empty()) *io.err << "skerry: " << token->warning << "\n";
  io.secrets.push_back(token->token);
  worker::ClientSecurity s;
  s.token = token->token;
  auto pick = [&](const char* option, const char* env) {
    std::string v = args.Global(option);
    return v.empty() ? getenv(env) : v;
  };
  s.tls_ca_file = pick("tls-ca", "SKERRY_TLS_CA");
  s.tls_cert_file = pick("tls-cert", "SKERRY_TLS_CERT");
  s.tls_key_file = pick("tls-key", "SKERRY_TLS_KEY");
  s.tls_server_name = args.Global("tls-server-name");
  return s;
}

}  // namespace

int RunCli(const std::vector<std::string>& args,
           absl::string_view env_coordinator, const ClientFactory& factory,
           Io& io) {
  io.secrets = TokenArguments(args);
  absl::StatusOr<ParsedArgs> parsed = ParseArgs(args, env_coordinator);
  if (!parsed.ok()) {
    // Name the command for the `--help` hint when it is a known one.
    std::string command;
    for (const std::string& arg : args) {
      if (FindCommand(arg) != nullptr) {
        command = arg;
        break;
      }
    }
    return UsageFailure(parsed.status(), command, io);
  }
  if (parsed->help || parsed->command == "help") return Help(*parsed, io);
  if (parsed->command == "version") {
    *io.out << VersionLine("skerry");
    return 0;
  }
  SetCallTimeout(absl::ZeroDuration());
  if (!parsed->Global("timeout").empty()) {
    absl::StatusOr<uint32_t> seconds =
        ParseBoundedUint("--timeout", parsed->Global("timeout"), 1, 3600);
    if (!seconds.ok()) return UsageFailure(seconds.status(), "", io);
    SetCallTimeout(absl::Seconds(*seconds));
  }
  if (parsed->command == "local") {
    if (!io.run_local) {
      *io.err << "skerry: local: this program was built without the embedded "
                 "coordinator\n";
      return kExitUsage;
    }
    return io.run_local(*parsed, io);
  }
  absl::StatusOr<worker::ClientSecurity> security = Security(*parsed, io);
  if (!security.ok()) return UsageFailure(security.status(), "", io);
  const std::string& target = parsed->coordinator;
  auto channel = [&]() { return CoordinatorChannel(target, *security); };
  if (parsed->command == "archive" || parsed->command == "import") {
    absl::StatusOr<std::shared_ptr<grpc::Channel>> ch = channel();
    if (!ch.ok()) return UsageFailure(ch.status(), "", io);
    auto runs = skerry::v1::RunService::NewStub(*ch);
    return parsed->command == "archive" ? ArchiveCommand(*parsed, *runs, io)
                                        : ImportCommand(*parsed, *runs, io);
  }
  if (IsLineageCommand(parsed->command) || parsed->command == "backup" ||
      IsAccessCommand(parsed->command) ||
      IsValidationCommand(parsed->command) || parsed->command == "report" ||
      parsed->command == "workers" || parsed->command == "extend" ||
      (parsed->command == "submit" && parsed->Has("seeds"))) {
    absl::StatusOr<std::shared_ptr<grpc::Channel>> ch = channel();
    if (!ch.ok()) return UsageFailure(ch.status(), "", io);
    if (IsLineageCommand(parsed->command)) {
      LineageStubFactory lineage = [&ch](const std::string&) {
        return skerry::v1::LineageService::NewStub(*ch);
      };
      return LineageCommand(*parsed, lineage, TerminalConfirm(), io);
    }
    if (parsed->command == "backup") {
      auto admin = skerry::v1::AdminService::NewStub(*ch);
      return BackupCommand(*parsed, *admin, io);
    }
    if (parsed->command == "extend" || parsed->command == "submit") {
      auto study = skerry::v1::StudyService::NewStub(*ch);
      return parsed->command == "extend"
                 ? ExtendCommand(*parsed, *study, io)
                 : SubmitSeriesCommand(*parsed, *study, io);
    }
    if (parsed->command == "workers") {
      auto admin = skerry::v1::AdminService::NewStub(*ch);
      return WorkersCommand(*parsed, *admin, io);
    }
    if (parsed->command == "report" && NamesASeries(parsed->positionals)) {
      RunClient client(skerry::v1::RunService::NewStub(*ch), target);
      return ReportComparisonCommand(*parsed, client, io);
    }
    if (parsed->command == "report") {
      auto runs = skerry::v1::RunService::NewStub(*ch);
      auto lineage = skerry::v1::LineageService::NewStub(*ch);
      return ReportCommand(*parsed, *runs, *lineage, io);
    }
    if (IsValidationCommand(parsed->command)) {
      auto validation = skerry::v1::ValidationService::NewStub(*ch);
      return ValidationCommand(*parsed, *validation, io);
    }
    auto access = skerry::v1::AccessService::NewStub(*ch);
    return AccessCommand(*parsed, *access, target, io);
  }
  std::unique_ptr<RunClient> client = factory(target, *security);
  if (client == nullptr) return kExitUsage;
  return Dispatch(*parsed, *client, io);
}

}  // namespace skerry::cli
