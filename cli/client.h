// RunClient: the CLI's typed view of RunService. Every unary call carries a
// deadline; the watch stream has none (a run may last days). gRPC statuses are
// turned into absl::Status here and nowhere else in the CLI, with the same code
// and a message naming the call and the coordinator.
//
// Invariant: the stub is owned for the client's lifetime; calls never throw.
// Thread safety: one RunClient may be used from one thread at a time.
#ifndef SKERRY_CLI_CLIENT_H_
#define SKERRY_CLI_CLIENT_H_

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "grpcpp/channel.h"
#include "grpcpp/support/status.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "worker/channel.h"

namespace skerry::cli {

struct ClientOptions {
  absl::Duration deadline = absl::Seconds(30);  // per unary call
  uint32_t watch_interval_ms = 500;             // minimum gap between updates
};

// The per-call timeout chosen by `--timeout SECONDS` for this invocation
// (zero: none chosen). RunCli sets it before any call is made; every unary
// call's deadline is CallDeadline(its own default), and channels allow a
// connection attempt as long. The CLI runs one command per process.
void SetCallTimeout(absl::Duration timeout);
absl::Duration CallTimeout();
// `fallback` unless --timeout was given.
absl::Duration CallDeadline(absl::Duration fallback);

// The status a failed call becomes: same code; message "CALL: MESSAGE", and
// for UNAVAILABLE or DEADLINE_EXCEEDED one saying the coordinator at `target`
// could not be reached.
absl::Status FromGrpc(const grpc::Status& status, absl::string_view call,
                      absl::string_view target);

// The same as server/api/grpc_status.h's: the details of an UNAVAILABLE the
// coordinator itself sent.
inline constexpr char kAnsweredUnavailable[] = "skerry-coordinator-answered";
// The payload FromGrpc puts on such a status.
inline constexpr char kAnsweredPayload[] = "skerry.dev/answered";

// True for the codes that mean "no coordinator answered" (exit code 3); false
// for an UNAVAILABLE the coordinator answered (storage trouble: exit code 1).
bool IsUnreachable(const absl::Status& status);

// The channel to a coordinator at HOST:PORT with the caller's token and TLS
// files (worker/channel.h makes it; errors never contain the token).
absl::StatusOr<std::shared_ptr<grpc::Channel>> CoordinatorChannel(
    const std::string& target, const worker::ClientSecurity& security);

class RunClient {
 public:
  // `target` is only used in messages ("127.0.0.1:7431", "in-process").
  RunClient(std::unique_ptr<skerry::v1::RunService::StubInterface> stub,
            std::string target, ClientOptions options = {});

  const std::string& target() const { return target_; }

  // `priority` 0: the coordinator's default (1). docs/sharing.md.
  // `request_id`: the same on every retry of one submission (runs.proto).
  absl::StatusOr<skerry::v1::RunSummary> Submit(
      const skerry::v1::RunSpec& spec, const std::string& spec_text,
      uint32_t priority = 0, const std::string& request_id = "");
  // RunService.ForkRun (cli/fork.cc).
  absl::StatusOr<skerry::v1::RunSummary> Fork(
      const skerry::v1::ForkRunRequest& request);
  // RunService.DeleteRun (cli/housekeeping.cc).
  absl::StatusOr<skerry::v1::DeleteRunResponse> Delete(uint64_t run_id);
  absl::StatusOr<std::vector<skerry::v1::RunSummary>> List();
  absl::StatusOr<skerry::v1::GetRunResponse> Get(uint64_t run_id);
  absl::StatusOr<skerry::v1::RunSummary> Pause(uint64_t run_id);
  absl::StatusOr<skerry::v1::RunSummary> Resume(uint64_t run_id);
  absl::StatusOr<skerry::v1::RunSummary> Stop(uint64_t run_id);
  absl::StatusOr<skerry::v1::RunSummary> SetPriority(uint64_t run_id,
                                                     uint32_t priority);
  absl::StatusOr<skerry::v1::Genome> Champion(uint64_t run_id);
  absl::StatusOr<skerry::v1::DigestResponse> Digest(uint64_t run_id);
  // Every island when `island` is empty.
  absl::StatusOr<std::vector<skerry::v1::GenerationStats>> History(
      uint64_t run_id, std::optional<uint32_t> island);

  // Streams the run's summaries to `on_update` until the server ends the
  // stream; returns how it ended (OK when the run ended).
  absl::Status Watch(
      uint64_t run_id,
      const std::function<void(const skerry::v1::RunSummary&)>& on_update);

 private:
  void SetDeadline(grpc::ClientContext* context) const;

  const std::unique_ptr<skerry::v1::RunService::StubInterface> stub_;
  const std::string target_;
  const ClientOptions options_;
};

}  // namespace skerry::cli

#endif  // SKERRY_CLI_CLIENT_H_
