// Gathers what a report shows about one run (server/http/report_page.h) by
// calling RunService and LineageService, so that `skerry report` (over the
// network) and the live page (over the coordinator's in-process channel, with
// the caller's token) read the same data under the same access rules.
//
// Thread safety: FetchReportData may be called from any thread; the stubs
// must be usable concurrently (gRPC stubs are).
#ifndef SKERRY_SERVER_HTTP_REPORT_DATA_H_
#define SKERRY_SERVER_HTTP_REPORT_DATA_H_

#include <cstdint>
#include <functional>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "grpcpp/client_context.h"
#include "server/http/report_page.h"
#include "skerry/v1/lineage.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"

namespace skerry::http {

// Called on every call's context before it is sent: adds the caller's token.
using PrepareCall = std::function<void(grpc::ClientContext*)>;

// The run, its whole history, its digest and (when it has a champion) the
// champion's attribution. Each call carries `deadline`. Errors keep the
// server's status code, with the call named in the message.
absl::StatusOr<RunReportData> FetchReportData(
    skerry::v1::RunService::StubInterface& runs,
    skerry::v1::LineageService::StubInterface& lineage, uint64_t run_id,
    const PrepareCall& prepare, absl::Duration deadline = absl::Seconds(30));

}  // namespace skerry::http

#endif  // SKERRY_SERVER_HTTP_REPORT_DATA_H_
