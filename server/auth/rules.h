// The rule table: for every gRPC method the coordinator serves, keyed by its
// full name ("/skerry.v1.RunService/PauseRun"), what a caller needs to call it,
// whether the call is written to the audit log, and the type of its request.
// It is the only place that says who may call what. A method absent from it is
// refused by the interceptor, and the coordinator will not start serving a
// service with a method absent from it (server/auth/gate.h).
//
// Permissions:
//   kPublic   no token (the gRPC health check only)
//   kRead     viewer, researcher, admin
//   kSubmit   researcher, admin
//   kOwnRun   admin for any run; researcher for the runs it submitted (for
//             any other run, and for a run that does not exist, the same
//             PERMISSION_DENIED, so that nobody learns which runs exist)
//   kAdmin    admin
//   kFleet    worker
//   kAnyRole  any valid token (WhoAmI)
//
// Thread safety: the table is built once and never changes.
#ifndef SKERRY_SERVER_AUTH_RULES_H_
#define SKERRY_SERVER_AUTH_RULES_H_

#include <cstdint>
#include <map>
#include <string>

#include "absl/strings/string_view.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/message.h"
#include "server/auth/roles.h"

namespace skerry::auth {

enum class Permission {
  kPublic,
  kRead,
  kSubmit,
  kOwnRun,
  kAdmin,
  kFleet,
  kAnyRole
};

struct Rule {
  Permission permission = Permission::kAdmin;
  bool audited = false;
  // The request message type, or nullptr for methods outside our protos (the
  // health check). The gate checks it against the service it wraps, so the
  // two functions below only ever see a request of this type.
  const google::protobuf::Descriptor* request = nullptr;
  // The run the request is about (0: none); nullptr when no run field.
  uint64_t (*run_id)(const void* request) = nullptr;
  // A genome the request names by id (0: none), for requests about a run
  // given through one of its genomes: when run_id gives 0, the run is the
  // genome's, looked up in the store.
  uint64_t (*genome_id)(const void* request) = nullptr;
  // Runs the request's destructor (for calls the gate refuses).
  void (*destroy)(void* request) = nullptr;
  // The request as a protobuf message (for the bounds of server/api/
  // request_bounds.h).
  const google::protobuf::Message* (*message)(const void* request) = nullptr;
};

// Every rule, by full method name.
const std::map<std::string, Rule>& Rules();
// nullptr when the method has no rule.
const Rule* FindRule(absl::string_view full_method);

// Whether `role` passes `permission` (ownership aside: kOwnRun is true for
// researcher and admin here).
bool RoleAllows(Permission permission, Role role);
// "role researcher or admin", for refusals.
std::string NeededRoles(Permission permission);

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_RULES_H_
