#include "server/api/study_service.h"

#include <algorithm>
#include <cctype>
#include <set>

#include "absl/strings/str_cat.h"
#include "server/api/grpc_status.h"
#include "server/api/request_bounds.h"

namespace skerry::api {
namespace {

bool NameChar(char c) {
  return std::isalnum(static_cast<unsigned char>(c)) || c == '.' || c == '-' ||
         c == '_';
}

// The default series name: the spec's name with every other character made
// '-', or "series".
std::string DefaultName(const std::string& spec_name) {
  std::string out;
  for (char c : spec_name) {
    if (out.size() + 8 >= kMaxSeriesNameBytes) break;  // room for "-NNN"
    out.push_back(NameChar(c) ? c : '-');
  }
  if (out.empty() || CheckSeriesName(out).ok() == false) return "series";
  return out;
}

void FillMembers(const store::SeriesRecord& series,
                 skerry::v1::SubmitSeriesResponse* resp) {
  resp->set_name(series.name);
  for (const auto& [run_id, seed] : series.members) {
    skerry::v1::SeriesMember* m = resp->add_members();
    m->set_run_id(static_cast<uint64_t>(run_id));
    m->set_seed(seed);
  }
}

}  // namespace

absl::Status CheckSeriesName(const std::string& name) {
  if (name.empty() || name.size() > kMaxSeriesNameBytes ||
      !std::all_of(name.begin(), name.end(), NameChar)) {
    return absl::InvalidArgumentError(absl::StrCat(
        "series name: 1 to ", kMaxSeriesNameBytes,
        " letters, digits, '.', '-' or '_', got '",
        name.substr(0, kMaxSeriesNameBytes), name.size() > 64 ? "...'" : "'"));
  }
  if (std::all_of(name.begin(), name.end(), [](char c) {
        return std::isdigit(static_cast<unsigned char>(c));
      })) {
    return absl::InvalidArgumentError(
        absl::StrCat("series name: '", name,
                     "' is all digits, which commands would read as a run id"));
  }
  return absl::OkStatus();
}

grpc::Status StudyServiceImpl::SubmitSeries(
    grpc::ServerContext* ctx, const skerry::v1::SubmitSeriesRequest* req,
    skerry::v1::SubmitSeriesResponse* resp) {
  auto invalid = [](const std::string& m) {
    return ToGrpc(absl::InvalidArgumentError(m));
  };
  // spec_text's size is bounded before any handler runs (request_bounds.h).
  if (absl::Status s = CheckRequestId(req->request_id()); !s.ok()) {
    return invalid(std::string(s.message()));
  }
  if (req->seeds().empty() ||
      static_cast<size_t>(req->seeds().size()) > kMaxSeriesSeeds) {
    return invalid(absl::StrCat("seeds: 1 to ", kMaxSeriesSeeds, " seeds, got ",
                                req->seeds().size()));
  }
  std::set<uint64_t> distinct;
  for (int i = 0; i < req->seeds().size(); ++i) {
    if (!distinct.insert(req->seeds(i)).second) {
      return invalid(absl::StrCat("seeds[", i, "]: seed ", req->seeds(i),
                                  " is given twice"));
    }
  }
  if (!req->name().empty()) {
    if (absl::Status s = CheckSeriesName(req->name()); !s.ok())
      return ToGrpc(s);
  }
  // The coordinator's budgets, before the engine allocates anything.
  absl::StatusOr<skerry::v1::RunSpec> prepared =
      PrepareSpec(req->spec(), budgets_);
  if (!prepared.ok()) return ToGrpc(prepared.status());
  std::optional<auth::Caller> caller =
      access_ != nullptr ? access_->CallerOf(ctx) : std::nullopt;
  const std::string owner =
      caller.has_value() ? caller->principal : auth::kLocalPrincipal;
  auto earlier = [&]() -> absl::StatusOr<std::optional<store::SeriesRecord>> {
    if (req->request_id().empty()) return std::optional<store::SeriesRecord>();
    return store_->runs().FindSeriesByRequest(owner, req->request_id());
  };
  absl::StatusOr<std::optional<store::SeriesRecord>> first = earlier();
  if (!first.ok()) return ToGrpc(first.status());
  if (first->has_value()) {
    FillMembers(**first, resp);
    return grpc::Status::OK;
  }
  store::SeriesRecord series;
  series.owner = owner;
  series.request_id = req->request_id();
  series.created_ms = absl::ToUnixMillis(absl::Now());
  if (req->name().empty()) {
    absl::StatusOr<std::string> name =
        store_->runs().UnusedSeriesName(DefaultName(prepared->name()));
    if (!name.ok()) return ToGrpc(name.status());
    series.name = *name;
  } else {
    series.name = req->name();
  }
  for (uint64_t seed : req->seeds()) series.members.emplace_back(0, seed);
  absl::StatusOr<std::vector<store::RunRecord>> runs = engine_->SubmitSeries(
      *std::move(prepared), req->spec_text(), &series, req->priority());
  if (!runs.ok()) {
    // Two attempts of one submission raced: the loser returns the winner's.
    first = earlier();
    if (first.ok() && first->has_value()) {
      FillMembers(**first, resp);
      return grpc::Status::OK;
    }
    return ToGrpc(runs.status());
  }
  if (access_ != nullptr) {
    access_->Note(ctx, 0,
                  absl::StrCat("series '", series.name, "' of ", runs->size(),
                               " runs (", runs->front().id, " to ",
                               runs->back().id, ") owned by ", owner));
  }
  FillMembers(series, resp);
  return grpc::Status::OK;
}

grpc::Status StudyServiceImpl::ExtendRun(
    grpc::ServerContext* ctx, const skerry::v1::ExtendRunRequest* req,
    skerry::v1::RunSummary* resp) {
  skerry::v1::StopSpec stop;
  std::string what;
  if (req->has_max_generations()) {
    if (req->max_generations() == 0) {
      return ToGrpc(absl::InvalidArgumentError(
          "max_generations: must be positive, got 0"));
    }
    stop.set_max_generations(req->max_generations());
    absl::StrAppend(&what, " max_generations ", req->max_generations());
  }
  if (req->has_max_evaluations()) {
    if (req->max_evaluations() == 0) {
      return ToGrpc(absl::InvalidArgumentError(
          "max_evaluations: must be positive, got 0"));
    }
    stop.set_max_evaluations(req->max_evaluations());
    absl::StrAppend(&what, " max_evaluations ", req->max_evaluations());
  }
  if (req->has_max_wall_seconds()) {
    if (!(req->max_wall_seconds() > 0) ||
        !std::isfinite(req->max_wall_seconds())) {
      return ToGrpc(absl::InvalidArgumentError(absl::StrCat(
          "max_wall_seconds: must be a positive number of seconds, got ",
          req->max_wall_seconds())));
    }
    stop.set_max_wall_seconds(req->max_wall_seconds());
    absl::StrAppend(&what, " max_wall_seconds ", req->max_wall_seconds());
  }
  if (req->has_target_score()) {
    stop.set_target_score(req->target_score());
    absl::StrAppend(&what, " target_score ", req->target_score());
  }
  if (what.empty()) {
    return ToGrpc(absl::InvalidArgumentError(
        "set at least one of max_generations, max_evaluations, "
        "max_wall_seconds, target_score"));
  }
  const int64_t run_id = static_cast<int64_t>(req->run_id());
  absl::Status s = engine_->Extend(run_id, stop);
  if (!s.ok()) return ToGrpc(s);
  if (access_ != nullptr) {
    access_->Note(ctx, run_id, absl::StrCat("extended to", what));
  }
  absl::StatusOr<skerry::v1::RunSummary> summary = engine_->Summary(run_id);
  if (!summary.ok()) return ToGrpc(summary.status());
  *resp = *std::move(summary);
  absl::StatusOr<std::string> series = store_->runs().SeriesOfRun(run_id);
  if (series.ok()) resp->set_series(*series);
  return grpc::Status::OK;
}

}  // namespace skerry::api
