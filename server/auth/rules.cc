#include "server/auth/rules.h"

#include "skerry/v1/access.pb.h"
#include "skerry/v1/admin.pb.h"
#include "skerry/v1/fleet.pb.h"
#include "skerry/v1/lineage.pb.h"
#include "skerry/v1/runs.pb.h"
#include "skerry/v1/study.pb.h"
#include "skerry/v1/validation.pb.h"

namespace skerry::auth {
namespace {

using P = Permission;
namespace v1 = skerry::v1;

template <class Request>
Rule Make(Permission permission, bool audited = false) {
  Rule r;
  r.permission = permission;
  r.audited = audited;
  r.request = Request::descriptor();
  r.destroy = [](void* p) { static_cast<Request*>(p)->~Request(); };
  r.message = [](const void* p) -> const google::protobuf::Message* {
    return static_cast<const Request*>(p);
  };
  return r;
}

// A rule for a request with a `run_id` field.
template <class Request>
Rule AboutRun(Permission permission, bool audited = false) {
  Rule r = Make<Request>(permission, audited);
  r.run_id = [](const void* p) {
    return static_cast<uint64_t>(static_cast<const Request*>(p)->run_id());
  };
  return r;
}

// A rule for a request naming a genome (`genome`, a GenomeRef): its run is
// the key's run, the run whose champion it is, or the run of the genome id.
template <class Request>
Rule AboutGenome(Permission permission, bool audited = false) {
  Rule r = Make<Request>(permission, audited);
  r.run_id = [](const void* p) {
    const v1::GenomeRef& g = static_cast<const Request*>(p)->genome();
    return g.has_key() ? g.key().run_id() : g.champion_of_run();
  };
  r.genome_id = [](const void* p) {
    return static_cast<const Request*>(p)->genome().id();
  };
  return r;
}

Rule Public() {
  Rule r;
  r.permission = P::kPublic;
  return r;
}

std::map<std::string, Rule> Build() {
  const std::string run = "/skerry.v1.RunService/";
  const std::string fleet = "/skerry.v1.FleetService/";
  const std::string lineage = "/skerry.v1.LineageService/";
  const std::string admin = "/skerry.v1.AdminService/";
  const std::string access = "/skerry.v1.AccessService/";
  const std::string validation = "/skerry.v1.ValidationService/";
  const std::string study = "/skerry.v1.StudyService/";
  return {
      {run + "SubmitRun", Make<v1::SubmitRunRequest>(P::kSubmit, true)},
      {run + "ListRuns", Make<v1::ListRunsRequest>(P::kRead)},
      {run + "GetRun", Make<v1::RunRef>(P::kRead)},
      {run + "PauseRun", AboutRun<v1::RunRef>(P::kOwnRun, true)},
      {run + "ResumeRun", AboutRun<v1::RunRef>(P::kOwnRun, true)},
      {run + "StopRun", AboutRun<v1::RunRef>(P::kOwnRun, true)},
      {run + "SetPriority", AboutRun<v1::SetPriorityRequest>(P::kOwnRun, true)},
      {run + "ForkRun", Make<v1::ForkRunRequest>(P::kSubmit, true)},
      {run + "DeleteRun", AboutRun<v1::RunRef>(P::kOwnRun, true)},
      {run + "ArchiveRun", AboutRun<v1::ArchiveRunRequest>(P::kOwnRun, true)},
      {run + "ImportRuns", Make<v1::ImportRunsRequest>(P::kAdmin, true)},
      {run + "GetChampion", Make<v1::RunRef>(P::kRead)},
      {run + "GetHistory", Make<v1::GetHistoryRequest>(P::kRead)},
      {run + "GetDigest", Make<v1::RunRef>(P::kRead)},
      {run + "WatchRun", Make<v1::WatchRunRequest>(P::kRead)},
      {run + "FollowRun", Make<v1::FollowRunRequest>(P::kRead)},

      {study + "SubmitSeries", Make<v1::SubmitSeriesRequest>(P::kSubmit, true)},
      {study + "ExtendRun", AboutRun<v1::ExtendRunRequest>(P::kOwnRun, true)},

      {fleet + "Join", Make<v1::JoinRequest>(P::kFleet)},
      {fleet + "Lease", Make<v1::LeaseRequest>(P::kFleet)},
      {fleet + "Report", Make<v1::ReportRequest>(P::kFleet)},
      {fleet + "HandBack", Make<v1::HandBackRequest>(P::kFleet)},

      {lineage + "GetGenomeNode", Make<v1::GenomeRef>(P::kRead)},
      {lineage + "StreamAncestors", Make<v1::AncestorsRequest>(P::kRead)},
      {lineage + "StreamDescendants", Make<v1::DescendantsRequest>(P::kRead)},
      {lineage + "GetLineOfDescent", Make<v1::LineOfDescentRequest>(P::kRead)},
      {lineage + "GetCommonAncestor",
       Make<v1::CommonAncestorRequest>(P::kRead)},
      {lineage + "GetCoalescence", Make<v1::CoalescenceRequest>(P::kRead)},
      {lineage + "GetAttribution", Make<v1::AttributionRequest>(P::kRead)},

      {admin + "Backup", AboutRun<v1::BackupRequest>(P::kAdmin, true)},
      {admin + "ListWorkers", Make<v1::ListWorkersRequest>(P::kRead)},

      {access + "CreateToken", Make<v1::CreateTokenRequest>(P::kAdmin, true)},
      {access + "ListTokens", Make<v1::ListTokensRequest>(P::kAdmin)},
      {access + "RevokeToken", Make<v1::RevokeTokenRequest>(P::kAdmin, true)},
      {access + "QueryAudit", Make<v1::QueryAuditRequest>(P::kAdmin)},
      {access + "WhoAmI", Make<v1::WhoAmIRequest>(P::kAnyRole)},

      // Validation uses the fleet for a run: its owner's (or an admin's) call.
      {validation + "Validate",
       AboutGenome<v1::ValidateRequest>(P::kOwnRun, true)},
      {validation + "GetValidation", Make<v1::GenomeRef>(P::kRead)},
      {validation + "ListValidations",
       Make<v1::ListValidationsRequest>(P::kRead)},

      // The standard gRPC health check (grpc.health.v1), served by gRPC
      // itself: load balancers and service managers call it without a token.
      {"/grpc.health.v1.Health/Check", Public()},
      {"/grpc.health.v1.Health/Watch", Public()},
  };
}

}  // namespace

const std::map<std::string, Rule>& Rules() {
  static const auto* rules = new std::map<std::string, Rule>(Build());
  return *rules;
}

const Rule* FindRule(absl::string_view full_method) {
  const auto& rules = Rules();
  auto it = rules.find(std::string(full_method));
  return it == rules.end() ? nullptr : &it->second;
}

bool RoleAllows(Permission permission, Role role) {
  const bool reader = role == v1::ROLE_VIEWER || role == v1::ROLE_RESEARCHER ||
                      role == v1::ROLE_ADMIN;
  switch (permission) {
    case P::kPublic:
      return true;
    case P::kRead:
      return reader;
    case P::kSubmit:
    case P::kOwnRun:
      return role == v1::ROLE_RESEARCHER || role == v1::ROLE_ADMIN;
    case P::kAdmin:
      return role == v1::ROLE_ADMIN;
    case P::kFleet:
      return role == v1::ROLE_WORKER;
    case P::kAnyRole:
      return reader || role == v1::ROLE_WORKER;
  }
  return false;
}

std::string NeededRoles(Permission permission) {
  switch (permission) {
    case P::kPublic:
      return "no token";
    case P::kRead:
      return "role viewer, researcher or admin";
    case P::kSubmit:
      return "role researcher or admin";
    case P::kOwnRun:
      return "role admin, or role researcher as the run's owner";
    case P::kAdmin:
      return "role admin";
    case P::kFleet:
      return "role worker";
    case P::kAnyRole:
      return "any valid token";
  }
  return "a rule";
}

}  // namespace skerry::auth
