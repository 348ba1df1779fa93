#include "server/coordinator.h"

#include <cstdio>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "common/status_macros.h"
#include "grpcpp/grpcpp.h"
#include "server/api/admin_service.h"
#include "server/api/fleet_service.h"
#include "server/api/run_service.h"
#include "server/engine/engine.h"
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
    SKERRY_ASSIGN_OR_RETURN(c->owner_, store::OwnerLock::Acquire(options.db_path));
    SKERRY_ASSIGN_OR_RETURN(c->store_, store::Store::Open(options.db_path));
    c->queue_ = std::make_unique<scheduler::TaskQueue>(c->clock_, options.lease);
    SKERRY_ASSIGN_OR_RETURN(
        c->engine_,
        engine::Engine::Open(c->store_.get(), c->queue_.get(), c->clock_));
    c->fleet_ = std::make_unique<api::FleetServiceImpl>(
        c->store_.get(), c->engine_.get(), c->queue_.get(), c->clock_,
        options.max_lease_wait);
    api::WatchHubOptions watch;
    watch.max_watchers = options.max_watchers;
    c->runs_ = std::make_unique<api::RunServiceImpl>(
        c->store_.get(), c->engine_.get(), c->fleet_.get(), watch);
    SKERRY_ASSIGN_OR_RETURN(c->lineage_,
                            lineage::LineageServiceImpl::Open(options.db_path));

    grpc::ServerBuilder builder;
    if (!options.listen_address.empty()) {
      builder.AddListeningPort(options.listen_address,
                               grpc::InsecureServerCredentials(), &c->port_);
    }
    builder.SetMaxReceiveMessageSize(kMaxMessageBytes);
    builder.SetMaxSendMessageSize(kMaxMessageBytes);
    builder.RegisterService(c->fleet_.get());
    builder.RegisterService(c->runs_.get());
    c->admin_ = std::make_unique<api::AdminServiceImpl>(options.db_path);
    builder.RegisterService(c->admin_.get());
    builder.RegisterService(c->lineage_.get());
    c->server_ = builder.BuildAndStart();
    if (c->server_ == nullptr ||
        (!options.listen_address.empty() && c->port_ == 0)) {
      return absl::UnavailableError(absl::StrCat(
          "cannot listen on ", options.listen_address,
          " (address in use, or not an address of this machine?)"));
    }
    return c;
  }

  ~CoordinatorImpl() override { Shutdown(); }

  int port() const override { return port_; }

  std::shared_ptr<grpc::Channel> InProcessChannel() override {
    grpc::ChannelArguments args;
    args.SetMaxReceiveMessageSize(kMaxMessageBytes);
    args.SetMaxSendMessageSize(kMaxMessageBytes);
    return server_->InProcessChannel(args);
  }

  void Shutdown() override {
    {
      absl::MutexLock l(&mu_);
      if (shut_down_) return;
      shut_down_ = true;
    }
    // Any part may be missing when Make() failed half-way.
    if (queue_ != nullptr) queue_->Shutdown();  // wakes long polls
    if (runs_ != nullptr) runs_->ShutdownWatches();  // ends watch streams
    if (server_ != nullptr) {
      server_->Shutdown(std::chrono::system_clock::now() +
                        std::chrono::seconds(5));
    }
    if (engine_ != nullptr) engine_->Shutdown();
    if (server_ != nullptr) server_->Wait();
  }

  void Wait() override {
    absl::MutexLock l(&mu_);
    mu_.Await(absl::Condition(&shut_down_));
  }

 private:
  CoordinatorImpl() = default;

  Clock* clock_ = nullptr;
  std::unique_ptr<store::OwnerLock> owner_;  // released last
  std::unique_ptr<store::Store> store_;
  std::unique_ptr<scheduler::TaskQueue> queue_;
  std::unique_ptr<engine::Engine> engine_;
  std::unique_ptr<api::FleetServiceImpl> fleet_;
  std::unique_ptr<api::RunServiceImpl> runs_;
  std::unique_ptr<api::AdminServiceImpl> admin_;
  std::unique_ptr<lineage::LineageServiceImpl> lineage_;
  std::unique_ptr<grpc::Server> server_;
  int port_ = 0;

  absl::Mutex mu_;
  bool shut_down_ ABSL_GUARDED_BY(mu_) = false;
};

}  // namespace

absl::StatusOr<std::unique_ptr<Coordinator>> Coordinator::Start(
    const CoordinatorOptions& options) {
  if (options.db_path.empty()) {
    return absl::InvalidArgumentError("--db: a database file is required");
  }
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<CoordinatorImpl> c,
                          CoordinatorImpl::Make(options));
  return std::unique_ptr<Coordinator>(std::move(c));
}

}  // namespace skerry::server
