// `skerry network RUN --out FILE`: the champion's network as a JSON file in
// the format of docs/network-format.md, with the run, the genome, its score
// and its evaluation seed as notes; and the evaluation seed `skerry champion`
// prints, so that a stochastic champion can be re-scored outside Skerry.
//
// Invariant: as for every command (cli/commands.h), failures are one line on
// io.err starting "skerry: " and an exit code; the file is written whole or
// not at all.
// Thread safety: one command at a time per Io and RunClient.
#ifndef SKERRY_CLI_NETWORK_COMMAND_H_
#define SKERRY_CLI_NETWORK_COMMAND_H_

#include <cstdint>
#include <string>

#include "cli/client.h"
#include "cli/commands.h"
#include "skerry/v1/genome.pb.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::cli {

// The seed the evaluator was given for `genome` (the same on every attempt):
// the run's random stream (seed, island, generation, evaluation seed, slot).
uint64_t GenomeEvalSeed(const skerry::v1::RunSpec& spec,
                        const skerry::v1::Genome& genome);

int NetworkCommand(RunClient& client, uint64_t run_id,
                   const std::string& out_path, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_NETWORK_COMMAND_H_
