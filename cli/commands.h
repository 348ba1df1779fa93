// The commands of `skerry`: each takes a RunClient and an Io, prints what the
// user asked for on io.out, errors on io.err, and returns the exit code.
// RunCli parses the arguments and runs the command's handler from the command
// table (cli/handlers.h); main.cc only builds the channel.
//
// Invariant: a command never exits the process and never throws; every failure
// is one line on io.err starting "skerry: " and a non-zero exit code:
// 1 the operation failed (server refused, run failed, file not written),
// 2 usage error or bad input (arguments, spec file), 3 no coordinator answered.
//
// Thread safety: one command at a time per Io and RunClient.
#ifndef SKERRY_CLI_COMMANDS_H_
#define SKERRY_CLI_COMMANDS_H_

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <ostream>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "cli/args.h"
#include "cli/client.h"
#include "google/protobuf/message.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::cli {

inline constexpr int kExitOk = 0;
inline constexpr int kExitFailure = 1;
inline constexpr int kExitUsage = 2;
inline constexpr int kExitUnreachable = 3;

// Consecutive times `watch` reconnects to a coordinator that went away before
// giving up, and the cap on the wait between tries (doubling from 1 s).
inline constexpr int kWatchRetries = 60;
inline constexpr absl::Duration kWatchMaxBackoff = absl::Seconds(5);

struct Io {
  std::ostream* out = nullptr;
  std::ostream* err = nullptr;
  bool interactive = false;  // out is a terminal: redraw progress in place
  absl::TimeZone zone = absl::UTCTimeZone();
  // How `watch` waits between reconnections; absl::SleepFor when empty.
  std::function<void(absl::Duration)> sleep;
  // Reads the environment (SKERRY_TOKEN, SKERRY_TLS_*, HOME); the process
  // environment when empty.
  worker::Getenv getenv;
  // Texts never to print (the caller's token): ReportError and usage errors
  // replace them, and anything shaped like a token, with "[hidden]".
  std::vector<std::string> secrets;
  // `skerry local` (cli/local.h, library skerry_cli_local): the one seam
  // through which the client embeds a coordinator and workers. main sets it;
  // left empty, `local` says this program cannot run one.
  std::function<int(const ParsedArgs&, Io&)> run_local;
};

// `text` with every secret of `io`, and every "skt_" token, hidden.
std::string Redact(const std::string& text, const Io& io);

// Makes the client for a coordinator address with the caller's token and TLS
// files (main: a gRPC channel; tests: a mock stub). nullptr when the channel
// cannot be made; the factory says why on `err`.
using ClientFactory = std::function<std::unique_ptr<RunClient>(
    const std::string& target, const worker::ClientSecurity& security)>;

// The whole CLI: `args` is argv without argv[0]; `env_coordinator` the value
// of SKERRY_COORDINATOR ("" when unset). Returns the exit code.
int RunCli(const std::vector<std::string>& args,
           absl::string_view env_coordinator, const ClientFactory& factory,
           Io& io);

// A spec file read, parsed and checked; `spec` as written (the coordinator
// fills the defaults itself), `text` as read.
struct LoadedSpec {
  skerry::v1::RunSpec spec;
  std::string text;
};
// InvalidArgument "FILE:LINE:COLUMN: ..." for syntax, "FILE: FIELD: ..." for a
// bad field; NotFound when the file cannot be read.
absl::StatusOr<LoadedSpec> LoadSpecFile(const std::string& path);

// Prints a usage error and the `--help` hint for `command`; returns 2.
int UsageFailure(const absl::Status& status, absl::string_view command, Io& io);

// Protobuf's JSON mapping of `m`, one line ending in "\n"; Internal when it
// cannot be encoded.
absl::StatusOr<std::string> MessageJson(const google::protobuf::Message& m);
// MessageJson(m) on io.out; returns 0, or 1 after printing why it could not.
int PrintJson(const google::protobuf::Message& m, Io& io);

// Prints `status` on io.err; returns 3 when no coordinator answered, else 1.
int ReportError(const absl::Status& status, Io& io);

// Submits the spec and prints the new run's id; stores it in *run_id.
// `priority` 0: the coordinator's default.
int SubmitCommand(RunClient& client, const std::string& spec_path, Io& io,
                  uint64_t* run_id, uint32_t priority = 0);
// Follows the run to its end and prints the final state (exit 1 if it failed).
int WatchCommand(RunClient& client, uint64_t run_id, Io& io);
// Prints the champion (text, or JSON), to io.out or to `out_path`.
int ChampionCommand(RunClient& client, uint64_t run_id, bool json,
                    const std::string& out_path, Io& io);
int ListCommand(RunClient& client, Io& io);
int ShowCommand(RunClient& client, uint64_t run_id, bool all_rows, Io& io);
int HistoryCommand(RunClient& client, uint64_t run_id,
                   std::optional<uint32_t> island, Io& io);
// Prints the run's reproducibility digest: "SHA256  GENOMES genomes".
int DigestCommand(RunClient& client, uint64_t run_id, Io& io);
// `action` is "pause", "resume" or "stop".
int SteerCommand(RunClient& client, uint64_t run_id, absl::string_view action,
                 Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_COMMANDS_H_
