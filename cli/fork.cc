#include "cli/fork.h"

#include <cerrno>
#include <cstring>
#include <fstream>
#include <random>
#include <sstream>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "common/spec.h"

namespace skerry::cli {
namespace {

// Retries of a fork nothing answered (1 s, then 2 s apart), as `submit`.
constexpr int kForkRetries = 2;

std::string ForkRequestId() {
  std::random_device device;
  std::string id = "fork-";
  for (int i = 0; i < 4; ++i)
    absl::StrAppend(&id, absl::Hex(device(), absl::kZeroPad8));
  return id;
}

absl::StatusOr<std::string> ReadChanges(const std::string& path) {
  std::ifstream file(path, std::ios::binary);
  if (!file) {
    return absl::NotFoundError(absl::StrCat("--set-file: cannot read ", path,
                                            ": ", std::strerror(errno)));
  }
  std::ostringstream text;
  text << file.rdbuf();
  if (file.bad()) {
    return absl::DataLossError(absl::StrCat("--set-file: cannot read ", path,
                                            ": ", std::strerror(errno)));
  }
  return text.str();
}

}  // namespace

int ForkCommand(const ParsedArgs& args, RunClient& client, uint64_t run_id,
                Io& io, uint64_t* fork_id) {
  skerry::v1::ForkRunRequest request;
  request.set_run_id(run_id);
  absl::StatusOr<uint32_t> at =
      ParseBoundedUint("--at", args.Get("at"), 0, 0xFFFFFFFEu);
  if (!at.ok()) return UsageFailure(at.status(), "fork", io);
  request.set_generation(*at);
  std::string changes;
  if (args.Has("set-file")) {
    absl::StatusOr<std::string> text = ReadChanges(args.Get("set-file"));
    if (!text.ok()) return UsageFailure(text.status(), "fork", io);
    changes = *std::move(text);
    // Checked here too, to point at the file's own line and column.
    absl::StatusOr<skerry::v1::RunSpec> parsed =
        ParseSpecText(changes, args.Get("set-file"));
    if (!parsed.ok()) return UsageFailure(parsed.status(), "", io);
  }
  if (args.Has("set")) {
    absl::StatusOr<skerry::v1::RunSpec> parsed =
        ParseSpecText(args.Get("set"), "--set");
    if (!parsed.ok()) return UsageFailure(parsed.status(), "", io);
    if (!changes.empty() && changes.back() != '\n') changes += '\n';
    changes += args.Get("set");  // after the file's: --set wins
  }
  request.set_changes(changes);
  if (args.Has("priority")) {
    absl::StatusOr<uint32_t> n =
        ParseBoundedUint("--priority", args.Get("priority"), 1, 1000);
    if (!n.ok()) return UsageFailure(n.status(), "fork", io);
    request.set_priority(*n);
  }
  // One id per invocation, reused on retry: a fork that reached the
  // coordinator but whose answer was lost is not made twice.
  request.set_request_id(ForkRequestId());
  absl::StatusOr<skerry::v1::RunSummary> run = client.Fork(request);
  for (int retry = 0;
       retry < kForkRetries && !run.ok() && IsUnreachable(run.status());
       ++retry) {
    if (io.sleep) {
      io.sleep(absl::Seconds(1 << retry));
    } else {
      absl::SleepFor(absl::Seconds(1 << retry));
    }
    run = client.Fork(request);
  }
  if (!run.ok()) return ReportError(run.status(), io);
  *fork_id = run->id();
  *io.out << run->id() << "\n" << std::flush;
  return kExitOk;
}

}  // namespace skerry::cli
