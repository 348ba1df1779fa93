// A fake coordinator for worker tests: a real FleetService served on
// 127.0.0.1 (port 0) that hands out a fixed set of tasks, records every Join,
// Lease and Report, and can be told to fail calls or to forget its workers.
//
// Invariant: a task is handed out at most once (no lease expiry) unless it
// is handed back (HandBack queues it again, at the front), so a task reported
// twice means the worker evaluated or reported it twice.
//
// Thread safety: every method may be called from any thread; the gRPC handlers
// run on the server's threads.
#ifndef SKERRY_TESTS_UNIT_WORKER_FAKE_FLEET_H_
#define SKERRY_TESTS_UNIT_WORKER_FAKE_FLEET_H_

#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <memory>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "grpcpp/security/server_credentials.h"
#include "grpcpp/server.h"
#include "grpcpp/server_builder.h"
#include "skerry/v1/fleet.grpc.pb.h"

namespace skerry::worker::testing {

struct ReportRecord {
  uint64_t worker_id = 0;
  std::vector<skerry::v1::TaskResult> results;
  std::vector<uint64_t> held;
  // Every held id was leased and not yet reported, and none is in results.
  bool held_consistent = true;
};

// What the fake has seen so far; read under the fake's lock via Snapshot or
// WaitUntil.
struct FleetState {
  std::vector<skerry::v1::JoinRequest> joins;
  std::vector<skerry::v1::LeaseRequest> leases;  // successful ones
  std::vector<ReportRecord> reports;             // successful ones
  std::map<uint64_t, int> times_reported;        // task id -> reports naming it
  std::map<uint64_t, skerry::v1::TaskResult> results;  // task id -> result
  std::set<uint64_t> leased;                           // handed out so far
  int failed_calls = 0;
  int leases_waiting = 0;  // Lease calls now in their long poll
  std::vector<skerry::v1::HandBackRequest> hand_backs;
  std::set<uint64_t> handed_back;  // task ids queued again by HandBack
};

class FakeFleet final : public skerry::v1::FleetService::Service {
 public:
  void AddTasks(const std::vector<skerry::v1::Task>& tasks) {
    absl::MutexLock l(&mu_);
    for (const skerry::v1::Task& t : tasks) pending_.push_back(t);
  }
  // The next n calls of each kind fail with UNAVAILABLE.
  void FailJoins(int n) { SetFailures(&fail_joins_, n); }
  void FailLeases(int n) { SetFailures(&fail_leases_, n); }
  void FailReports(int n) { SetFailures(&fail_reports_, n); }
  // Every Join answers this code (OK: behave normally).
  void RefuseJoins(grpc::StatusCode code) {
    absl::MutexLock l(&mu_);
    refuse_joins_ = code;
  }
  void set_lease_seconds(double s) {
    absl::MutexLock l(&mu_);
    lease_seconds_ = s;
  }
  // As after a restart with a new fleet table: known worker ids become unknown
  // (NOT_FOUND) and the next Join hands out a fresh one.
  void ForgetWorkers() {
    absl::MutexLock l(&mu_);
    known_ids_.clear();
  }
  // Ends long polls so the server can shut down.
  void Close() {
    absl::MutexLock l(&mu_);
    closed_ = true;
  }

  FleetState Snapshot() {
    absl::MutexLock l(&mu_);
    return state_;
  }
  // Waits up to limit for pred(state); returns its final value.
  bool WaitUntil(std::function<bool(const FleetState&)> pred,
                 absl::Duration limit = absl::Seconds(30)) {
    absl::MutexLock l(&mu_);
    auto ready = [&] {
      mu_.AssertHeld();  // for the analysis: Await calls this under mu_
      return pred(state_);
    };
    return mu_.AwaitWithTimeout(absl::Condition(&ready), limit);
  }

  grpc::Status Join(grpc::ServerContext*,
                    const skerry::v1::JoinRequest* request,
                    skerry::v1::JoinResponse* response) override {
    absl::MutexLock l(&mu_);
    if (TakeFailure(&fail_joins_)) return Unavailable();
    if (refuse_joins_ != grpc::StatusCode::OK) {
      return grpc::Status(refuse_joins_, "not allowed here");
    }
    state_.joins.push_back(*request);
    const uint64_t id = next_id_++;
    known_ids_.insert(id);
    response->set_worker_id(id);
    response->set_lease_seconds(lease_seconds_);
    return grpc::Status::OK;
  }

  grpc::Status Lease(grpc::ServerContext* context,
                     const skerry::v1::LeaseRequest* request,
                     skerry::v1::LeaseResponse* response) override {
    absl::MutexLock l(&mu_);
    if (TakeFailure(&fail_leases_)) return Unavailable();
    if (known_ids_.count(request->worker_id()) == 0) return UnknownWorker();
    if (pending_.empty() && request->wait_ms() > 0) {
      ++state_.leases_waiting;
      auto wake = [&] {
        mu_.AssertHeld();
        return !pending_.empty() || closed_ || context->IsCancelled() ||
               known_ids_.count(request->worker_id()) == 0;
      };
      // Bounded slices so a cancelled call is noticed.
      const absl::Time end =
          absl::Now() + absl::Milliseconds(request->wait_ms());
      while (!wake() && absl::Now() < end) {
        mu_.AwaitWithTimeout(absl::Condition(&wake), absl::Milliseconds(50));
      }
      --state_.leases_waiting;
      if (known_ids_.count(request->worker_id()) == 0) return UnknownWorker();
    }
    state_.leases.push_back(*request);
    for (uint32_t i = 0; i < request->max_tasks() && !pending_.empty(); ++i) {
      state_.leased.insert(pending_.front().task_id());
      held_[pending_.front().task_id()] = {request->worker_id(),
                                           pending_.front()};
      *response->add_tasks() = pending_.front();
      pending_.pop_front();
    }
    response->set_lease_seconds(lease_seconds_);
    return grpc::Status::OK;
  }

  grpc::Status Report(grpc::ServerContext*,
                      const skerry::v1::ReportRequest* request,
                      skerry::v1::ReportResponse* response) override {
    absl::MutexLock l(&mu_);
    if (TakeFailure(&fail_reports_)) return Unavailable();
    if (known_ids_.count(request->worker_id()) == 0) return UnknownWorker();
    ReportRecord record;
    record.worker_id = request->worker_id();
    record.results.assign(request->results().begin(), request->results().end());
    record.held.assign(request->held_task_ids().begin(),
                       request->held_task_ids().end());
    std::set<uint64_t> in_results;
    for (const auto& r : record.results) in_results.insert(r.task_id());
    for (uint64_t id : record.held) {
      const bool outstanding =
          state_.leased.count(id) == 1 && state_.results.count(id) == 0;
      if (!outstanding || in_results.count(id) == 1)
        record.held_consistent = false;
    }
    uint32_t accepted = 0;
    for (const auto& r : record.results) {
      held_.erase(r.task_id());
      if (++state_.times_reported[r.task_id()] == 1) {
        state_.results[r.task_id()] = r;
        ++accepted;
      }
    }
    response->set_accepted(accepted);
    response->set_ignored(static_cast<uint32_t>(record.results.size()) -
                          accepted);
    state_.reports.push_back(std::move(record));
    return grpc::Status::OK;
  }

  grpc::Status HandBack(grpc::ServerContext*,
                        const skerry::v1::HandBackRequest* request,
                        skerry::v1::HandBackResponse* response) override {
    absl::MutexLock l(&mu_);
    if (known_ids_.count(request->worker_id()) == 0) return UnknownWorker();
    state_.hand_backs.push_back(*request);
    std::set<uint64_t> ids(request->task_ids().begin(),
                           request->task_ids().end());
    if (request->all_held()) {
      for (const auto& [id, held] : held_) {
        if (held.first == request->worker_id()) ids.insert(id);
      }
    }
    uint32_t requeued = 0;
    for (uint64_t id : ids) {
      auto it = held_.find(id);
      if (it == held_.end() || it->second.first != request->worker_id()) {
        continue;
      }
      pending_.push_front(it->second.second);
      state_.handed_back.insert(id);
      held_.erase(it);
      ++requeued;
    }
    response->set_requeued(requeued);
    return grpc::Status::OK;
  }

 private:
  void SetFailures(int* counter, int n) {
    absl::MutexLock l(&mu_);
    *counter = n;
  }
  bool TakeFailure(int* counter) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    if (*counter <= 0) return false;
    --*counter;
    ++state_.failed_calls;
    return true;
  }
  static grpc::Status Unavailable() {
    return grpc::Status(grpc::StatusCode::UNAVAILABLE, "injected failure");
  }
  static grpc::Status UnknownWorker() {
    return grpc::Status(grpc::StatusCode::NOT_FOUND, "unknown worker id");
  }

  absl::Mutex mu_;
  FleetState state_ ABSL_GUARDED_BY(mu_);
  std::deque<skerry::v1::Task> pending_ ABSL_GUARDED_BY(mu_);
  // Leased and not reported: task id -> (worker id, task).
  std::map<uint64_t, std::pair<uint64_t, skerry::v1::Task>> held_
      ABSL_GUARDED_BY(mu_);
  std::set<uint64_t> known_ids_ ABSL_GUARDED_BY(mu_);
  uint64_t next_id_ ABSL_GUARDED_BY(mu_) = 101;
  double lease_seconds_ ABSL_GUARDED_BY(mu_) = 30.0;
  int fail_joins_ ABSL_GUARDED_BY(mu_) = 0;
  int fail_leases_ ABSL_GUARDED_BY(mu_) = 0;
  int fail_reports_ ABSL_GUARDED_BY(mu_) = 0;
  grpc::StatusCode refuse_joins_ ABSL_GUARDED_BY(mu_) = grpc::StatusCode::OK;
  bool closed_ ABSL_GUARDED_BY(mu_) = false;
};

// The fake served on a free loopback port for the test's lifetime.
class FakeFleetServer {
 public:
  FakeFleetServer() {
    grpc::ServerBuilder builder;
    builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(),
                             &port_);
    builder.RegisterService(&fleet_);
    server_ = builder.BuildAndStart();
  }
  ~FakeFleetServer() { Shutdown(); }
  void Shutdown() {
    if (server_ == nullptr) return;
    fleet_.Close();
    server_->Shutdown(std::chrono::system_clock::now() +
                      std::chrono::seconds(5));
    server_.reset();
  }
  bool started() const { return server_ != nullptr && port_ > 0; }
  std::string address() const { return absl::StrCat("127.0.0.1:", port_); }
  FakeFleet& fleet() { return fleet_; }

 private:
  FakeFleet fleet_;
  int port_ = 0;
  std::unique_ptr<grpc::Server> server_;
};

}  // namespace skerry::worker::testing

#endif  // SKERRY_TESTS_UNIT_WORKER_FAKE_FLEET_H_
