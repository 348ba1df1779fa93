// AccessControl: who is calling, and may they make this call? It holds the
// live tokens (a cache of the store's tokens table: only this coordinator
// writes it, under the database's owner lock), decides each call by the rule
// table (rules.h), writes the audit log, and keeps each call's verdict for
// the gate (gate.h) and the handlers for as long as the call lasts.
//
// When is access control on? Chosen once, at start (AuthMode):
//   kAuto (the default)  on when the database holds at least one principal,
//                        that is after `skerry-coordinator --init-admin NAME`;
//                        off on a fresh database, so `skerry local`, the demo
//                        scripts and private use need no tokens
//   kOn                  on; refused at start when there is no principal
//   kOff                 off, even with principals (a recovery mode)
// While off, every call is allowed and acts as the principal "local" with the
// admin role; changes are still written to the audit log under that name.
//
// The audit rule: an audited call's row is committed before the handler runs
// (a change is never made without its row; when the row cannot be written the
// call is refused with UNAVAILABLE and nothing changes), and its outcome is
// written when the call ends. Refused calls by a known token are written too.
//
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_AUTH_ACCESS_CONTROL_H_
#define SKERRY_SERVER_AUTH_ACCESS_CONTROL_H_

#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/mutex.h"
#include "common/clock.h"
#include "grpcpp/server_context.h"
#include "grpcpp/support/status.h"
#include "server/auth/roles.h"
#include "server/auth/rules.h"
#include "server/store/store.h"

namespace skerry::auth {

enum class AuthMode { kAuto, kOn, kOff };
// "auto", "on", "off".
absl::StatusOr<AuthMode> ParseAuthMode(absl::string_view text);

// One call's verdict. Written by the interceptor; read by the gate; the
// handler adds what it changed (AccessControl::Note).
struct Verdict {
  std::string method;
  const Rule* rule = nullptr;
  grpc::Status status;           // OK: the call may go ahead
  std::optional<Caller> caller;  // set when the token was accepted
  bool examined = false;         // the request was seen (ownership, audit row)
  int64_t audit_id = 0;          // its audit row, when audited
  int64_t run_id = 0;            // for the audit row
  std::string detail;            // for the audit row
};

class AccessControl {
 public:
  // `read_only` (skerry-coordinator --read-only): every call that would
  // change the database (an audited method, or any FleetService call) is
  // refused with FAILED_PRECONDITION (common/read_only.h) after the token and
  // role checks, and no audit row is written for any call.
  static absl::StatusOr<std::unique_ptr<AccessControl>> Open(
      store::Store* store, Clock* clock, AuthMode mode, bool read_only = false);

  bool enabled() const { return enabled_; }
  // One line for the coordinator's start log.
  std::string Describe() const;

  // ---- The interceptor's steps for one call ----
  // Authentication and role, from the values of the "authorization" metadata.
  Verdict Admit(absl::string_view method,
                const std::vector<std::string>& authorization) const;
  // With the request (nullptr when it did not parse): ownership, and the audit
  // row of an audited call. `peer` is where the call came from. An admitted
  // request that did not parse is refused with INVALID_ARGUMENT naming its
  // type (gRPC would send INTERNAL with no message), and one with a string or
  // list over its bound (server/api/request_bounds.h) with INVALID_ARGUMENT
  // naming the field.
  void Examine(Verdict* verdict, const void* request, const std::string& peer);
  // Writes the outcome of an audited call.
  void Conclude(const Verdict& verdict, const grpc::Status& sent);

  // ---- Verdicts of calls in flight, keyed by their ServerContext ----
  void Record(const grpc::ServerContextBase* ctx, const Verdict& verdict);
  void Forget(const grpc::ServerContextBase* ctx);
  std::optional<Verdict> Find(const grpc::ServerContextBase* ctx) const;
  // OK when the call in flight may go ahead; else the status to end it with.
  // Fails closed: INTERNAL for a call without a verdict or not examined.
  // A client-streaming call has no message yet when its handler starts: with
  // `before_message` only its metadata (token, role) is judged then, and the
  // handler asks again (without) once its first message has come.
  grpc::Status Refusal(const grpc::ServerContextBase* ctx,
                       bool before_message = false) const;

  // ---- For handlers ----
  // The caller of a call in flight; nullopt when it has none (health check).
  std::optional<Caller> CallerOf(const grpc::ServerContextBase* ctx) const;
  // Records what an audited call changed: the run it made or touched (0:
  // keep the one from the request) and a few words.
  void Note(const grpc::ServerContextBase* ctx, int64_t run_id,
            std::string detail);

  // ---- Tokens ----
  struct IssuedToken {
    store::TokenRecord record;
    std::string secret;  // shown once, never stored
  };
  // InvalidArgument for a bad name, role or note. FailedPrecondition for a
  // role other than admin while no admin has a live token: the first
  // principal turns access control on at the next start (kAuto), and an
  // open coordinator must not lock everyone out that way.
  absl::StatusOr<IssuedToken> CreateToken(const std::string& principal,
                                          Role role, const std::string& note,
                                          const std::string& by);
  absl::StatusOr<store::TokenRecord> RevokeToken(int64_t token_id,
                                                 const std::string& by);

  // `skerry-coordinator --init-admin NAME`: the first admin principal and its
  // token. FailedPrecondition when an admin with a live token exists.
  static absl::StatusOr<IssuedToken> InitAdmin(store::Store* store,
                                               Clock* clock,
                                               const std::string& name);

 private:
  AccessControl(store::Store* store, Clock* clock, bool enabled, bool read_only)
      : store_(store),
        clock_(clock),
        enabled_(enabled),
        read_only_(read_only) {}
  absl::StatusOr<Caller> Authenticate(
      const std::vector<std::string>& authorization) const;

  // Constant after construction.
  store::Store* const store_;
  Clock* const clock_;
  const bool enabled_;
  const bool read_only_;

  mutable absl::Mutex mu_;
  std::map<std::string, Caller> live_ ABSL_GUARDED_BY(mu_);  // by token hash
  std::map<const grpc::ServerContextBase*, Verdict> calls_ ABSL_GUARDED_BY(mu_);
};

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_ACCESS_CONTROL_H_
