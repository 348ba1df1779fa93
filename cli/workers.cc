#include "cli/workers.h"

#include <chrono>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "cli/format.h"
#include "cli/handlers.h"
#include "grpcpp/grpcpp.h"
#include "server/api/grpc_status.h"

namespace skerry::cli {

std::vector<CommandSpec> WorkersCommandSpecs() {
  return {
      {"workers",
       {},
       {{"limit", "N", "at most N workers, seen last first (default 1000)"},
        {"json", nullptr, "print as JSON (protobuf's JSON mapping)"}},
       "list the workers",
       "Lists every worker the coordinator knows, seen last first: id, name, "
       "host, threads, the built-in evaluators it runs, version, when it was "
       "last seen, tasks leased to it now, evaluations per second (since the "
       "coordinator started) and how it sandboxes external evaluators. Each "
       "start of a worker is a new id.",
       WorkersHandler},
  };
}

std::string FormatWorkerList(const skerry::v1::ListWorkersResponse& workers,
                             absl::TimeZone zone) {
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::WorkerInfo& w : workers.workers()) {
    rows.push_back({absl::StrCat(w.id()), w.name(), w.host(),
                    absl::StrCat(w.threads()),
                    absl::StrJoin(w.evaluators(), ","), w.version(),
                    FormatTimestamp(w.last_seen_unix_ms(), zone),
                    absl::StrCat(w.tasks_in_flight()),
                    absl::StrFormat("%.1f", w.evaluations_per_second()),
                    w.sandbox().empty() ? "-" : w.sandbox()});
  }
  return FormatTable({"ID", "NAME", "HOST", "THREADS", "EVALUATORS", "VERSION",
                      "LAST SEEN", "IN FLIGHT", "EVALS/S", "SANDBOX"},
                     rows, {0, 3, 7, 8});
}

int WorkersCommand(const ParsedArgs& args,
                   skerry::v1::AdminService::StubInterface& admin, Io& io) {
  skerry::v1::ListWorkersRequest req;
  if (args.Has("limit")) {
    absl::StatusOr<uint32_t> limit =
        ParseBoundedUint("--limit", args.Get("limit"), 1, 10000);
    if (!limit.ok()) return UsageFailure(limit.status(), "workers", io);
    req.set_limit(*limit);
  }
  grpc::ClientContext ctx;
  ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
  skerry::v1::ListWorkersResponse resp;
  grpc::Status s = admin.ListWorkers(&ctx, req, &resp);
  if (!s.ok()) {
    absl::Status status = api::FromGrpc(s);
    return ReportError(
        absl::Status(status.code(),
                     absl::StrCat("ListWorkers: ", status.message())),
        io);
  }
  if (args.Has("json")) return PrintJson(resp, io);
  if (resp.workers().empty()) {
    *io.out << "no worker has joined this coordinator\n";
    return kExitOk;
  }
  *io.out << FormatWorkerList(resp, io.zone);
  return kExitOk;
}

}  // namespace skerry::cli
