#include "worker/worker.h"

#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <deque>
#include <iterator>
#include <limits>
#include <map>
#include <memory>
#include <random>
#include <set>
#include <thread>
#include <unordered_set>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/mutex.h"
#include "common/evaluator.h"
#include "common/read_only.h"
#include "common/version.h"
#include "grpcpp/client_context.h"
#include "grpcpp/support/status.h"

namespace skerry::worker {
namespace {

using skerry::v1::HandBackRequest;
using skerry::v1::HandBackResponse;
using skerry::v1::JoinRequest;
using skerry::v1::JoinResponse;
using skerry::v1::LeaseRequest;
using skerry::v1::LeaseResponse;
using skerry::v1::ReportRequest;
using skerry::v1::ReportResponse;
using skerry::v1::Task;
using skerry::v1::TaskResult;

constexpr int kMaxThreads = 4096;
constexpr absl::Duration kInitialBackoff = absl::Milliseconds(100);
constexpr absl::Duration kFinalReportDeadline = absl::Seconds(2);
constexpr absl::Duration kDefaultRenewal = absl::Seconds(10);
constexpr absl::Duration kMinRenewal = absl::Milliseconds(200);
// A long poll that comes back empty sooner than this (a coordinator that does
// not wait) is followed by this pause, so an idle worker never spins.
constexpr absl::Duration kEmptyPollPause = absl::Milliseconds(100);
constexpr absl::Duration kMaxRpcBudget = absl::Hours(24);
constexpr size_t kMaxResultsPerReport = 4096;
// Natural ES centres kept for the samples of later leases (protocol 4): one
// per island and run in flight is the need; beyond it, unused ones go.
constexpr size_t kMaxCentres = 16;

// What to do after an RPC, decided by its status code alone.
enum class Next { kDone, kRetry, kRejoin, kGiveUp };

Next Classify(const grpc::Status& status) {
  switch (status.error_code()) {
    case grpc::StatusCode::OK:
      return Next::kDone;
    case grpc::StatusCode::NOT_FOUND:  // the worker id is unknown
      return Next::kRejoin;
    case grpc::StatusCode::FAILED_PRECONDITION:
      // A --read-only coordinator never has work: waiting cannot help.
      if (IsReadOnlyRefusal(status.error_message())) return Next::kGiveUp;
      return Next::kRejoin;  // e.g. a new fleet table
    case grpc::StatusCode::UNAUTHENTICATED:
    case grpc::StatusCode::PERMISSION_DENIED:
    case grpc::StatusCode::UNIMPLEMENTED:  // not a coordinator
      return Next::kGiveUp;
    default:  // UNAVAILABLE, DEADLINE_EXCEEDED, RESOURCE_EXHAUSTED, ...
      return Next::kRetry;
  }
}

absl::Status Refused(const grpc::Status& status, absl::string_view rpc) {
  // gRPC and Abseil share the canonical code numbering.
  return absl::Status(
      static_cast<absl::StatusCode>(status.error_code()),
      absl::StrCat("coordinator refused ", rpc, ": ", status.error_message()));
}

void SetDeadline(grpc::ClientContext* context, absl::Duration budget) {
  budget = std::clamp(budget, absl::ZeroDuration(), kMaxRpcBudget);
  context->set_deadline(std::chrono::system_clock::now() +
                        absl::ToChronoMilliseconds(budget));
}

// Capped exponential backoff: 100 ms doubling up to the cap, each delay drawn
// uniformly from [step/2, step]. The jitter only spreads a fleet's retries; it
// is not part of any reproducibility contract.
class Backoff {
 public:
  Backoff(absl::Duration cap, uint32_t seed)
      : cap_(std::max(cap, kInitialBackoff)), rng_(seed) {}
  absl::Duration Next() {
    std::uniform_real_distribution<double> jitter(0.5, 1.0);
    const absl::Duration delay = step_ * jitter(rng_);
    step_ = std::min(step_ * 2, cap_);
    return delay;
  }
  void Reset() { step_ = kInitialBackoff; }

 private:
  const absl::Duration cap_;
  absl::Duration step_ = kInitialBackoff;
  std::minstd_rand rng_;
};

std::string HostName() {
  char buf[256] = {};
  if (gethostname(buf, sizeof(buf) - 1) != 0 || buf[0] == '\0') {
    return "unknown-host";
  }
  return buf;
}

WorkerOptions WithDefaults(WorkerOptions options) {
  if (options.name.empty())
    options.name = absl::StrCat(HostName(), "-", getpid());
  if (options.batch == 0 && options.threads > 0) {
    options.batch =
        static_cast<uint32_t>(4 * std::min(options.threads, kMaxThreads));
  }
  return options;
}

absl::Status CheckOptions(const WorkerOptions& o) {
  if (o.threads < 1 || o.threads > kMaxThreads) {
    return absl::InvalidArgumentError(
        absl::StrCat("WorkerOptions.threads: expected 1 to ", kMaxThreads,
                     ", got ", o.threads));
  }
  if (o.wait < absl::ZeroDuration() ||
      o.wait > absl::Milliseconds(std::numeric_limits<uint32_t>::max())) {
    return absl::InvalidArgumentError(
        absl::StrCat("WorkerOptions.wait: expected 0 to 2^32-1 ms, got ",
                     absl::FormatDuration(o.wait)));
  }
  if (o.rpc_deadline <= absl::ZeroDuration()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "WorkerOptions.rpc_deadline: expected a positive duration, got ",
        absl::FormatDuration(o.rpc_deadline)));
  }
  if (o.max_backoff < absl::ZeroDuration() ||
      o.report_interval < absl::ZeroDuration()) {
    return absl::InvalidArgumentError(
        "WorkerOptions.max_backoff and report_interval must not be negative");
  }
  return absl::OkStatus();
}

}  // namespace

class Worker::Impl {
 public:
  Impl(std::unique_ptr<skerry::v1::FleetService::StubInterface> stub,
       WorkerOptions options, Clock* clock)
      : stub_(std::move(stub)),
        options_(WithDefaults(std::move(options))),
        clock_(clock != nullptr ? clock : Clock::Real()),
        registry_(std::make_shared<child::ChildRegistry>()),
        make_evaluator_(options_.make_evaluator
                            ? options_.make_evaluator
                            : WorkerEvaluatorFactory(
                                  {}, {options_.sandbox, registry_, clock_})) {}

  absl::Status Run();
  void Stop();
  void KillEvaluators() { registry_->KillAll(); }
  uint64_t results_reported() const { return reported_.load(); }
  bool exited_idle() const { return exited_idle_.load(); }

 private:
  // Registers an RPC's context for the call's duration, so Stop() can cancel
  // it.
  class ScopedCall {
   public:
    // A cancellable call is cancelled by Stop(). A Report is not: cancelling
    // it could lose the answer to a report the coordinator already committed,
    // and the results would be sent twice; it ends within its deadline.
    ScopedCall(Impl* impl, grpc::ClientContext* context,
               bool cancellable = true);
    ~ScopedCall();

   private:
    Impl* const impl_;
    grpc::ClientContext* const context_;
  };

  void LeaseLoop(uint32_t seed);
  void EvalLoop();
  void ReportLoop(uint32_t seed);
  void FinalReport();
  // Hands back every task still held (the worker is leaving).
  void HandBackRest();

  // Joins unless already joined, retrying with backoff. Sets *id. False when
  // stopping or when the coordinator refused the worker for good.
  bool EnsureJoined(Backoff& backoff, uint64_t* id);
  // Marks id as unknown to the coordinator, so the next call joins again.
  void ForgetWorkerId(uint64_t id);
  // After a failed RPC: backs off, arranges a rejoin or gives up. False when
  // the calling loop should end.
  bool HandleFailure(const grpc::Status& status, absl::string_view rpc,
                     uint64_t id, Backoff& backoff);
  // False when Stop() came first.
  bool SleepUnlessStopping(absl::Duration d);
  void GiveUp(absl::Status status);
  void SetRenewal(double lease_seconds);
  // Removes the first n buffered results, now acknowledged.
  void CommitReported(size_t n);

  size_t BuildReport(ReportRequest* request, bool with_held)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  std::string Secret() {
    absl::MutexLock l(&mu_);
    return worker_secret_;
  }
  // A result for the task waits to be reported.
  bool HasResult(uint64_t task_id) const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    return std::any_of(
        results_.begin(), results_.end(),
        [task_id](const TaskResult& r) { return r.task_id() == task_id; });
  }
  bool WantsLease() const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Drops centres no queued task needs, oldest (smallest id) first, until at
  // most kMaxCentres are left.
  void ForgetUnusedCentres() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    if (centres_.size() <= kMaxCentres) return;
    std::unordered_set<uint64_t> needed;
    for (const Task& t : queue_) {
      if (t.has_sample()) needed.insert(t.sample().centre_id());
    }
    for (auto it = centres_.begin();
         it != centres_.end() && centres_.size() > kMaxCentres;) {
      it = needed.count(it->first) > 0 ? std::next(it) : centres_.erase(it);
    }
  }
  // Restarts the idle time while any task is held; true once
  // options_.exit_when_idle has passed with none.
  bool IdleTooLong() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Stops the worker (exited_idle) when IdleTooLong(); true then.
  bool StopIfIdleTooLong();
  bool TaskOrStopping() const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    return stopping_ || !queue_.empty();
  }
  bool ResultsOrStopping() const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    return stopping_ || !results_.empty();
  }
  // Report now: a batch is full, or nothing else is being evaluated here (so
  // waiting would only delay the coordinator, which may be waiting for these
  // results to finish a generation).
  bool BatchOrStopping() const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    return stopping_ || results_.size() >= options_.batch ||
           (queue_.empty() && working_.empty());
  }

  // Constant after construction.
  const std::unique_ptr<skerry::v1::FleetService::StubInterface> stub_;
  const WorkerOptions options_;
  Clock* const clock_;
  const std::shared_ptr<child::ChildRegistry> registry_;
  const EvaluatorFactory make_evaluator_;

  // Held across a Join RPC so that only one thread joins at a time.
  // Lock order: join_mu_, then mu_ or calls_mu_.
  absl::Mutex join_mu_;

  mutable absl::Mutex mu_;
  bool stopping_ ABSL_GUARDED_BY(mu_) = false;
  absl::Status give_up_ ABSL_GUARDED_BY(mu_);
  bool joined_ ABSL_GUARDED_BY(mu_) = false;
  uint64_t worker_id_ ABSL_GUARDED_BY(mu_) = 0;
  // JoinResponse.worker_secret, quoted with worker_id_ in every call.
  std::string worker_secret_ ABSL_GUARDED_BY(mu_);
  absl::Duration renewal_ ABSL_GUARDED_BY(mu_) = kDefaultRenewal;
  // Leased tasks not yet started.
  std::deque<Task> queue_ ABSL_GUARDED_BY(mu_);
  // Ids of tasks queued or being evaluated.
  std::unordered_set<uint64_t> working_ ABSL_GUARDED_BY(mu_);
  // Protocol 4: the centres of natural ES samples, by distribution genome
  // id, named in every LeaseRequest (held_centres). At most kMaxCentres once
  // the queued tasks no longer need the rest; an evaluation holds its own
  // reference.
  std::map<uint64_t, std::shared_ptr<const std::vector<double>>> centres_
      ABSL_GUARDED_BY(mu_);
  // Results waiting for a successful Report, oldest first.
  std::deque<TaskResult> results_ ABSL_GUARDED_BY(mu_);
  // A short (non-waiting) lease found no work: wait for an empty queue, then
  // long-poll, rather than asking again at once.
  bool short_lease_was_empty_ ABSL_GUARDED_BY(mu_) = false;
  // When the worker last held a task (or started): set on leasing, on
  // finishing an evaluation, and whenever IdleTooLong() finds work held.
  absl::Time last_busy_ ABSL_GUARDED_BY(mu_) = absl::InfinitePast();

  absl::Mutex calls_mu_;
  std::set<grpc::ClientContext*> calls_ ABSL_GUARDED_BY(calls_mu_);
  bool cancel_calls_ ABSL_GUARDED_BY(calls_mu_) = false;

  std::atomic<uint64_t> reported_{0};
  std::atomic<bool> ran_{false};
  std::atomic<bool> exited_idle_{false};
};

Worker::Impl::ScopedCall::ScopedCall(Impl* impl, grpc::ClientContext* context,
                                     bool cancellable)
    : impl_(impl), context_(cancellable ? context : nullptr) {
  if (context_ == nullptr) return;
  absl::MutexLock l(&impl_->calls_mu_);
  // A call cancelled before it starts fails as soon as it starts.
  if (impl_->cancel_calls_) context_->TryCancel();
  impl_->calls_.insert(context_);
}

Worker::Impl::ScopedCall::~ScopedCall() {
  if (context_ == nullptr) return;
  absl::MutexLock l(&impl_->calls_mu_);
  impl_->calls_.erase(context_);
}

absl::Status Worker::Impl::Run() {
  if (ran_.exchange(true)) {
    return absl::FailedPreconditionError("Worker::Run may be called only once");
  }
  if (absl::Status s = CheckOptions(options_); !s.ok()) return s;
  const uint32_t seed = static_cast<uint32_t>(getpid());
  {
    absl::MutexLock l(&mu_);
    last_busy_ = clock_->Now();
  }
  {
    Backoff backoff(options_.max_backoff, seed);
    uint64_t id = 0;
    if (!EnsureJoined(backoff, &id)) {
      absl::MutexLock l(&mu_);
      return give_up_;
    }
  }
  std::vector<std::thread> threads;
  threads.emplace_back([this, seed] { LeaseLoop(seed * 31u + 1u); });
  threads.emplace_back([this, seed] { ReportLoop(seed * 31u + 2u); });
  for (int i = 0; i < options_.threads; ++i) {
    threads.emplace_back([this] { EvalLoop(); });
  }
  {
    absl::MutexLock l(&mu_);
    mu_.Await(absl::Condition(&stopping_));
  }
  for (std::thread& t : threads) t.join();
  FinalReport();
  HandBackRest();
  absl::MutexLock l(&mu_);
  return give_up_;
}

void Worker::Impl::Stop() {
  {
    absl::MutexLock l(&mu_);
    stopping_ = true;
  }
  // Evaluations in progress end now; their tasks are handed back.
  registry_->KillAll();
  absl::MutexLock l(&calls_mu_);
  cancel_calls_ = true;
  for (grpc::ClientContext* context : calls_) context->TryCancel();
}

bool Worker::Impl::EnsureJoined(Backoff& backoff, uint64_t* id) {
  absl::MutexLock join_lock(&join_mu_);
  while (true) {
    {
      absl::MutexLock l(&mu_);
      if (stopping_) return false;
      if (joined_) {
        *id = worker_id_;
        return true;
      }
    }
    JoinRequest request;
    request.set_name(options_.name);
    request.set_host(HostName());
    request.set_threads(static_cast<uint32_t>(options_.threads));
    for (const std::string& name : BuiltinNames()) request.add_evaluators(name);
    request.set_version(kVersion);
    request.set_protocol_version(kProtocolVersion);
    request.set_sandbox(options_.sandbox != nullptr
                            ? options_.sandbox->state()
                            : "none: no sandbox configured");
    JoinResponse response;
    grpc::ClientContext context;
    SetDeadline(&context, options_.rpc_deadline);
    grpc::Status status;
    {
      ScopedCall call(this, &context);
      status = stub_->Join(&context, request, &response);
    }
    if (status.ok()) {
      backoff.Reset();
      SetRenewal(response.lease_seconds());
      absl::MutexLock l(&mu_);
      joined_ = true;
      worker_id_ = response.worker_id();
      worker_secret_ = response.worker_secret();
      continue;
    }
    if (Classify(status) == Next::kGiveUp ||
        status.error_code() == grpc::StatusCode::INVALID_ARGUMENT) {
      GiveUp(Refused(status, "Join"));
      return false;
    }
    if (StopIfIdleTooLong()) return false;
    if (!SleepUnlessStopping(backoff.Next())) return false;
  }
}

void Worker::Impl::ForgetWorkerId(uint64_t id) {
  absl::MutexLock l(&mu_);
  if (joined_ && worker_id_ == id) joined_ = false;
}

bool Worker::Impl::HandleFailure(const grpc::Status& status,
                                 absl::string_view rpc, uint64_t id,
                                 Backoff& backoff) {
  {
    absl::MutexLock l(&mu_);
    if (stopping_) return false;  // most likely cancelled by Stop()
  }
  switch (Classify(status)) {
    case Next::kGiveUp:
      GiveUp(Refused(status, rpc));
      return false;
    case Next::kRejoin:
      ForgetWorkerId(id);
      break;
    case Next::kDone:
    case Next::kRetry:
      break;
  }
  return SleepUnlessStopping(backoff.Next());
}

bool Worker::Impl::SleepUnlessStopping(absl::Duration d) {
  absl::MutexLock l(&mu_);
  clock_->AwaitWithTimeout(&mu_, absl::Condition(&stopping_), d);
  return !stopping_;
}

void Worker::Impl::GiveUp(absl::Status status) {
  {
    absl::MutexLock l(&mu_);
    if (give_up_.ok()) give_up_ = std::move(status);
  }
  Stop();
}

void Worker::Impl::SetRenewal(double lease_seconds) {
  if (!(lease_seconds > 0)) return;  // the coordinator did not say
  absl::MutexLock l(&mu_);
  renewal_ = std::max(absl::Seconds(lease_seconds) / 3, kMinRenewal);
}

bool Worker::Impl::WantsLease() const {
  if (stopping_) return true;
  if (queue_.size() >= static_cast<size_t>(options_.threads)) return false;
  return !(short_lease_was_empty_ && !queue_.empty());
}

bool Worker::Impl::IdleTooLong() {
  if (options_.exit_when_idle <= absl::ZeroDuration()) return false;
  const absl::Time now = clock_->Now();
  if (!queue_.empty() || !working_.empty() || !results_.empty()) {
    last_busy_ = now;
    return false;
  }
  return now - last_busy_ >= options_.exit_when_idle;
}

bool Worker::Impl::StopIfIdleTooLong() {
  {
    absl::MutexLock l(&mu_);
    if (!IdleTooLong()) return false;
  }
  exited_idle_.store(true);
  Stop();
  return true;
}

void Worker::Impl::LeaseLoop(uint32_t seed) {
  Backoff backoff(options_.max_backoff, seed);
  while (true) {
    bool long_poll = false;
    {
      absl::MutexLock l(&mu_);
      mu_.Await(absl::Condition(this, &Impl::WantsLease));
      if (stopping_) return;
      long_poll = queue_.empty();
    }
    if (StopIfIdleTooLong()) return;
    uint64_t id = 0;
    if (!EnsureJoined(backoff, &id)) return;
    const absl::Duration wait =
        long_poll ? options_.wait : absl::ZeroDuration();
    LeaseRequest request;
    request.set_worker_id(id);
    request.set_worker_secret(Secret());
    request.set_max_tasks(options_.batch);
    request.set_protocol_version(kProtocolVersion);
    request.set_wait_ms(static_cast<uint32_t>(absl::ToInt64Milliseconds(wait)));
    {
      absl::MutexLock l(&mu_);
      for (const auto& [centre, genes] : centres_) {
        request.add_held_centres(centre);
      }
    }
    LeaseResponse response;
    grpc::ClientContext context;
    SetDeadline(&context, wait + options_.rpc_deadline);
    const absl::Time start = clock_->Now();
    grpc::Status status;
    {
      ScopedCall call(this, &context);
      status = stub_->Lease(&context, request, &response);
    }
    if (!status.ok()) {
      if (!HandleFailure(status, "Lease", id, backoff)) return;
      continue;
    }
    backoff.Reset();
    SetRenewal(response.lease_seconds());
    const bool empty = response.tasks().empty();
    {
      absl::MutexLock l(&mu_);
      if (!empty) last_busy_ = clock_->Now();
      for (const skerry::v1::Centre& c : response.centres()) {
        centres_[c.id()] = std::make_shared<const std::vector<double>>(
            c.genes().begin(), c.genes().end());
      }
      for (Task& task : *response.mutable_tasks()) {
        // A task offered again while still held here is already being
        // handled; one whose result waits to be reported (the coordinator
        // restarted, say) is not evaluated again: that result is sent.
        if (HasResult(task.task_id())) continue;
        if (working_.insert(task.task_id()).second) {
          queue_.push_back(std::move(task));
        }
      }
      ForgetUnusedCentres();
      short_lease_was_empty_ = empty && !long_poll;
    }
    if (empty && long_poll && clock_->Now() - start < kEmptyPollPause) {
      if (!SleepUnlessStopping(kEmptyPollPause)) return;
    }
  }
}

void Worker::Impl::EvalLoop() {
  EvaluatorCache cache(make_evaluator_, clock_, options_.evaluator_cache);
  while (true) {
    // An idle thread still lets go of evaluators unused for too long.
    const absl::Duration idle_check = cache.TimeToNextExpiry();
    Task task;
    bool have_task = false;
    std::shared_ptr<const std::vector<double>> centre;
    {
      absl::MutexLock l(&mu_);
      const bool woken = clock_->AwaitWithTimeout(
          &mu_, absl::Condition(this, &Impl::TaskOrStopping), idle_check);
      // Queued tasks stay in working_: they are handed back.
      if (stopping_) return;
      if (woken) {
        task = std::move(queue_.front());
        queue_.pop_front();
        have_task = true;
        if (task.has_sample()) {
          auto c = centres_.find(task.sample().centre_id());
          if (c != centres_.end()) centre = c->second;
        }
      }
    }
    if (!have_task) {
      cache.ReapIdle();
      continue;
    }
    // A sample sent as its recipe is built here, on this thread.
    const absl::Status expanded = ExpandSample(&task, centre.get());
    centre.reset();
    TaskResult result;
    if (expanded.ok()) {
      result = EvaluateTask(task, cache, clock_);
    } else {
      result.set_task_id(task.task_id());
      result.set_attempt(task.attempt());
      result.set_lease_proof(task.lease_proof());
      result.set_error(std::string(expanded.message()));
    }
    absl::MutexLock l(&mu_);
    // An evaluation that failed while stopping was most likely cut short by
    // Stop(): it is handed back, not reported as a failed attempt.
    if (stopping_ && !result.error().empty()) return;
    // The lease loop may not look again before this result is reported.
    last_busy_ = clock_->Now();
    working_.erase(task.task_id());
    results_.push_back(std::move(result));
  }
}

size_t Worker::Impl::BuildReport(ReportRequest* request, bool with_held) {
  const size_t n = std::min(results_.size(), kMaxResultsPerReport);
  for (size_t i = 0; i < n; ++i) *request->add_results() = results_[i];
  if (with_held) {
    for (uint64_t id : working_) request->add_held_task_ids(id);
    for (size_t i = n; i < results_.size(); ++i) {
      request->add_held_task_ids(results_[i].task_id());
    }
  }
  return n;
}

void Worker::Impl::CommitReported(size_t n) {
  bool reached = false;
  {
    absl::MutexLock l(&mu_);
    results_.erase(results_.begin(), results_.begin() + static_cast<long>(n));
    const uint64_t total = reported_.fetch_add(n) + n;
    reached = options_.max_results > 0 && total >= options_.max_results;
  }
  if (reached) Stop();
}

void Worker::Impl::ReportLoop(uint32_t seed) {
  Backoff backoff(options_.max_backoff, seed);
  while (true) {
    ReportRequest request;
    size_t taken = 0;
    {
      absl::MutexLock l(&mu_);
      // Wake for results, or when the held lease needs renewing.
      const bool have_results = clock_->AwaitWithTimeout(
          &mu_, absl::Condition(this, &Impl::ResultsOrStopping), renewal_);
      if (stopping_) return;
      if (have_results && results_.size() < options_.batch) {
        clock_->AwaitWithTimeout(&mu_,
                                 absl::Condition(this, &Impl::BatchOrStopping),
                                 options_.report_interval);
        if (stopping_) return;
      }
      if (results_.empty() && working_.empty()) continue;
      taken = BuildReport(&request, /*with_held=*/true);
    }
    uint64_t id = 0;
    if (!EnsureJoined(backoff, &id)) return;
    request.set_worker_id(id);
    request.set_worker_secret(Secret());
    ReportResponse response;
    grpc::ClientContext context;
    SetDeadline(&context, options_.rpc_deadline);
    grpc::Status status;
    {
      ScopedCall call(this, &context, /*cancellable=*/false);
      status = stub_->Report(&context, request, &response);
    }
    if (!status.ok()) {
      if (!HandleFailure(status, "Report", id, backoff)) return;
      continue;
    }
    backoff.Reset();
    CommitReported(taken);
  }
}

void Worker::Impl::FinalReport() {
  ReportRequest request;
  size_t taken = 0;
  {
    absl::MutexLock l(&mu_);
    if (results_.empty() || !joined_) return;
    request.set_worker_id(worker_id_);
    request.set_worker_secret(worker_secret_);
    // No held ids: the worker is leaving, so its other tasks may expire.
    taken = BuildReport(&request, /*with_held=*/false);
  }
  ReportResponse response;
  grpc::ClientContext context;
  SetDeadline(&context, std::min(kFinalReportDeadline, options_.rpc_deadline));
  if (stub_->Report(&context, request, &response).ok()) CommitReported(taken);
}

void Worker::Impl::HandBackRest() {
  HandBackRequest request;
  {
    absl::MutexLock l(&mu_);
    if (!joined_) return;
    request.set_worker_id(worker_id_);
    request.set_worker_secret(worker_secret_);
    for (uint64_t id : working_) request.add_task_ids(id);
  }
  // Also tasks of a Lease whose answer Stop() cut off.
  request.set_all_held(true);
  HandBackResponse response;
  grpc::ClientContext context;
  SetDeadline(&context, std::min(kFinalReportDeadline, options_.rpc_deadline));
  // Failure is harmless: the leases then expire.
  (void)stub_->HandBack(&context, request, &response);
}

Worker::Worker(std::unique_ptr<skerry::v1::FleetService::StubInterface> stub,
               WorkerOptions options, Clock* clock)
    : impl_(
          std::make_unique<Impl>(std::move(stub), std::move(options), clock)) {}

Worker::~Worker() = default;

absl::Status Worker::Run() { return impl_->Run(); }

void Worker::Stop() { impl_->Stop(); }

void Worker::KillEvaluators() { impl_->KillEvaluators(); }

uint64_t Worker::results_reported() const { return impl_->results_reported(); }

bool Worker::exited_idle() const { return impl_->exited_idle(); }

}  // namespace skerry::worker
