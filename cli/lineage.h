// The lineage commands of `skerry`: ancestors, descent, descendants,
// common-ancestor, coalescence, attribution. Each talks to LineageService
// (proto/skerry/v1/lineage.proto), prints text by default, protobuf's JSON
// mapping with --json (one message per line for the streamed queries), and
// Graphviz DOT with --dot (ancestors).
//
// A GENOME is written ID, #ID, RUN/ISLAND/GENERATION/SLOT (e.g. 3/0/12/5) or
// RUN/best (the run's champion); answers show both the id and the key.
//
// Large answers: when a streamed answer passes kConfirmRows genomes, nothing
// more is printed until the user agrees (a prompt on a terminal); without a
// terminal the command refuses unless --yes was given.
//
// Invariant: as for every command (cli/commands.h), failures are one line on
// io.err starting "skerry: " and an exit code; nothing throws or exits.
// Thread safety: one command at a time per Io.
#ifndef SKERRY_CLI_LINEAGE_H_
#define SKERRY_CLI_LINEAGE_H_

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "skerry/v1/lineage.grpc.pb.h"

namespace skerry::cli {

// Rows a streamed answer may print before the user is asked.
inline constexpr uint64_t kConfirmRows = 100'000;
// --dot without --depth draws this many generations.
inline constexpr uint32_t kDefaultDotDepth = 6;

// The command table entries, for args.cc.
std::vector<CommandSpec> LineageCommandSpecs();

// GENOME as above; InvalidArgument says what was expected.
absl::StatusOr<skerry::v1::GenomeRef> ParseGenomeRef(absl::string_view text);
// RUN/ISLAND/GENERATION or RUN/*/GENERATION (every island).
absl::StatusOr<skerry::v1::PopulationRef> ParsePopulationRef(
    absl::string_view text);

// Makes the lineage stub for a coordinator address.
using LineageStubFactory =
    std::function<std::unique_ptr<skerry::v1::LineageService::StubInterface>(
        const std::string& target)>;
// Asks the user a yes/no question; std::nullopt when nobody can answer (no
// terminal).
using Confirm = std::function<std::optional<bool>(const std::string& question)>;

// Asks on the terminal (stderr, reading stdin) when stdin is one; else
// std::nullopt.
Confirm TerminalConfirm();

// Runs one parsed lineage command; returns the exit code. `confirm_rows` is
// the size past which a streamed answer needs confirmation.
int LineageCommand(const ParsedArgs& args, const LineageStubFactory& factory,
                   const Confirm& confirm, Io& io,
                   uint64_t confirm_rows = kConfirmRows);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_LINEAGE_H_
