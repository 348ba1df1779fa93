// `skerry local`: a whole deployment in one process. Starts a coordinator on a
// database file with no network listener, N in-process workers (one evaluation
// thread each) talking to it over in-process channels, submits a spec, follows
// the run to its end, prints the champion and shuts everything down.
//
// Invariant: whatever happens after the coordinator started, every worker is
// stopped and joined and the coordinator shut down before LocalCommand returns.
// Thread safety: call from one thread; it starts and joins its own threads.
#ifndef SKERRY_CLI_LOCAL_H_
#define SKERRY_CLI_LOCAL_H_

#include "cli/args.h"
#include "cli/commands.h"

namespace skerry::cli {

// Most workers `local` starts.
inline constexpr uint32_t kMaxLocalWorkers = 256;

// `args` is a parsed `local` command. Returns the exit code.
int LocalCommand(const ParsedArgs& args, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_LOCAL_H_
