// Worker against a real gRPC server (the fake coordinator) on a loopback port.
// No timed assertions: every wait is a bounded wait for a condition.
#include "worker/worker.h"

#include <atomic>
#include <cmath>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/status/status.h"
#include "absl/synchronization/notification.h"
#include "absl/time/time.h"
#include "common/version.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/unit/worker/fake_fleet.h"
#include "worker/channel.h"

namespace skerry::worker {
namespace {

using skerry::v1::Task;
using ::testing::Contains;
using testing::FakeFleet;
using testing::FakeFleetServer;
using testing::FleetState;
using ::testing::HasSubstr;
using ::testing::IsEmpty;
using ::testing::Not;

constexpr absl::Duration kLimit = absl::Seconds(30);
// genes[0] of a task whose evaluation waits for the test's gate.
constexpr double kGatedMarker = 1000.0;

// Sphere: f(x) = sum x_i^2 (Jamil & Yang 2013, IJMMNO 4(2), "Sphere").
double SphereOf(const Task& task) {
  double sum = 0.0;
  for (double x : task.genes()) sum += x * x;
  return sum;
}

Task MakeTask(uint64_t id, const std::string& function = "sphere",
              std::vector<double> genes = {}) {
  Task task;
  task.set_task_id(id);
  task.set_attempt(1);
  task.set_run_id(7);
  task.set_eval_seed(id * 1000003u);
  task.mutable_evaluator()->mutable_builtin()->set_function(function);
  if (genes.empty()) {
    for (int i = 0; i < 5; ++i)
      genes.push_back(0.25 * static_cast<double>(id % 9) - 0.5 * i);
  }
  for (double g : genes) task.add_genes(g);
  return task;
}

std::vector<Task> SphereTasks(uint64_t first, int n) {
  std::vector<Task> tasks;
  for (int i = 0; i < n; ++i)
    tasks.push_back(MakeTask(first + static_cast<uint64_t>(i)));
  return tasks;
}

// Evaluates sphere; a task whose first gene is kGatedMarker first waits until
// the gate opens (bounded, so a failing test cannot hang).
class GatedSphere : public Evaluator {
 public:
  GatedSphere(std::shared_ptr<absl::Notification> gate,
              std::shared_ptr<std::atomic<int>> evaluations)
      : gate_(std::move(gate)), evaluations_(std::move(evaluations)) {}
  absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                  uint64_t) override {
    if (!genes.empty() && genes[0] == kGatedMarker) {
      gate_->WaitForNotificationWithTimeout(absl::Seconds(60));
    }
    double sum = 0.0;
    for (double x : genes) sum += x * x;
    ++*evaluations_;
    return sum;
  }

 private:
  std::shared_ptr<absl::Notification> gate_;
  std::shared_ptr<std::atomic<int>> evaluations_;
};

// Runs a worker on its own thread; stops and joins it on destruction.
class RunningWorker {
 public:
  RunningWorker(const std::string& address, WorkerOptions options)
      : worker_(skerry::v1::FleetService::NewStub(
                    CreateCoordinatorChannel(address, absl::Milliseconds(200))),
                std::move(options), Clock::Real()),
        thread_([this] {
          status_ = worker_.Run();
          done_.Notify();
        }) {}
  ~RunningWorker() {
    worker_.Stop();
    thread_.join();
  }
  bool WaitDone(absl::Duration limit = kLimit) {
    return done_.WaitForNotificationWithTimeout(limit);
  }
  // Only after WaitDone() returned true.
  const absl::Status& status() const { return status_; }
  Worker& worker() { return worker_; }

 private:
  Worker worker_;
  absl::Status status_;
  absl::Notification done_;
  std::thread thread_;
};

class WorkerTest : public ::testing::Test {
 protected:
  void SetUp() override { ASSERT_TRUE(server_.started()); }
  void TearDown() override { OpenGate(); }
  void OpenGate() {
    if (!gate_->HasBeenNotified()) gate_->Notify();
  }

  FakeFleet& fleet() { return server_.fleet(); }

  WorkerOptions Options(int threads, uint32_t batch) {
    WorkerOptions o;
    o.name = "test-worker";
    o.threads = threads;
    o.batch = batch;
    o.wait = absl::Milliseconds(200);
    o.rpc_deadline = absl::Seconds(10);
    o.max_backoff = absl::Milliseconds(200);
    o.report_interval = absl::Milliseconds(20);
    return o;
  }
  WorkerOptions GatedOptions(int threads, uint32_t batch) {
    WorkerOptions o = Options(threads, batch);
    auto gate = gate_;
    auto evaluations = evaluations_;
    o.make_evaluator = [gate, evaluations](const skerry::v1::EvaluatorSpec&)
        -> absl::StatusOr<std::unique_ptr<Evaluator>> {
      return std::make_unique<GatedSphere>(gate, evaluations);
    };
    return o;
  }

  static bool AllReported(const FleetState& s, size_t n) {
    return s.results.size() >= n;
  }
  // Every task reported exactly once, with the sphere value and no error.
  static void ExpectSphereResults(const FleetState& s,
                                  const std::vector<Task>& tasks) {
    for (const Task& task : tasks) {
      SCOPED_TRACE(absl::StrCat("task ", task.task_id()));
      ASSERT_EQ(s.times_reported.count(task.task_id()), 1u);
      EXPECT_EQ(s.times_reported.at(task.task_id()), 1);
      const skerry::v1::TaskResult& r = s.results.at(task.task_id());
      EXPECT_EQ(r.error(), "");
      EXPECT_EQ(r.attempt(), task.attempt());
      EXPECT_DOUBLE_EQ(r.score(), SphereOf(task));
      EXPECT_GE(r.eval_seconds(), 0.0);
    }
  }

  FakeFleetServer server_;
  std::shared_ptr<absl::Notification> gate_ =
      std::make_shared<absl::Notification>();
  std::shared_ptr<std::atomic<int>> evaluations_ =
      std::make_shared<std::atomic<int>>(0);
};

TEST_F(WorkerTest, EvaluatesEveryTaskOnceAndReportsSphereValuesInBatches) {
  const std::vector<Task> tasks = SphereTasks(1, 40);
  fleet().AddTasks(tasks);
  WorkerOptions options = Options(2, 4);
  options.report_interval = absl::Minutes(10);  // only full batches are sent
  options.max_results = tasks.size();
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
  EXPECT_EQ(w.worker().results_reported(), tasks.size());

  const FleetState s = fleet().Snapshot();
  ExpectSphereResults(s, tasks);
  // Each Report carries at least a batch (4), so at most 40 / 4 of them.
  EXPECT_LE(s.reports.size(), 10u);
  for (const auto& lease : s.leases) EXPECT_EQ(lease.max_tasks(), 4u);
  ASSERT_EQ(s.joins.size(), 1u);
  EXPECT_EQ(s.joins[0].name(), "test-worker");
  EXPECT_EQ(s.joins[0].threads(), 2u);
  EXPECT_EQ(s.joins[0].version(), "0.1.0");
  EXPECT_FALSE(s.joins[0].host().empty());
  EXPECT_THAT(s.joins[0].evaluators(), Contains("sphere"));
  for (const auto& report : s.reports) EXPECT_EQ(report.worker_id, 101u);
}

TEST_F(WorkerTest, PrefetchesTheNextLeaseWhileTheBatchIsEvaluated) {
  std::vector<Task> tasks;
  for (uint64_t id = 1; id <= 6; ++id) {
    tasks.push_back(
        MakeTask(id, "sphere", {kGatedMarker, 0.5 * static_cast<double>(id)}));
  }
  fleet().AddTasks(tasks);
  RunningWorker w(server_.address(), GatedOptions(3, 2));
  // No evaluation can finish before the gate opens, yet all six get leased:
  // leases continue while the first batch is being evaluated.
  EXPECT_TRUE(fleet().WaitUntil(
      [](const FleetState& s) { return s.leased.size() == 6; }));
  EXPECT_EQ(*evaluations_, 0);
  FleetState s = fleet().Snapshot();
  ASSERT_FALSE(s.leases.empty());
  EXPECT_GT(s.leases[0].wait_ms(), 0u);  // queue empty: long poll
  bool short_lease = false;              // queue not empty: no waiting
  for (const auto& lease : s.leases) short_lease |= lease.wait_ms() == 0;
  EXPECT_TRUE(short_lease);

  OpenGate();
  ASSERT_TRUE(fleet().WaitUntil(
      [](const FleetState& st) { return AllReported(st, 6); }));
  ExpectSphereResults(fleet().Snapshot(), tasks);
}

TEST_F(WorkerTest, HeldTaskIdsListTasksLeasedButNotYetReported) {
  std::vector<Task> tasks = {MakeTask(1, "sphere", {kGatedMarker, 1.0}),
                             MakeTask(2), MakeTask(3), MakeTask(4)};
  fleet().AddTasks(tasks);
  // One lease of 4; one thread waits on task 1 while the other does 2, 3, 4.
  RunningWorker w(server_.address(), GatedOptions(2, 4));
  EXPECT_TRUE(fleet().WaitUntil([](const FleetState& s) {
    for (const auto& r : s.reports) {
      for (uint64_t id : r.held) {
        if (id == 1) return s.results.size() == 3;
      }
    }
    return false;
  }));
  OpenGate();
  ASSERT_TRUE(fleet().WaitUntil(
      [](const FleetState& st) { return AllReported(st, 4); }));
  const FleetState s = fleet().Snapshot();
  ExpectSphereResults(s, tasks);
  for (const auto& report : s.reports) EXPECT_TRUE(report.held_consistent);
  // Once task 1 is reported, nothing is held any more.
  EXPECT_THAT(s.reports.back().held, IsEmpty());
}

TEST_F(WorkerTest, RenewsTheLeaseOfATaskStillBeingEvaluated) {
  fleet().set_lease_seconds(0.9);  // renew about every 0.3 s
  std::vector<Task> tasks = {MakeTask(1, "sphere", {kGatedMarker, 2.0})};
  fleet().AddTasks(tasks);
  RunningWorker w(server_.address(), GatedOptions(1, 1));
  // Reports with no result, naming task 1: renewals.
  EXPECT_TRUE(fleet().WaitUntil([](const FleetState& s) {
    int renewals = 0;
    for (const auto& r : s.reports) {
      renewals += r.results.empty() && r.held.size() == 1 && r.held[0] == 1;
    }
    return renewals >= 2;
  }));
  OpenGate();
  ASSERT_TRUE(fleet().WaitUntil(
      [](const FleetState& st) { return AllReported(st, 1); }));
  ExpectSphereResults(fleet().Snapshot(), tasks);
}

TEST_F(WorkerTest, RetriesThroughUnavailableAndStillDeliversEverything) {
  const std::vector<Task> tasks = SphereTasks(1, 20);
  fleet().AddTasks(tasks);
  fleet().FailJoins(2);
  fleet().FailLeases(3);
  fleet().FailReports(3);
  WorkerOptions options = Options(2, 3);
  options.max_results = tasks.size();
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
  const FleetState s = fleet().Snapshot();
  EXPECT_EQ(s.failed_calls, 8);
  ExpectSphereResults(s, tasks);
}

TEST_F(WorkerTest, UnknownEvaluatorGivesAnErrorResultNotACrash) {
  std::vector<Task> good = SphereTasks(1, 3);
  fleet().AddTasks(good);
  fleet().AddTasks({MakeTask(50, "no_such_function")});
  WorkerOptions options = Options(2, 2);
  options.max_results = 4;
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
  const FleetState s = fleet().Snapshot();
  ExpectSphereResults(s, good);
  ASSERT_EQ(s.results.count(50), 1u);
  EXPECT_THAT(s.results.at(50).error(), HasSubstr("no_such_function"));
}

TEST_F(WorkerTest, NonFiniteScoreAndFailedEvaluationBecomeErrors) {
  fleet().AddTasks({MakeTask(1), MakeTask(2)});
  WorkerOptions options = Options(1, 2);
  options.max_results = 2;
  class Odd : public Evaluator {
   public:
    absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                    uint64_t seed) override {
      if (seed == 1000003u) return std::nan("");  // task 1
      return absl::InternalError("simulator crashed");
    }
  };
  options.make_evaluator = [](const skerry::v1::EvaluatorSpec&)
      -> absl::StatusOr<std::unique_ptr<Evaluator>> {
    return std::make_unique<Odd>();
  };
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(w.WaitDone());
  const FleetState s = fleet().Snapshot();
  ASSERT_EQ(s.results.size(), 2u);
  EXPECT_THAT(s.results.at(1).error(), HasSubstr("non-finite"));
  EXPECT_EQ(s.results.at(2).error(), "simulator crashed");
}

TEST_F(WorkerTest, StopEndsALongPollPromptly) {
  WorkerOptions options = Options(1, 1);
  options.wait = absl::Minutes(2);  // far beyond the test's bounded wait
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(fleet().WaitUntil(
      [](const FleetState& s) { return s.leases_waiting == 1; }));
  w.worker().Stop();
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
}

TEST_F(WorkerTest, StopReportsResultsAlreadyComputed) {
  const std::vector<Task> tasks = SphereTasks(1, 3);
  fleet().AddTasks(tasks);
  WorkerOptions options = GatedOptions(1, 100);
  options.report_interval = absl::Minutes(10);  // nothing is sent before Stop
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(
      fleet().WaitUntil([&](const FleetState&) { return *evaluations_ == 3; }));
  w.worker().Stop();
  ASSERT_TRUE(w.WaitDone());
  EXPECT_EQ(w.worker().results_reported(), 3u);
  ExpectSphereResults(fleet().Snapshot(), tasks);
}

TEST_F(WorkerTest, StopReturnsWhileTheCoordinatorIsUnreachable) {
  const std::string address = server_.address();
  server_.Shutdown();  // nothing listens there now
  RunningWorker w(address, Options(1, 1));
  w.worker().Stop();
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
}

TEST_F(WorkerTest, StopReturnsWhileJoinIsBeingRetried) {
  fleet().FailJoins(1000000);
  RunningWorker w(server_.address(), Options(1, 1));
  ASSERT_TRUE(fleet().WaitUntil(
      [](const FleetState& s) { return s.failed_calls >= 2; }));
  w.worker().Stop();
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
  EXPECT_THAT(fleet().Snapshot().joins, IsEmpty());
}

TEST_F(WorkerTest, JoinsAgainWhenTheCoordinatorForgetsTheWorker) {
  const std::vector<Task> first = SphereTasks(1, 5);
  const std::vector<Task> second = SphereTasks(100, 5);
  fleet().AddTasks(first);
  RunningWorker w(server_.address(), Options(2, 2));
  ASSERT_TRUE(
      fleet().WaitUntil([](const FleetState& s) { return AllReported(s, 5); }));
  fleet().ForgetWorkers();  // e.g. a restart with a new fleet table
  fleet().AddTasks(second);
  ASSERT_TRUE(fleet().WaitUntil(
      [](const FleetState& s) { return AllReported(s, 10); }));
  const FleetState s = fleet().Snapshot();
  ExpectSphereResults(s, first);
  ExpectSphereResults(s, second);
  ASSERT_EQ(s.joins.size(), 2u);
  for (const auto& report : s.reports) {
    for (const auto& r : report.results) {
      if (r.task_id() >= 100) {
        EXPECT_EQ(report.worker_id, 102u);
      }
    }
  }
}

TEST_F(WorkerTest, RefusedJoinEndsRunWithTheCoordinatorsError) {
  fleet().RefuseJoins(grpc::StatusCode::PERMISSION_DENIED);
  RunningWorker w(server_.address(), Options(1, 1));
  ASSERT_TRUE(w.WaitDone());
  EXPECT_EQ(w.status().code(), absl::StatusCode::kPermissionDenied);
  EXPECT_THAT(w.status().message(), HasSubstr("Join"));
}

TEST_F(WorkerTest, BadOptionsAreRejectedByRun) {
  WorkerOptions options = Options(0, 1);
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(w.WaitDone());
  EXPECT_EQ(w.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(w.status().message(), HasSubstr("threads"));
  EXPECT_THAT(fleet().Snapshot().joins, IsEmpty());
}

TEST_F(WorkerTest, ExitWhenIdleEndsRunOnlyAfterEveryTaskIsReported) {
  const std::vector<Task> tasks = SphereTasks(1, 12);
  fleet().AddTasks(tasks);
  WorkerOptions options = Options(2, 3);
  options.exit_when_idle = absl::Milliseconds(300);
  RunningWorker w(server_.address(), options);
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
  EXPECT_TRUE(w.worker().exited_idle());
  EXPECT_EQ(w.worker().results_reported(), tasks.size());
  ExpectSphereResults(fleet().Snapshot(), tasks);
}

TEST_F(WorkerTest, ExitWhenIdleCountsTimeTheCoordinatorIsUnreachable) {
  const std::string address = server_.address();
  server_.Shutdown();  // nothing listens there now: Join is retried
  WorkerOptions options = Options(1, 1);
  options.exit_when_idle = absl::Milliseconds(300);
  RunningWorker w(address, options);
  ASSERT_TRUE(w.WaitDone());
  EXPECT_TRUE(w.status().ok()) << w.status();
  EXPECT_TRUE(w.worker().exited_idle());
}

TEST_F(WorkerTest, WithoutExitWhenIdleAnIdleWorkerKeepsPolling) {
  RunningWorker w(server_.address(), Options(1, 1));
  // Several empty long polls (200 ms each) come and go; the worker stays.
  ASSERT_TRUE(fleet().WaitUntil(
      [](const FleetState& s) { return s.leases.size() >= 3; }));
  EXPECT_FALSE(w.WaitDone(absl::ZeroDuration()));
  EXPECT_FALSE(w.worker().exited_idle());
}

TEST_F(WorkerTest, JoinStatesTheWorkerProtocolVersion) {
  RunningWorker w(server_.address(), Options(1, 1));
  ASSERT_TRUE(
      fleet().WaitUntil([](const FleetState& s) { return !s.joins.empty(); }));
  EXPECT_EQ(fleet().Snapshot().joins[0].protocol_version(), kProtocolVersion);
}

TEST_F(WorkerTest, JoinRefusedAsUnimplementedEndsRunWithoutRetrying) {
  // A coordinator that does not speak the worker's protocol answers
  // UNIMPLEMENTED (server/api/fleet_service.cc): retrying cannot help.
  fleet().RefuseJoins(grpc::StatusCode::UNIMPLEMENTED);
  RunningWorker w(server_.address(), Options(1, 1));
  ASSERT_TRUE(w.WaitDone());
  EXPECT_EQ(w.status().code(), absl::StatusCode::kUnimplemented);
  EXPECT_THAT(w.status().message(), HasSubstr("refused Join"));
}

}  // namespace
}  // namespace skerry::worker
