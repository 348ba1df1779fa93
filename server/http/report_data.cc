#include "server/http/report_data.h"

#include <chrono>
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "server/api/grpc_status.h"

namespace skerry::http {
namespace {

absl::Status Failed(const grpc::Status& s, absl::string_view call) {
  absl::Status status = api::FromGrpc(s);
  return absl::Status(status.code(),
                      absl::StrCat(call, ": ", status.message()));
}

}  // namespace

absl::StatusOr<RunReportData> FetchReportData(
    skerry::v1::RunService::StubInterface& runs,
    skerry::v1::LineageService::StubInterface& lineage, uint64_t run_id,
    const PrepareCall& prepare, absl::Duration deadline) {
  const absl::Time end = absl::Now() + deadline;
  auto context = [&](grpc::ClientContext* ctx) {
    ctx->set_deadline(absl::ToChronoTime(end));
    if (prepare) prepare(ctx);
  };
  RunReportData data;
  skerry::v1::RunRef ref;
  ref.set_run_id(run_id);
  {
    grpc::ClientContext ctx;
    context(&ctx);
    grpc::Status s = runs.GetRun(&ctx, ref, &data.run);
    if (!s.ok()) return Failed(s, "GetRun");
  }
  {
    grpc::ClientContext ctx;
    context(&ctx);
    skerry::v1::GetHistoryRequest req;
    req.set_run_id(run_id);
    req.set_all_islands(true);
    req.set_with_migrations(true);  // the migration chart
    skerry::v1::GetHistoryResponse resp;
    grpc::Status s = runs.GetHistory(&ctx, req, &resp);
    if (!s.ok()) return Failed(s, "GetHistory");
    data.history.assign(resp.generations().begin(), resp.generations().end());
  }
  {
    grpc::ClientContext ctx;
    context(&ctx);
    skerry::v1::DigestResponse digest;
    grpc::Status s = runs.GetDigest(&ctx, ref, &digest);
    if (!s.ok()) return Failed(s, "GetDigest");
    data.digest = digest;
  }
  if (data.run.run().champion_id() != 0) {
    grpc::ClientContext ctx;
    context(&ctx);
    skerry::v1::AttributionRequest req;
    req.mutable_genome()->set_champion_of_run(run_id);
    skerry::v1::AttributionResponse attribution;
    grpc::Status s = lineage.GetAttribution(&ctx, req, &attribution);
    if (!s.ok()) return Failed(s, "GetAttribution");
    data.attribution = attribution;
  }
  return data;
}

}  // namespace skerry::http
