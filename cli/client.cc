#include "cli/client.h"

#include <atomic>
#include <cstdint>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "grpcpp/client_context.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"

namespace skerry::cli {

namespace {

// Nanoseconds; 0: no --timeout.
std::atomic<int64_t> call_timeout_ns{0};

}  // namespace

void SetCallTimeout(absl::Duration timeout) {
  call_timeout_ns.store(absl::ToInt64Nanoseconds(timeout));
}

absl::Duration CallTimeout() {
  return absl::Nanoseconds(call_timeout_ns.load());
}

absl::Duration CallDeadline(absl::Duration fallback) {
  const absl::Duration chosen = CallTimeout();
  return chosen > absl::ZeroDuration() ? chosen : fallback;
}

absl::StatusOr<std::shared_ptr<grpc::Channel>> CoordinatorChannel(
    const std::string& target, const worker::ClientSecurity& security) {
  return worker::OpenCoordinatorChannel(
      target, security, absl::Seconds(10),
      CallDeadline(worker::kDefaultConnectTimeout));
}
namespace {

using skerry::v1::RunRef;
using skerry::v1::RunSummary;

RunRef Ref(uint64_t run_id) {
  RunRef ref;
  ref.set_run_id(run_id);
  return ref;
}

}  // namespace

absl::Status FromGrpc(const grpc::Status& status, absl::string_view call,
                      absl::string_view target) {
  if (status.ok()) return absl::OkStatus();
  auto code = static_cast<absl::StatusCode>(status.error_code());
  std::string detail = status.error_message();
  if (detail.empty()) detail = "no message";
  if (status.error_code() == grpc::StatusCode::UNAVAILABLE &&
      status.error_details() == kAnsweredUnavailable) {
    absl::Status answered(
        code,
        absl::StrCat("the coordinator at ", target, " answered: unavailable (",
                     call, ": ", detail, "); try again later"));
    answered.SetPayload(kAnsweredPayload, absl::Cord("1"));
    return answered;
  }
  if (status.error_code() == grpc::StatusCode::UNAVAILABLE) {
    return absl::Status(
        code, absl::StrCat("cannot reach the coordinator at ", target, " (",
                           call, ": ", detail, ")"));
  }
  if (status.error_code() == grpc::StatusCode::DEADLINE_EXCEEDED) {
    return absl::Status(code, absl::StrCat("the coordinator at ", target,
                                           " did not answer in time (", call,
                                           ": ", detail, ")"));
  }
  return absl::Status(code, absl::StrCat(call, ": ", detail));
}

bool IsUnreachable(const absl::Status& status) {
  if (status.GetPayload(kAnsweredPayload).has_value()) return false;
  return absl::IsUnavailable(status) || absl::IsDeadlineExceeded(status);
}

RunClient::RunClient(
    std::unique_ptr<skerry::v1::RunService::StubInterface> stub,
    std::string target, ClientOptions options)
    : stub_(std::move(stub)), target_(std::move(target)), options_(options) {}

void RunClient::SetDeadline(grpc::ClientContext* context) const {
  context->set_deadline(
      absl::ToChronoTime(absl::Now() + CallDeadline(options_.deadline)));
}

absl::StatusOr<RunSummary> RunClient::Submit(const skerry::v1::RunSpec& spec,
                                             const std::string& spec_text,
                                             uint32_t priority,
                                             const std::string& request_id) {
  skerry::v1::SubmitRunRequest request;
  request.set_request_id(request_id);
  *request.mutable_spec() = spec;
  request.set_spec_text(spec_text);
  request.set_priority(priority);
  skerry::v1::SubmitRunResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(stub_->SubmitRun(&context, request, &response),
                                 "SubmitRun", target_);
  if (!status.ok()) return status;
  return response.run();
}

absl::StatusOr<RunSummary> RunClient::Fork(
    const skerry::v1::ForkRunRequest& request) {
  skerry::v1::SubmitRunResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(stub_->ForkRun(&context, request, &response),
                                 "ForkRun", target_);
  if (!status.ok()) return status;
  return response.run();
}

absl::StatusOr<skerry::v1::DeleteRunResponse> RunClient::Delete(
    uint64_t run_id) {
  skerry::v1::DeleteRunResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->DeleteRun(&context, Ref(run_id), &response), "DeleteRun", target_);
  if (!status.ok()) return status;
  return response;
}

absl::StatusOr<std::vector<RunSummary>> RunClient::List() {
  skerry::v1::ListRunsResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->ListRuns(&context, skerry::v1::ListRunsRequest(), &response),
      "ListRuns", target_);
  if (!status.ok()) return status;
  return std::vector<RunSummary>(response.runs().begin(),
                                 response.runs().end());
}

absl::StatusOr<skerry::v1::GetRunResponse> RunClient::Get(uint64_t run_id) {
  skerry::v1::GetRunResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->GetRun(&context, Ref(run_id), &response), "GetRun", target_);
  if (!status.ok()) return status;
  return response;
}

absl::StatusOr<RunSummary> RunClient::SetPriority(uint64_t run_id,
                                                  uint32_t priority) {
  skerry::v1::SetPriorityRequest request;
  request.set_run_id(run_id);
  request.set_priority(priority);
  RunSummary response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->SetPriority(&context, request, &response), "SetPriority", target_);
  if (!status.ok()) return status;
  return response;
}

absl::StatusOr<RunSummary> RunClient::Pause(uint64_t run_id) {
  RunSummary response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->PauseRun(&context, Ref(run_id), &response), "PauseRun", target_);
  if (!status.ok()) return status;
  return response;
}

absl::StatusOr<RunSummary> RunClient::Resume(uint64_t run_id) {
  RunSummary response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->ResumeRun(&context, Ref(run_id), &response), "ResumeRun", target_);
  if (!status.ok()) return status;
  return response;
}

absl::StatusOr<RunSummary> RunClient::Stop(uint64_t run_id) {
  RunSummary response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->StopRun(&context, Ref(run_id), &response), "StopRun", target_);
  if (!status.ok()) return status;
  return response;
}

absl::StatusOr<skerry::v1::Genome> RunClient::Champion(uint64_t run_id) {
  skerry::v1::GetChampionResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status =
      FromGrpc(stub_->GetChampion(&context, Ref(run_id), &response),
               "GetChampion", target_);
  if (!status.ok()) return status;
  return response.genome();
}

absl::StatusOr<skerry::v1::DigestResponse> RunClient::Digest(uint64_t run_id) {
  skerry::v1::DigestResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->GetDigest(&context, Ref(run_id), &response), "GetDigest", target_);
  if (!status.ok()) return status;
  return response;
}

absl::StatusOr<std::vector<skerry::v1::GenerationStats>> RunClient::History(
    uint64_t run_id, std::optional<uint32_t> island) {
  skerry::v1::GetHistoryRequest request;
  request.set_run_id(run_id);
  request.set_all_islands(!island.has_value());
  request.set_island(island.value_or(0));
  skerry::v1::GetHistoryResponse response;
  grpc::ClientContext context;
  SetDeadline(&context);
  absl::Status status = FromGrpc(
      stub_->GetHistory(&context, request, &response), "GetHistory", target_);
  if (!status.ok()) return status;
  return std::vector<skerry::v1::GenerationStats>(
      response.generations().begin(), response.generations().end());
}

absl::Status RunClient::Watch(
    uint64_t run_id, const std::function<void(const RunSummary&)>& on_update) {
  // FollowRun: the next summary is asked for only once this one has been
  // handled, so a slow terminal never gets a backlog of stale ones.
  skerry::v1::FollowRunRequest request;
  request.set_run_id(run_id);
  request.set_interval_ms(options_.watch_interval_ms);
  grpc::ClientContext context;  // no deadline: a run may last days
  std::unique_ptr<grpc::ClientReaderWriterInterface<
      skerry::v1::FollowRunRequest, RunSummary>>
      stream = stub_->FollowRun(&context);
  bool asking = stream->Write(request);
  RunSummary summary;
  while (stream->Read(&summary)) {
    on_update(summary);
    // The server may have ended the stream after its final summary.
    if (asking) asking = stream->Write(skerry::v1::FollowRunRequest());
  }
  return FromGrpc(stream->Finish(), "FollowRun", target_);
}

}  // namespace skerry::cli
