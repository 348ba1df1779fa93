#include "cli/args.h"

#include <algorithm>
#include <cstddef>

#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_replace.h"
#include "absl/strings/str_split.h"
#include "cli/access.h"
#include "cli/compare.h"
#include "cli/handlers.h"
#include "cli/lineage.h"
#include "cli/report.h"
#include "cli/series.h"
#include "cli/validate.h"
#include "cli/workers.h"
#include "common/host_port.h"
#include "worker/channel.h"

namespace skerry::cli {
namespace {

constexpr char kRunHelp[] = "RUN is a run id as `skerry list` shows it.";

std::vector<CommandSpec> MakeCommands() {
  return {
      {"submit",
       {"SPEC_FILE"},
       {{"watch", nullptr, "watch the run after submitting it"},
        {"priority", "N",
         "share of the workers against other runs, 1-1000 (default 1)"},
        {"seeds", "LIST",
         "submit one run per seed as a series, e.g. 1-20 or 1,3,5-7 (at most "
         "100)"},
        {"series", "NAME",
         "the series' name with --seeds (default: the spec's name, made "
         "unique)"}},
       "submit a run spec (protobuf text format); prints the run id; with "
       "--seeds LIST [--series NAME], one run per seed as a series",
       "Reads SPEC_FILE, checks it (syntax, then every field against its "
       "allowed range) and submits it to the coordinator. Prints the new run's "
       "id. While several runs have work waiting, each gets a share of the "
       "workers' tasks in proportion to its priority (docs/sharing.md). With "
       "--seeds, submits one run of the spec per seed, all or none, as a "
       "series (`skerry series`, `skerry compare`) and prints each run's id "
       "and seed.",
       SubmitHandler},
      {"fork",
       {"RUN"},
       {{"at", "GEN",
         "the generation whose populations the new run starts from", true},
        {"set", "TEXT",
         "spec changes in protobuf text format: 'ga { elites: 2 }'"},
        {"set-file", "FILE", "the same changes read from a file"},
        {"priority", "N", "share of the workers, 1-1000 (default: RUN's)"}},
       "start a new run from another run's populations at a generation",
       "Makes a new run (a fork) whose islands start from copies of RUN's "
       "genomes at generation GEN, with RUN's spec changed by --set and "
       "--set-file (they may not both name one field). Prints the new run's "
       "id. genome_length, objective, islands.count and the population sizes "
       "may not change. Without changes the fork repeats RUN from that "
       "generation on, genome for genome. Lineage commands follow a fork's "
       "genomes into RUN's. See docs/user-guide.md, \"fork\".",
       ForkHandler},
      {"delete",
       {"RUN"},
       {{"yes", nullptr, "confirm: the run's rows go for good", true}},
       "delete an ended run and everything stored of it",
       "Deletes RUN's rows from the coordinator's database: the run, its "
       "islands, genomes, statistics, validations and metrics (the audit log "
       "keeps its entries). Only a finished, stopped or failed run can be "
       "deleted, and not while forks of it exist. --yes is required. Take a "
       "copy first with `skerry backup RUN --to FILE` if you may want it "
       "back. The owner or an admin.",
       DeleteHandler},
      {"list",
       {},
       {},
       "list every run",
       "Lists every run, newest last.",
       ListHandler},
      {"show",
       {"RUN"},
       {{"all", nullptr, "print every generation, not only the last 20"}},
       "show a run: state, islands, champion, per-generation progress",
       "Shows a run's state, evaluation count, workers, each island's "
       "generation and best/mean score, the champion's score, then the best "
       "and mean score of each generation over all islands.",
       ShowHandler},
      {"watch",
       {"RUN"},
       {},
       "follow a run's progress until it ends",
       "Follows a run until it finishes, is stopped or fails, then prints its "
       "final state. On a terminal one progress line is redrawn in place; "
       "otherwise every update is printed on its own line. Keeps trying when "
       "the coordinator goes away for a while.",
       WatchHandler},
      {"pause",
       {"RUN"},
       {},
       "pause a run",
       "Pauses a run: no new work is "
       "handed out for it until it is resumed.",
       SteerHandler},
      {"resume",
       {"RUN"},
       {},
       "resume a paused run",
       "Resumes a paused run.",
       SteerHandler},
      {"priority",
       {"RUN", "N"},
       {},
       "change a run's priority (1 to 1000)",
       "Sets the run's priority, its weight in the fair share of the fleet: "
       "while several runs have work waiting, each gets tasks in proportion "
       "to its priority (docs/sharing.md). It applies from the next task "
       "handed out and is kept across restarts.",
       PriorityHandler},
      {"stop",
       {"RUN"},
       {},
       "stop a run for good",
       "Stops a run for good; its champion so far stays.",
       SteerHandler},
      {"champion",
       {"RUN"},
       {{"json", nullptr,
         "print as JSON (protobuf's JSON mapping of the genome)"},
        {"out", "FILE", "write to FILE instead of standard output"}},
       "print a run's best genome",
       "Prints the run's best genome: id, natural key (run/island/generation/"
       "slot), score and genes.",
       ChampionHandler},
      {"network",
       {"RUN"},
       {{"out", "FILE", "write the network to FILE (-o FILE)", true}},
       "export the champion's network as JSON",
       "Writes the run's champion as a network in the format of "
       "docs/network-format.md (pole evaluators), with the run, genome, score "
       "and evaluation seed as notes, to run it without Skerry.",
       NetworkHandler},
      {"history",
       {"RUN"},
       {{"island", "N", "only island N (default: every island)"}},
       "print per-generation statistics of a run",
       "Prints best, mean and worst score, diversity and evaluations of every "
       "generation of every island (or of one island).",
       HistoryHandler},
      {"digest",
       {"RUN"},
       {},
       "print a run's digest (SHA-256 over its genomes)",
       "Prints the SHA-256 digest of the run's genomes in natural-key order "
       "and "
       "how many genomes it covers. Two runs of one spec and seed have the "
       "same "
       "digest however many workers ran them and however often the "
       "coordinator restarted.",
       DigestHandler},
      {"backup",
       {"RUN"},
       {{"to", "FILE", "where to write the copy (must not exist)", true}},
       "copy the database, or one run, while the coordinator runs",
       "Writes a consistent copy of run RUN (or of the whole database, with "
       "RUN = all) to FILE on this machine, made while the coordinator keeps "
       "working. Restore by starting a coordinator on FILE: "
       "skerry-coordinator --db FILE.",
       BackupHandler},
      {"archive",
       {"RUN"},
       {{"to", "FILE", "where to write the run (must not exist)", true}},
       "write an ended run to a file, then delete it from the coordinator",
       "Writes RUN to FILE on this machine as a standalone database (as "
       "`skerry backup RUN`), reads FILE back and checks its SHA-256 against "
       "the coordinator's, and only then deletes RUN from the coordinator, "
       "provided nothing in it changed since the export. FILE is kept whatever "
       "happens after it is complete. The owner or an admin; audited. Bring "
       "it back with `skerry import FILE`.",
       ArchiveHandler},
      {"import",
       {"FILE"},
       {},
       "import the runs of an exported file into the running coordinator",
       "Sends FILE (from `skerry archive` or `skerry backup`, at most 64 MiB) "
       "to the coordinator, which adds its runs with new ids, lineage and "
       "forks intact, in one transaction. A file of a newer schema, or a "
       "damaged one, is refused and nothing is imported. Larger files: "
       "skerry-coordinator --db DB --import FILE, with the coordinator "
       "stopped. Admin; audited.",
       ImportHandler},
      {"local",
       {"SPEC_FILE"},
       {{"workers", "N", "number of in-process workers (1 thread each)", true},
        {"db", "FILE", "SQLite database file to keep the run in", true},
        {"http", "HOST:PORT",
         "also serve the live page (no tokens: keep HOST 127.0.0.1)"},
        {"sandbox", "MODE", "auto (default), bwrap or none: as skerry-worker"},
        {"evaluator-dirs", "DIRS",
         "with bwrap: folders programs may be seen in"}},
       "run a spec in one process: coordinator, workers (--http: live page)",
       "Starts a coordinator on FILE with no network listener, N in-process "
       "workers, submits SPEC_FILE, follows the run to its end, prints the "
       "champion and shuts everything down. With --http, the coordinator's "
       "live page is served on HOST:PORT until the run ends (its address is "
       "printed first). External evaluator programs run in the same sandbox "
       "as under skerry-worker (--sandbox auto: bubblewrap where it works, "
       "else a warning); they never see the database or the client's config "
       "folder. The --coordinator option is not used.",
       LocalHandler,
       CommandReach::kEmbedded},
      {"help",
       {"[COMMAND]"},
       {},
       "print help for every command, or for one",
       "Prints the list of commands, or the help of COMMAND.",
       HelpHandler,
       CommandReach::kNone},
  };
}

// Breaks `text` into lines of at most `width` columns at spaces.
std::string Wrap(absl::string_view text, size_t width) {
  std::string out;
  size_t column = 0;
  for (absl::string_view word : absl::StrSplit(text, ' ', absl::SkipEmpty())) {
    if (column > 0 && column + 1 + word.size() > width) {
      out += "\n";
      column = 0;
    } else if (column > 0) {
      out += " ";
      ++column;
    }
    absl::StrAppend(&out, word);
    column += word.size();
  }
  return out;
}

bool IsOptional(const char* positional) { return positional[0] == '['; }

const FlagSpec* FindFlag(const CommandSpec& command, absl::string_view name) {
  for (const FlagSpec& flag : command.flags) {
    if (name == flag.name) return &flag;
  }
  return nullptr;
}

absl::Status UsageError(absl::string_view command, absl::string_view what) {
  if (command.empty()) return absl::InvalidArgumentError(what);
  return absl::InvalidArgumentError(absl::StrCat(command, ": ", what));
}

// Splits "--name=value" into its parts; `value` is unset without "=".
struct FlagToken {
  std::string name;
  bool has_value = false;
  std::string value;
};
FlagToken SplitFlag(absl::string_view arg) {
  FlagToken token;
  arg.remove_prefix(2);
  size_t eq = arg.find('=');
  token.name = std::string(arg.substr(0, eq));
  if (eq != absl::string_view::npos) {
    token.has_value = true;
    token.value = std::string(arg.substr(eq + 1));
  }
  return token;
}

bool IsGlobal(absl::string_view name) {
  for (const char* g : kGlobalOptions) {
    if (name == g) return true;
  }
  return false;
}

// Stores a global option's value.
void SetGlobal(const std::string& name, const std::string& value,
               ParsedArgs* parsed) {
  if (name == "coordinator") {
    parsed->coordinator = value;
  } else {
    parsed->global[name] = value;
  }
}

// Parses the global options before the command; returns the command's index.
absl::StatusOr<size_t> ParseGlobal(const std::vector<std::string>& args,
                                   ParsedArgs* parsed) {
  size_t i = 0;
  for (; i < args.size(); ++i) {
    const std::string& arg = args[i];
    if (arg == "--help" || arg == "-h") {
      parsed->command = "help";
      return args.size();
    }
    if (arg == "--version") {
      parsed->command = "version";
      return args.size();
    }
    if (!absl::StartsWith(arg, "-")) break;
    FlagToken token = SplitFlag(arg);
    if (!absl::StartsWith(arg, "--") || !IsGlobal(token.name)) {
      // The name only: a mistyped --token=... must not echo its value.
      return UsageError(
          "", absl::StrCat("unknown option '", arg.substr(0, arg.find('=')),
                           "' (options before the command: --coordinator, "
                           "--token, --token-file, --tls-ca, --tls-cert, "
                           "--tls-key, --tls-server-name, --timeout, --help, "
                           "--version)"));
    }
    if (!token.has_value) {
      if (i + 1 >= args.size()) {
        return UsageError("", absl::StrCat("--", token.name, " needs a value"));
      }
      token.value = args[++i];
    }
    SetGlobal(token.name, token.value, parsed);
  }
  if (i >= args.size()) {
    return UsageError("", "no command given; `skerry help` lists them");
  }
  return i;
}

absl::Status ParseCommandArgs(const CommandSpec& command,
                              const std::vector<std::string>& args, size_t i,
                              ParsedArgs* parsed) {
  bool only_positionals = false;
  for (; i < args.size(); ++i) {
    // "-o FILE" is short for "--out FILE", for the commands that write files.
    const std::string arg =
        args[i] == "-o" && FindFlag(command, "out") != nullptr ? "--out"
                                                               : args[i];
    if (only_positionals || !absl::StartsWith(arg, "-") || arg == "-") {
      parsed->positionals.push_back(arg);
      continue;
    }
    if (arg == "--") {
      only_positionals = true;
      continue;
    }
    if (arg == "--help" || arg == "-h") {
      parsed->help = true;
      return absl::OkStatus();
    }
    if (!absl::StartsWith(arg, "--")) {
      return UsageError(command.name, absl::StrCat("unknown option '", arg,
                                                   "'; options start with --"));
    }
    FlagToken token = SplitFlag(arg);
    const FlagSpec* flag = FindFlag(command, token.name);
    bool global = flag == nullptr && IsGlobal(token.name);
    if (flag == nullptr && !global) {
      return UsageError(command.name,
                        absl::StrCat("unknown option '--", token.name, "'"));
    }
    bool takes_value = global || flag->value != nullptr;
    if (!takes_value && token.has_value) {
      return UsageError(command.name,
                        absl::StrCat("--", token.name, " takes no value"));
    }
    if (takes_value && !token.has_value) {
      if (i + 1 >= args.size()) {
        return UsageError(
            command.name,
            absl::StrCat("--", token.name, " needs a value", global ? "" : ": ",
                         global ? "" : flag->value));
      }
      token.value = args[++i];
    }
    if (global) {
      SetGlobal(token.name, token.value, parsed);
    } else {
      parsed->flags[token.name] = token.value;
    }
  }
  return absl::OkStatus();
}

absl::Status CheckComplete(const CommandSpec& command,
                           const ParsedArgs& parsed) {
  size_t required =
      std::count_if(command.positionals.begin(), command.positionals.end(),
                    [](const char* p) { return !IsOptional(p); });
  std::string expected = absl::StrJoin(command.positionals, " ");
  if (parsed.positionals.size() < required) {
    return UsageError(
        command.name,
        absl::StrCat("missing argument ",
                     command.positionals[parsed.positionals.size()],
                     " (usage: skerry ", command.name, " ", expected, ")"));
  }
  // A last positional written "[NAME...]" takes any number of values.
  const bool variadic = !command.positionals.empty() &&
                        absl::EndsWith(command.positionals.back(), "...]");
  if (!variadic && parsed.positionals.size() > command.positionals.size()) {
    return UsageError(
        command.name,
        absl::StrCat("unexpected argument '",
                     parsed.positionals[command.positionals.size()], "'",
                     expected.empty()
                         ? " (it takes none)"
                         : absl::StrCat(" (usage: skerry ", command.name, " ",
                                        expected, ")")));
  }
  for (const FlagSpec& flag : command.flags) {
    if (flag.required && !parsed.Has(flag.name)) {
      return UsageError(command.name, absl::StrCat("missing option --",
                                                   flag.name, " ", flag.value));
    }
  }
  return absl::OkStatus();
}

}  // namespace

const std::vector<CommandSpec>& Commands() {
  static const auto* commands = [] {
    auto* all = new std::vector<CommandSpec>(MakeCommands());
    // The lineage commands (cli/lineage.h), the access commands
    // (cli/access.h) and the validation commands (cli/validate.h) go before
    // `local` and `help`.
    std::vector<CommandSpec> more = LineageCommandSpecs();
    std::vector<CommandSpec> access = AccessCommandSpecs();
    more.insert(more.end(), access.begin(), access.end());
    std::vector<CommandSpec> validation = ValidationCommandSpecs();
    more.insert(more.end(), validation.begin(), validation.end());
    std::vector<CommandSpec> report = ReportCommandSpecs();
    more.insert(more.end(), report.begin(), report.end());
    std::vector<CommandSpec> series = SeriesCommandSpecs();
    more.insert(more.end(), series.begin(), series.end());
    std::vector<CommandSpec> compare = CompareCommandSpecs();
    more.insert(more.end(), compare.begin(), compare.end());
    std::vector<CommandSpec> workers = WorkersCommandSpecs();
    more.insert(more.end(), workers.begin(), workers.end());
    auto local = std::find_if(all->begin(), all->end(), [](const auto& c) {
      return absl::string_view(c.name) == "local";
    });
    all->insert(local, more.begin(), more.end());
    return all;
  }();
  return *commands;
}

const CommandSpec* FindCommand(absl::string_view name) {
  for (const CommandSpec& command : Commands()) {
    if (name == command.name) return &command;
  }
  return nullptr;
}

bool ParsedArgs::Has(absl::string_view flag) const {
  return flags.find(std::string(flag)) != flags.end();
}

std::string ParsedArgs::Get(absl::string_view flag) const {
  auto it = flags.find(std::string(flag));
  return it == flags.end() ? "" : it->second;
}

std::string ParsedArgs::Global(absl::string_view option) const {
  auto it = global.find(std::string(option));
  return it == global.end() ? "" : it->second;
}

absl::StatusOr<ParsedArgs> ParseArgs(const std::vector<std::string>& args,
                                     absl::string_view env_coordinator) {
  ParsedArgs parsed;
  parsed.coordinator = env_coordinator.empty() ? kDefaultCoordinator
                                               : std::string(env_coordinator);
  absl::StatusOr<size_t> start = ParseGlobal(args, &parsed);
  if (!start.ok()) return start.status();
  if (*start >= args.size()) return parsed;  // global --help
  const CommandSpec* command = FindCommand(args[*start]);
  if (command == nullptr) {
    return UsageError("", absl::StrCat("unknown command '", args[*start],
                                       "'; `skerry help` lists them"));
  }
  parsed.command = command->name;
  absl::Status status = ParseCommandArgs(*command, args, *start + 1, &parsed);
  if (!status.ok()) return status;
  if (parsed.help) return parsed;
  status = CheckComplete(*command, parsed);
  if (!status.ok()) return status;
  bool uses_network = command->reach == CommandReach::kCoordinator;
  status = uses_network ? CheckCoordinatorAddress(parsed.coordinator)
                        : absl::OkStatus();
  if (!status.ok()) {
    bool from_env =
        !env_coordinator.empty() && parsed.coordinator == env_coordinator;
    return UsageError(
        "", absl::StrCat(status.message(),
                         from_env ? " (from $SKERRY_COORDINATOR)" : ""));
  }
  return parsed;
}

// The worker's rule too (common/host_port.h): the CLI used to accept an
// unbracketed IPv6 address and a host with a space, which the worker refused.
absl::Status CheckCoordinatorAddress(absl::string_view address) {
  return ParseHostPort("coordinator address", address).status();
}

absl::StatusOr<uint64_t> ParseRunId(absl::string_view text) {
  uint64_t id = 0;
  bool digits =
      !text.empty() && std::all_of(text.begin(), text.end(),
                                   [](char c) { return c >= '0' && c <= '9'; });
  if (!digits || !absl::SimpleAtoi(text, &id) || id == 0) {
    return absl::InvalidArgumentError(absl::StrCat(
        "RUN must be a run id (a positive integer); got '", text, "'"));
  }
  return id;
}

absl::StatusOr<uint32_t> ParseBoundedUint(absl::string_view what,
                                          absl::string_view text, uint32_t min,
                                          uint32_t max) {
  uint32_t value = 0;
  bool digits =
      !text.empty() && std::all_of(text.begin(), text.end(),
                                   [](char c) { return c >= '0' && c <= '9'; });
  if (!digits || !absl::SimpleAtoi(text, &value) || value < min ||
      value > max) {
    return absl::InvalidArgumentError(
        absl::StrCat(what, " must be an integer in [", min, ", ", max,
                     "]; got '", text, "'"));
  }
  return value;
}

std::string GeneralHelp() {
  std::string help =
      "usage: skerry [--coordinator HOST:PORT] [--token-file FILE] COMMAND "
      "[ARGS...]\n\n"
      "The command-line client of a Skerry coordinator.\n\n"
      "Commands:\n";
  size_t width = 0;
  for (const CommandSpec& command : Commands()) {
    width = std::max(width, std::string(command.name).size());
  }
  for (const CommandSpec& command : Commands()) {
    std::string name = command.name;
    // Summaries wrap to stay within 80 columns, continued under themselves.
    const std::string indent(width + 4, ' ');
    const std::string summary = absl::StrReplaceAll(
        Wrap(command.summary, 80 - indent.size()), {{"\n", "\n" + indent}});
    absl::StrAppend(&help, "  ", name,
                    std::string(width + 2 - name.size(), ' '), summary, "\n");
  }
  absl::StrAppend(
      &help,
      "\nOptions:\n"
      "  --coordinator HOST:PORT  coordinator to talk to\n"
      "                           (default: $",
      kCoordinatorEnv, ", else ", kDefaultCoordinator,
      ")\n"
      "  --token TOKEN            bearer token (visible in the process list;\n"
      "                           prefer the next ones)\n"
      "  --token-file FILE        read the token from FILE (default: $",
      worker::kTokenEnv,
      ",\n"
      "                           else ~/.config/skerry/token, else none)\n"
      "  --tls-ca FILE            TLS: the CA of the coordinator's "
      "certificate\n"
      "                           (default: $SKERRY_TLS_CA; none: plaintext)\n"
      "  --tls-cert FILE          TLS client certificate and key, for a\n"
      "  --tls-key FILE           coordinator that checks clients\n"
      "                           (default: $SKERRY_TLS_CERT, "
      "$SKERRY_TLS_KEY)\n"
      "  --tls-server-name NAME   name to expect in the coordinator's "
      "certificate\n"
      "  --timeout SECONDS        how long each call, and each connection "
      "attempt,\n"
      "                           may take, 1-3600 (default: 30 s per call, "
      "20 s\n"
      "                           to connect; raise it on slow links)\n"
      "  --help                   this help; `skerry COMMAND --help` for one "
      "command\n"
      "  --version                print the version and exit\n\n"
      "Exit codes: 0 success, 1 the operation failed, 2 usage error or bad "
      "input,\n3 cannot reach the coordinator.\n");
  return help;
}

std::string CommandHelp(const CommandSpec& command) {
  // The usage line wraps at 80 columns, continued under the arguments.
  std::string usage = absl::StrCat("usage: skerry ", command.name);
  const std::string continued(std::min<size_t>(usage.size() + 1, 24), ' ');
  size_t column = usage.size();
  auto add = [&](const std::string& word) {
    if (column + 1 + word.size() > 80) {
      absl::StrAppend(&usage, "\n", continued, word);
      column = continued.size() + word.size();
    } else {
      absl::StrAppend(&usage, " ", word);
      column += 1 + word.size();
    }
  };
  for (const char* positional : command.positionals) add(positional);
  for (const FlagSpec& flag : command.flags) {
    std::string text = absl::StrCat("--", flag.name);
    if (flag.value != nullptr) absl::StrAppend(&text, " ", flag.value);
    add(flag.required ? text : "[" + text + "]");
  }
  std::string help =
      absl::StrCat(usage, "\n\n", Wrap(command.details, 78), "\n");
  if (!command.positionals.empty() &&
      std::string(command.positionals[0]) == "RUN") {
    absl::StrAppend(&help, kRunHelp, "\n");
  }
  if (!command.flags.empty()) absl::StrAppend(&help, "\nOptions:\n");
  for (const FlagSpec& flag : command.flags) {
    std::string text = absl::StrCat("--", flag.name);
    if (flag.value != nullptr) absl::StrAppend(&text, " ", flag.value);
    const size_t pad = text.size() < 14 ? 16 - text.size() : 2;
    const std::string indent(2 + text.size() + pad, ' ');
    absl::StrAppend(&help, "  ", text, std::string(pad, ' '),
                    absl::StrReplaceAll(Wrap(flag.help, 80 - indent.size()),
                                        {{"\n", "\n" + indent}}),
                    "\n");
  }
  return help;
}

}  // namespace skerry::cli
