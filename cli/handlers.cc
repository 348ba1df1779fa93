#include "cli/handlers.h"

#include <cstdint>
#include <memory>
#include <optional>
#include <utility>

#include "absl/strings/str_cat.h"
#include "cli/access.h"
#include "cli/archive.h"
#include "cli/backup.h"
#include "cli/compare.h"
#include "cli/compare_page.h"
#include "cli/fork.h"
#include "cli/housekeeping.h"
#include "cli/lineage.h"
#include "cli/network_command.h"
#include "cli/report.h"
#include "cli/series.h"
#include "cli/validate.h"
#include "cli/workers.h"
#include "skerry/v1/admin.grpc.pb.h"
#include "skerry/v1/study.grpc.pb.h"

namespace skerry::cli {
namespace {

// The factory's RunClient; nullptr once the factory has said why not.
std::unique_ptr<RunClient> MakeClient(CommandContext& c) {
  return c.factory(c.args.coordinator, c.security);
}

// Runs `command(client)`; exit 2 when there is no client.
template <typename Command>
int WithClient(CommandContext& c, Command&& command) {
  std::unique_ptr<RunClient> client = MakeClient(c);
  if (client == nullptr) return kExitUsage;
  return command(*client);
}

// Runs `command(client, run_id)` with RUN, the first argument; a usage error
// when it is not a run id.
template <typename Command>
int WithRun(CommandContext& c, Command&& command) {
  return WithClient(c, [&](RunClient& client) {
    absl::StatusOr<uint64_t> id = ParseRunId(c.args.positionals[0]);
    if (!id.ok()) return UsageFailure(id.status(), c.args.command, c.io);
    return command(client, *id);
  });
}

// Runs `command(channel)` over a channel of its own to the coordinator.
template <typename Command>
int WithChannel(CommandContext& c, Command&& command) {
  absl::StatusOr<std::shared_ptr<grpc::Channel>> channel =
      CoordinatorChannel(c.args.coordinator, c.security);
  if (!channel.ok()) return UsageFailure(channel.status(), "", c.io);
  return command(*channel);
}

// A bounded number from a flag or argument: a usage error when out of range.
std::optional<uint32_t> Bounded(CommandContext& c, absl::string_view what,
                                absl::string_view text, uint32_t min,
                                uint32_t max, int* exit_code) {
  absl::StatusOr<uint32_t> n = ParseBoundedUint(what, text, min, max);
  if (!n.ok()) {
    *exit_code = UsageFailure(n.status(), c.args.command, c.io);
    return std::nullopt;
  }
  return *n;
}

}  // namespace

int SubmitHandler(CommandContext& c) {
  const ParsedArgs& args = c.args;
  if (args.Has("seeds")) {
    return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
      auto study = skerry::v1::StudyService::NewStub(ch);
      return SubmitSeriesCommand(args, *study, c.io);
    });
  }
  return WithClient(c, [&](RunClient& client) {
    if (args.Has("series")) {
      return UsageFailure(absl::InvalidArgumentError(
                              "--series: names a series, so it goes with "
                              "--seeds LIST"),
                          args.command, c.io);
    }
    uint32_t priority = 0;
    if (args.Has("priority")) {
      // The bounds of scheduler::kMinWeight and kMaxWeight.
      int code = kExitOk;
      std::optional<uint32_t> n =
          Bounded(c, "--priority", args.Get("priority"), 1, 1000, &code);
      if (!n.has_value()) return code;
      priority = *n;
    }
    uint64_t run_id = 0;
    int code =
        SubmitCommand(client, args.positionals[0], c.io, &run_id, priority);
    if (code != kExitOk || !args.Has("watch")) return code;
    return WatchCommand(client, run_id, c.io);
  });
}

int ForkHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    uint64_t fork_id = 0;
    return ForkCommand(c.args, client, run_id, c.io, &fork_id);
  });
}

int DeleteHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    return DeleteCommand(client, run_id, c.io);
  });
}

int ListHandler(CommandContext& c) {
  return WithClient(
      c, [&](RunClient& client) { return ListCommand(client, c.io); });
}

int ShowHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    return ShowCommand(client, run_id, c.args.Has("all"), c.io);
  });
}

int WatchHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    return WatchCommand(client, run_id, c.io);
  });
}

int SteerHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    return SteerCommand(client, run_id, c.args.command, c.io);
  });
}

int PriorityHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    int code = kExitOk;
    std::optional<uint32_t> n =
        Bounded(c, "PRIORITY", c.args.positionals[1], 1, 1000, &code);
    if (!n.has_value()) return code;
    absl::StatusOr<skerry::v1::RunSummary> run = client.SetPriority(run_id, *n);
    if (!run.ok()) return ReportError(run.status(), c.io);
    *c.io.out << "run " << run->id() << " priority " << run->priority() << "\n";
    return kExitOk;
  });
}

int ChampionHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    return ChampionCommand(client, run_id, c.args.Has("json"),
                           c.args.Get("out"), c.io);
  });
}

int NetworkHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    return NetworkCommand(client, run_id, c.args.Get("out"), c.io);
  });
}

int HistoryHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    std::optional<uint32_t> island;
    if (c.args.Has("island")) {
      int code = kExitOk;
      island = Bounded(c, "--island", c.args.Get("island"), 0, 255, &code);
      if (!island.has_value()) return code;
    }
    return HistoryCommand(client, run_id, island, c.io);
  });
}

int DigestHandler(CommandContext& c) {
  return WithRun(c, [&](RunClient& client, uint64_t run_id) {
    return DigestCommand(client, run_id, c.io);
  });
}

int SeriesHandler(CommandContext& c) {
  return WithClient(c, [&](RunClient& client) {
    return SeriesCommand(c.args, client, c.io);
  });
}

int CompareHandler(CommandContext& c) {
  return WithClient(c, [&](RunClient& client) {
    return CompareCommand(c.args, client, c.io);
  });
}

int BackupHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto admin = skerry::v1::AdminService::NewStub(ch);
    return BackupCommand(c.args, *admin, c.io);
  });
}

int ArchiveHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto runs = skerry::v1::RunService::NewStub(ch);
    return ArchiveCommand(c.args, *runs, c.io);
  });
}

int ImportHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto runs = skerry::v1::RunService::NewStub(ch);
    return ImportCommand(c.args, *runs, c.io);
  });
}

int ExtendHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto study = skerry::v1::StudyService::NewStub(ch);
    return ExtendCommand(c.args, *study, c.io);
  });
}

int WorkersHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto admin = skerry::v1::AdminService::NewStub(ch);
    return WorkersCommand(c.args, *admin, c.io);
  });
}

int ReportHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    if (NamesASeries(c.args.positionals)) {
      RunClient client(skerry::v1::RunService::NewStub(ch), c.args.coordinator);
      return ReportComparisonCommand(c.args, client, c.io);
    }
    auto runs = skerry::v1::RunService::NewStub(ch);
    auto lineage = skerry::v1::LineageService::NewStub(ch);
    return ReportCommand(c.args, *runs, *lineage, c.io);
  });
}

int LineageHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    LineageStubFactory lineage = [&ch](const std::string&) {
      return skerry::v1::LineageService::NewStub(ch);
    };
    return LineageCommand(c.args, lineage, TerminalConfirm(), c.io);
  });
}

int TokenHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto access = skerry::v1::AccessService::NewStub(ch);
    return TokenCommand(c.args, *access, c.args.coordinator, c.io);
  });
}

int AuditHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto access = skerry::v1::AccessService::NewStub(ch);
    return AuditCommand(c.args, *access, c.args.coordinator, c.io);
  });
}

int WhoAmIHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto access = skerry::v1::AccessService::NewStub(ch);
    return WhoAmICommand(*access, c.args.coordinator, c.io);
  });
}

int ValidateHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto validation = skerry::v1::ValidationService::NewStub(ch);
    return ValidateGenomeCommand(c.args, *validation, c.io);
  });
}

int ValidationsHandler(CommandContext& c) {
  return WithChannel(c, [&](const std::shared_ptr<grpc::Channel>& ch) {
    auto validation = skerry::v1::ValidationService::NewStub(ch);
    return ValidationsCommand(c.args, *validation, c.io);
  });
}

int LocalHandler(CommandContext& c) {
  if (!c.io.run_local) {
    *c.io.err << "skerry: local: this program was built without the "
                 "embedded coordinator\n";
    return kExitUsage;
  }
  return c.io.run_local(c.args, c.io);
}

int HelpHandler(CommandContext& c) {
  if (c.args.positionals.empty()) {  // also `skerry help --help`
    *c.io.out << GeneralHelp();
    return kExitOk;
  }
  const CommandSpec* command = FindCommand(c.args.positionals[0]);
  if (command == nullptr) {
    return UsageFailure(
        absl::InvalidArgumentError(absl::StrCat("help: unknown command '",
                                                c.args.positionals[0], "'")),
        "help", c.io);
  }
  *c.io.out << CommandHelp(*command);
  return kExitOk;
}

}  // namespace skerry::cli
