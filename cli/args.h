// Command-line parsing for `skerry`: the command table (names, arguments,
// flags, help text, handler), the parser, and typed accessors for argument
// values. The table is the one list of commands: RunCli dispatches through
// each row's handler (cli/handlers.h), `skerry help` lists the rows, and
// usage errors name their flags and arguments.
//
// Invariant: a ParsedArgs returned by ParseArgs names a known command, carries
// every required positional argument and flag of that command, and only flags
// that command accepts (unless `help` is set, which wins over everything else).
//
// Thread safety: every function is pure; the command table is immutable.
#ifndef SKERRY_CLI_ARGS_H_
#define SKERRY_CLI_ARGS_H_

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace skerry::cli {

inline constexpr char kDefaultCoordinator[] = "127.0.0.1:7431";
inline constexpr char kCoordinatorEnv[] = "SKERRY_COORDINATOR";

struct FlagSpec {
  const char* name;   // without the leading "--"
  const char* value;  // placeholder for the value; nullptr for a switch
  const char* help;
  bool required = false;
};

struct CommandContext;  // what a handler is given: cli/handlers.h
// Runs a parsed command; returns the process's exit code (cli/commands.h).
using CommandHandler = int (*)(CommandContext& context);

// What a command needs before its handler runs.
enum class CommandReach {
  kCoordinator,  // a checked --coordinator address, the token and TLS files
  kEmbedded,     // a coordinator of its own (`local`): the call timeout only
  kNone,         // nothing (`help`)
};

struct CommandSpec {
  const char* name;
  // Positional argument names; a name in brackets ("[COMMAND]") is optional.
  std::vector<const char*> positionals;
  std::vector<FlagSpec> flags;
  const char* summary;               // one line, for `skerry help`
  const char* details;               // a paragraph, for `skerry COMMAND --help`
  CommandHandler handler = nullptr;  // every row has one (ArgsTest checks)
  CommandReach reach = CommandReach::kCoordinator;
};

// Every command, in the order `skerry help` lists them.
const std::vector<CommandSpec>& Commands();
// nullptr when there is no such command.
const CommandSpec* FindCommand(absl::string_view name);

// Options every command takes, before or after its name. Their values go to
// ParsedArgs::global, keyed by name without "--".
// After the command, a command's own flag of the same name wins (`validate
// --timeout` is how long it waits for the validation).
inline constexpr const char* kGlobalOptions[] = {
    "coordinator", "token",   "token-file",      "tls-ca",
    "tls-cert",    "tls-key", "tls-server-name", "timeout"};

struct ParsedArgs {
  std::string coordinator;  // HOST:PORT, already checked
  // --token, --token-file, --tls-ca, --tls-cert, --tls-key, --tls-server-name,
  // --timeout when given.
  std::map<std::string, std::string> global;
  std::string command;  // a name from Commands()
  std::vector<std::string> positionals;
  std::map<std::string, std::string> flags;  // a switch maps to ""
  bool help = false;  // --help given: print the command's help, do nothing else

  bool Has(absl::string_view flag) const;
  // The flag's value, or "" when absent.
  std::string Get(absl::string_view flag) const;
  // A global option's value, or "" when absent.
  std::string Global(absl::string_view option) const;
};

// Parses argv without argv[0]. `env_coordinator` is the value of
// SKERRY_COORDINATOR ("" when unset). InvalidArgument says what is wrong, in
// words fit for the user.
absl::StatusOr<ParsedArgs> ParseArgs(const std::vector<std::string>& args,
                                     absl::string_view env_coordinator);

// OK for "HOST:PORT" with a non-empty host and a port in [1, 65535].
absl::Status CheckCoordinatorAddress(absl::string_view address);

// A run id: a positive decimal integer.
absl::StatusOr<uint64_t> ParseRunId(absl::string_view text);

// A decimal integer in [min, max]; `what` names it in the error ("--workers").
absl::StatusOr<uint32_t> ParseBoundedUint(absl::string_view what,
                                          absl::string_view text, uint32_t min,
                                          uint32_t max);

// `skerry help`.
std::string GeneralHelp();
// `skerry COMMAND --help`.
std::string CommandHelp(const CommandSpec& command);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_ARGS_H_
