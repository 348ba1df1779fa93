// The handlers of the command table (cli/args.h): RunCli parses the command
// line, looks the command up in Commands() and runs its handler, so the table
// is the one list that dispatch, `skerry help` and usage errors come from.
// Each handler makes the client or stub its command needs, checks the
// command's own arguments (usage errors: exit 2) and calls the command.
//
// Invariant: a handler runs only for a ParsedArgs that ParseArgs accepted for
// a command whose table row names that handler; `context.security` is filled
// when the row's reach is CommandReach::kCoordinator.
//
// Thread safety: as cli/commands.h, one command at a time per Io.
#ifndef SKERRY_CLI_HANDLERS_H_
#define SKERRY_CLI_HANDLERS_H_

#include "cli/args.h"
#include "cli/commands.h"

namespace skerry::cli {

// What a handler gets: the parsed command line, the streams, and how to reach
// the coordinator.
struct CommandContext {
  const ParsedArgs& args;
  Io& io;
  const ClientFactory& factory;  // RunClient: a gRPC stub, or a test's mock
  worker::ClientSecurity security;
};

// RunService through the factory (tests give a mock).
int SubmitHandler(CommandContext& context);  // --seeds: StudyService
int ForkHandler(CommandContext& context);
int DeleteHandler(CommandContext& context);
int ListHandler(CommandContext& context);
int ShowHandler(CommandContext& context);
int WatchHandler(CommandContext& context);
int SteerHandler(CommandContext& context);  // pause, resume, stop
int PriorityHandler(CommandContext& context);
int ChampionHandler(CommandContext& context);
int NetworkHandler(CommandContext& context);
int HistoryHandler(CommandContext& context);
int DigestHandler(CommandContext& context);
int SeriesHandler(CommandContext& context);
int CompareHandler(CommandContext& context);
// The other services, over a channel of their own.
int BackupHandler(CommandContext& context);
int ArchiveHandler(CommandContext& context);  // RunService, a stub of its own
int ImportHandler(CommandContext& context);
int ExtendHandler(CommandContext& context);
int WorkersHandler(CommandContext& context);
int ReportHandler(CommandContext& context);
int LineageHandler(CommandContext& context);  // every lineage command
int TokenHandler(CommandContext& context);
int AuditHandler(CommandContext& context);
int WhoAmIHandler(CommandContext& context);
int ValidateHandler(CommandContext& context);
int ValidationsHandler(CommandContext& context);
// No coordinator of the command line's.
int LocalHandler(CommandContext& context);
int HelpHandler(CommandContext& context);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_HANDLERS_H_
