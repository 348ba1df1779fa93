#include "server/coordinator.h"

#include <unistd.h>

#include <cstdio>
#include <map>
#include <set>
#include <thread>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "common/status_macros.h"
#include "grpcpp/grpcpp.h"
#include "server/api/access_service.h"
#include "server/api/admin_service.h"
#include "server/api/fleet_service.h"
#include "server/api/run_service.h"
#include "server/api/study_service.h"
#include "server/api/validation_service.h"
#include "server/auth/gate.h"
#include "server/auth/interceptor.h"
#include "server/auth/tls.h"
#include "server/engine/engine.h"
#include "server/http/fleet_metrics.h"
#include "server/http/fleet_status.h"
#include "server/http/http_server.h"
#include "server/lineage/lineage_service.h"
#include "server/scheduler/task_queue.h"
#include "server/store/owner_lock.h"
#include "server/store/store.h"

namespace skerry::server {
namespace {

// Large enough for a lease of big genomes (10,000 tasks x 1,000 genes x 8 bytes
// is 80 MB), small enough that one hostile message cannot exhaust memory.
constexpr int kMaxMessageBytes = 128 << 20;

class CoordinatorImpl final : public Coordinator {
 public:
  static absl::StatusOr<std::unique_ptr<CoordinatorImpl>> Make(
      const CoordinatorOptions& options) {
    std::unique_ptr<CoordinatorImpl> c(new CoordinatorImpl());
    c->clock_ = options.clock != nullptr ? options.clock : Clock::Real();
    SKERRY_ASSIGN_OR_RETURN(
        c->owner_, options.read_only
                       ? store::OwnerLock::AcquireShared(options.db_path)
                       : store::OwnerLock::Acquire(options.db_path));
    store::Store::Options open;
    open.initialise_empty_file = c->owner_->created();
    open.vfs = options.sqlite_vfs;
    open.read_only = options.read_only;
    SKERRY_ASSIGN_OR_RETURN(c->store_,
                            store::Store::Open(options.db_path, open));
    // Refuse a file --check would call malformed, and one it cannot write
    // (rather than start, serve reads and fail every write), unless asked
    // to serve it read-only. The tables that grow with the evaluations are
    // checked once serving (StartFullCheck), so that a start does not read
    // the whole file.
    SKERRY_RETURN_IF_ERROR(c->store_->db().QuickCheckAtStart());
    if (absl::Status w =
            options.read_only ? absl::OkStatus() : c->store_->db().ProbeWrite();
        !w.ok()) {
      return absl::FailedPreconditionError(absl::StrCat(
          "cannot write the database ", options.db_path, " (", w.message(),
          "); check the file's and its folder's permissions and free space, "
          "or serve it with --read-only"));
    }
    c->queue_ =
        std::make_unique<scheduler::TaskQueue>(c->clock_, options.lease);
    SKERRY_ASSIGN_OR_RETURN(
        c->engine_, options.read_only
                        ? engine::Engine::OpenReadOnly(
                              c->store_.get(), c->queue_.get(), c->clock_)
                        : engine::Engine::Open(c->store_.get(), c->queue_.get(),
                                               c->clock_));
    SKERRY_ASSIGN_OR_RETURN(
        c->access_, auth::AccessControl::Open(c->store_.get(), c->clock_,
                                              options.auth, options.read_only));
    c->fleet_ = std::make_unique<api::FleetServiceImpl>(
        c->store_.get(), c->engine_.get(), c->queue_.get(), c->clock_,
        options.max_lease_wait);
    api::WatchHubOptions watch;
    watch.max_watchers = options.max_watchers;
    c->runs_ = std::make_unique<api::RunServiceImpl>(
        c->store_.get(), c->engine_.get(), c->fleet_.get(), c->access_.get(),
        watch, options.budgets);
    c->study_ = std::make_unique<api::StudyServiceImpl>(
        c->store_.get(), c->engine_.get(), c->access_.get(), options.budgets);
    c->validations_ = std::make_unique<api::ValidationServiceImpl>(
        c->store_.get(), c->engine_.get(), c->access_.get());
    SKERRY_ASSIGN_OR_RETURN(c->lineage_,
                            lineage::LineageServiceImpl::Open(options.db_path));
    c->admin_ = std::make_unique<api::AdminServiceImpl>(options.db_path);
    c->metrics_ = std::make_unique<http::FleetMetrics>();
    c->fleet_->set_metrics(c->metrics_.get());
    c->parts_ = http::CoordinatorParts{
        c->store_.get(),   c->queue_.get(), c->fleet_.get(), c->engine_.get(),
        c->metrics_.get(), c->clock_,       options.db_path};
    c->admin_->SetWorkerSource([parts = c->parts_](uint32_t limit) {
      return http::ListWorkers(parts, limit);
    });
    c->access_service_ = std::make_unique<api::AccessServiceImpl>(
        c->store_.get(), c->access_.get());

    auth::TlsServerFiles tls{options.tls_cert_file, options.tls_key_file,
                             options.tls_client_ca_file};
    SKERRY_ASSIGN_OR_RETURN(std::shared_ptr<grpc::ServerCredentials> creds,
                            auth::MakeServerCredentials(tls));
    c->transport_ =
        options.listen_address.empty() ? "no network listener"
        : tls.cert.empty()
            ? "plaintext (no --tls-cert): tokens travel unencrypted"
            : (tls.client_ca.empty() ? "TLS"
                                     : "TLS, client certificates required");

    grpc::EnableDefaultHealthCheckService(true);
    grpc::ServerBuilder builder;
    if (!options.listen_address.empty()) {
      builder.AddListeningPort(options.listen_address, creds, &c->port_);
    }
    builder.SetMaxReceiveMessageSize(kMaxMessageBytes);
    builder.SetMaxSendMessageSize(kMaxMessageBytes);
    // Every service goes behind the gate; nothing is registered bare.
    // Methods of grpc's callback API, by service (see auth/gate.h).
    std::map<std::string, std::set<std::string>> callbacks = {
        {skerry::v1::RunService::service_full_name(),
         {"WatchRun", "FollowRun"}}};
    const std::pair<grpc::Service*, std::string> services[] = {
        {c->fleet_.get(), skerry::v1::FleetService::service_full_name()},
        {c->runs_.get(), skerry::v1::RunService::service_full_name()},
        {c->study_.get(), skerry::v1::StudyService::service_full_name()},
        {c->admin_.get(), skerry::v1::AdminService::service_full_name()},
        {c->lineage_.get(), skerry::v1::LineageService::service_full_name()},
        {c->validations_.get(),
         skerry::v1::ValidationService::service_full_name()},
        {c->access_service_.get(),
         skerry::v1::AccessService::service_full_name()}};
    for (const auto& [service, name] : services) {
      SKERRY_ASSIGN_OR_RETURN(
          std::unique_ptr<auth::GatedService> gate,
          auth::GatedService::Wrap(service, name, c->access_.get(),
                                   callbacks[name]));
      builder.RegisterService(gate.get());
      c->gates_.push_back(std::move(gate));
    }
    std::vector<
        std::unique_ptr<grpc::experimental::ServerInterceptorFactoryInterface>>
        interceptors;
    interceptors.push_back(
        std::make_unique<auth::AuthInterceptorFactory>(c->access_.get()));
    builder.experimental().SetInterceptorCreators(std::move(interceptors));
    c->server_ = builder.BuildAndStart();
    if (c->server_ == nullptr ||
        (!options.listen_address.empty() && c->port_ == 0)) {
      return absl::UnavailableError(absl::StrCat(
          "cannot listen on ", options.listen_address,
          " (address in use, or not an address of this machine?)"));
    }
    // The standard health service answers for the whole server ("") by
    // itself; each of our services is SERVING too, until Shutdown.
    if (grpc::HealthCheckServiceInterface* health =
            c->server_->GetHealthCheckService()) {
      for (const auto& [service, name] : services) {
        health->SetServingStatus(name, true);
      }
    }
    if (!options.http_address.empty()) {
      http::HttpOptions web{options.http_address, options.chart_library,
                            options.tls_cert_file, options.tls_key_file,
                            options.tls_client_ca_file};
      http::HttpSources sources;
      sources.channel = c->InProcessChannel();
      sources.access = c->access_.get();
      sources.gauges = [parts = c->parts_] {
        return http::GatherGauges(parts);
      };
      sources.counts = [metrics = c->metrics_.get()] { return metrics->Get(); };
      SKERRY_ASSIGN_OR_RETURN(c->http_,
                              http::HttpServer::Start(web, std::move(sources)));
    }
    c->StartFullCheck();
    return c;
  }

  ~CoordinatorImpl() override { Shutdown(); }

  int port() const override { return port_; }
  int http_port() const override {
    return http_ != nullptr ? http_->port() : 0;
  }
  bool http_tls() const override { return http_ != nullptr && http_->tls(); }
  std::string AccessSummary() const override { return access_->Describe(); }
  std::string TransportSummary() const override { return transport_; }

  std::shared_ptr<grpc::Channel> InProcessChannel() override {
    grpc::ChannelArguments args;
    args.SetMaxReceiveMessageSize(kMaxMessageBytes);
    args.SetMaxSendMessageSize(kMaxMessageBytes);
    return server_->InProcessChannel(args);
  }

  void Shutdown() override {
    {
      absl::MutexLock l(&mu_);
      if (shut_down_) {
        // Idempotent: a second caller returns once the first has finished.
        mu_.Await(absl::Condition(&stopped_));
        return;
      }
      shut_down_ = true;
    }
    // Any part may be missing when Make() failed half-way. The engine stops
    // first: waiting Report calls are answered (UNAVAILABLE, results kept by
    // the workers) and its in-flight commit is bounded (Engine::Shutdown), so
    // no handler is left blocked when the server drains.
    if (full_check_.joinable()) {
      store_->db().InterruptFullCheck();
      full_check_.join();
    }
    if (http_ != nullptr) http_->Shutdown();         // it calls the services
    if (queue_ != nullptr) queue_->Shutdown();       // wakes long polls
    if (runs_ != nullptr) runs_->ShutdownWatches();  // ends watch streams
    if (engine_ != nullptr) engine_->Shutdown();
    if (server_ != nullptr) {
      // Health checks answer NOT_SERVING from now on, for every service.
      if (grpc::HealthCheckServiceInterface* health =
              server_->GetHealthCheckService()) {
        health->Shutdown();
      }
      server_->Shutdown(std::chrono::system_clock::now() +
                        std::chrono::seconds(5));
      server_->Wait();
    }
    absl::MutexLock l(&mu_);
    stopped_ = true;
  }

  void Wait() override {
    // Until Shutdown() has finished, not merely begun: the caller may
    // destroy the coordinator next (skerry-coordinator's main returns).
    absl::MutexLock l(&mu_);
    mu_.Await(absl::Condition(&stopped_));
  }

 private:
  CoordinatorImpl() = default;

  // The whole file's quick_check, while serving (Database::QuickCheckAtStart
  // left out the large tables). Damage found stops every write (the engine
  // holds the fleet and every run summary says why) until an operator
  // restores the file; reads go on.
  void StartFullCheck() {
    full_check_ = std::thread([store = store_.get(), engine = engine_.get()] {
      const absl::Status found = store->db().FullCheckWhileServing();
      if (found.ok() || absl::IsCancelled(found)) return;
      const absl::Status stop = absl::UnavailableError(
          absl::StrCat(found.message(), "; nothing more is written to it"));
      std::fprintf(stderr, "skerry-coordinator: %s\n", stop.ToString().c_str());
      store->db().StopWrites(stop);
      engine->NoteStorageTrouble(stop);
    });
  }

  Clock* clock_ = nullptr;
  std::unique_ptr<store::OwnerLock> owner_;  // released last
  std::unique_ptr<store::Store> store_;
  std::thread full_check_;  // StartFullCheck; joined first by Shutdown
  std::unique_ptr<scheduler::TaskQueue> queue_;
  std::unique_ptr<engine::Engine> engine_;
  std::unique_ptr<api::FleetServiceImpl> fleet_;
  std::unique_ptr<api::RunServiceImpl> runs_;
  std::unique_ptr<api::StudyServiceImpl> study_;
  std::unique_ptr<api::AdminServiceImpl> admin_;
  std::unique_ptr<lineage::LineageServiceImpl> lineage_;
  std::unique_ptr<api::ValidationServiceImpl> validations_;
  std::unique_ptr<auth::AccessControl> access_;
  std::unique_ptr<api::AccessServiceImpl> access_service_;
  std::unique_ptr<http::FleetMetrics> metrics_;
  http::CoordinatorParts parts_;
  std::vector<std::unique_ptr<auth::GatedService>> gates_;
  std::unique_ptr<grpc::Server> server_;    // destroyed before what it serves
  std::unique_ptr<http::HttpServer> http_;  // destroyed before server_
  int port_ = 0;
  std::string transport_;

  absl::Mutex mu_;
  bool shut_down_ ABSL_GUARDED_BY(mu_) = false;  // Shutdown() has begun
  bool stopped_ ABSL_GUARDED_BY(mu_) = false;    // Shutdown() has finished
};

}  // namespace

SpecBudgets MachineSpecBudgets() {
  const long pages = sysconf(_SC_PHYS_PAGES);
  const long page_size = sysconf(_SC_PAGESIZE);
  const uint64_t memory =
      pages > 0 && page_size > 0
          ? static_cast<uint64_t>(pages) * static_cast<uint64_t>(page_size)
          : 0;  // unknown: DefaultSpecBudgets' floor
  return DefaultSpecBudgets(memory);
}

absl::StatusOr<std::unique_ptr<Coordinator>> Coordinator::Start(
    const CoordinatorOptions& options) {
  if (options.db_path.empty()) {
    return absl::InvalidArgumentError("--db: a database file is required");
  }
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<CoordinatorImpl> c,
                          CoordinatorImpl::Make(options));
  return std::unique_ptr<Coordinator>(std::move(c));
}

absl::StatusOr<auth::AccessControl::IssuedToken> InitFirstAdmin(
    const std::string& db_path, const std::string& name) {
  if (db_path.empty()) {
    return absl::InvalidArgumentError("--db: a database file is required");
  }
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<store::OwnerLock> owner,
                          store::OwnerLock::Acquire(db_path));
  store::Store::Options open;
  open.initialise_empty_file = owner->created();
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<store::Store> store,
                          store::Store::Open(db_path, open));
  return auth::AccessControl::InitAdmin(store.get(), Clock::Real(), name);
}

}  // namespace skerry::server
