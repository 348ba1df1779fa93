// The coordinator: opens the store, resumes every run, serves FleetService,
// RunService, LineageService, AdminService, AccessService and the gRPC health
// check. Every call passes the access interceptor and the gate (server/auth):
// one rule table decides who may call what. Used by skerry-coordinator's main
// and by `skerry local`.
//
// Thread safety: Start() once; every other method from any thread.
#ifndef SKERRY_SERVER_COORDINATOR_H_
#define SKERRY_SERVER_COORDINATOR_H_

#include <cstddef>
#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "common/clock.h"
#include "common/spec.h"
#include "grpcpp/channel.h"
#include "server/auth/access_control.h"

namespace skerry::server {

// DefaultSpecBudgets for this machine's physical memory.
SpecBudgets MachineSpecBudgets();

struct CoordinatorOptions {
  std::string db_path;
  // host:port; port 0 picks a free one (see Coordinator::port()). Empty: no
  // network listener (in-process channels only, as `skerry local` uses).
  std::string listen_address = "127.0.0.1:7431";
  absl::Duration lease = absl::Seconds(30);  // task lease without renewal
  absl::Duration max_lease_wait = absl::Seconds(10);  // long-poll cap
  size_t max_watchers = 256;  // concurrent WatchRun streams (watch_hub.h)
  Clock* clock = nullptr;     // default: Clock::Real()
  // When tokens are checked (server/auth/access_control.h). `skerry local`,
  // which has no listener, uses kOff.
  auth::AuthMode auth = auth::AuthMode::kAuto;
  // TLS on the listening port when both are set (PEM files); with
  // tls_client_ca, clients must present a certificate signed by that CA.
  std::string tls_cert_file;
  std::string tls_key_file;
  std::string tls_client_ca_file;
  // The SQLite VFS the store is opened with; empty: the default. A test seam
  // (tests/fault: a disk that fails on demand).
  std::string sqlite_vfs;
  // What one run may ask for (common/spec.h); SubmitRun refuses more.
  SpecBudgets budgets = MachineSpecBudgets();
  // The read-only web port (server/http/http_server.h): HOST:PORT, port 0
  // picks a free one; empty (the default): none. It uses the TLS files above.
  std::string http_address;
  std::string chart_library = "/usr/share/javascript/chart.js/chart.min.js";
  // `--read-only`: open an existing database without writing (no migration,
  // a shared owner lock: store::OwnerLock::AcquireShared), serve every read,
  // refuse every call that would write with FAILED_PRECONDITION
  // (common/read_only.h). docs/operations.md.
  bool read_only = false;
};

class Coordinator {
 public:
  static absl::StatusOr<std::unique_ptr<Coordinator>> Start(
      const CoordinatorOptions& options);
  virtual ~Coordinator() = default;

  // The bound TCP port (0 without a listener).
  virtual int port() const = 0;
  // The web port (0 without --http), and whether it serves HTTPS.
  virtual int http_port() const = 0;
  virtual bool http_tls() const = 0;
  // One line each for the start log: access control, transport security.
  virtual std::string AccessSummary() const = 0;
  virtual std::string TransportSummary() const = 0;
  // A channel to this coordinator that does not touch the network.
  virtual std::shared_ptr<grpc::Channel> InProcessChannel() = 0;
  // Stops serving: the engine first (its in-flight commit gets a deadline,
  // then is interrupted and rolled back: nothing acknowledged is lost), then
  // the server (5 s for calls in flight). Idempotent; a second caller returns
  // when the first has finished. Bounded in time.
  virtual void Shutdown() = 0;
  // Blocks until Shutdown(), called from another thread (a signal handler's,
  // say), has finished.
  virtual void Wait() = 0;
};

// `skerry-coordinator --init-admin NAME`: takes the database's owner lock (so
// no coordinator may be running on it), creates principal NAME with role admin
// and a token, and returns them; the token is shown to nobody else. Refused
// (FailedPrecondition) while an admin with a live token exists: that admin
// makes further tokens with `skerry token create`.
absl::StatusOr<auth::AccessControl::IssuedToken> InitFirstAdmin(
    const std::string& db_path, const std::string& name);

}  // namespace skerry::server

#endif  // SKERRY_SERVER_COORDINATOR_H_
