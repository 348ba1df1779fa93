// Hostile and malformed worker messages against a real coordinator
// (Coordinator::Start, in-process, listening on 127.0.0.1 port 0) through raw
// FleetService stubs over a real channel: unknown workers, bad lease sizes, bad
// joins, duplicate, unknown, foreign, stale and non-finite results, an
// oversized message, a worker that leases and vanishes, and a flood of joins.
// Each test checks every "nothing changed" claim against the database itself
// (a connection of its own, tests/support/db_check.h), and ends with an honest
// worker finishing the run and CheckDatabase finding no broken invariant.
//
// The coordinator runs on a FakeClock, so leases expire when the test moves
// time, never on their own.
#include <cmath>
#include <limits>
#include <map>
#include <memory>
#include <set>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "common/clock.h"
#include "common/version.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "server/coordinator.h"
#include "server/store/check.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"
#include "worker/task_evaluation.h"

namespace skerry {
namespace {

using skerry::testing::QueryText;
using skerry::testing::TempDir;
using skerry::v1::FleetService;
using skerry::v1::RunService;
using skerry::v1::Task;
using skerry::v1::TaskResult;

constexpr uint32_t kPopulation = 6;

// One island of 6 on a 3-gene sphere for 3 generations, two attempts per
// genome.
skerry::v1::RunSpec SmallSpec() {
  skerry::v1::RunSpec spec;
  spec.set_name("wire-abuse");
  spec.set_seed(515);
  spec.set_genome_length(3);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(kPopulation);
  spec.mutable_ga()->set_elites(1);
  spec.mutable_islands()->set_count(1);
  spec.mutable_stop()->set_max_generations(3);
  spec.set_max_attempts(2);
  return spec;
}

// Sphere: sum of x_i^2 (Jamil & Yang 2013, see REFERENCES.md).
TaskResult Honest(const Task& t) {
  TaskResult r;
  r.set_task_id(t.task_id());
  r.set_attempt(t.attempt());
  double s = 0.0;
  for (double x : t.genes()) s += x * x;
  r.set_score(s);
  r.set_eval_seconds(0.001);
  return r;
}

std::unique_ptr<grpc::ClientContext> Context() {
  auto ctx = std::make_unique<grpc::ClientContext>();
  ctx->set_deadline(std::chrono::system_clock::now() +
                    std::chrono::seconds(30));
  return ctx;
}

long long Count(const std::string& db, const std::string& sql) {
  return std::stoll("0" + QueryText(db, sql));
}

class WireAbuseTest : public ::testing::Test {
 protected:
  void SetUp() override {
    db_ = dir_.File("coordinator.db");
    server::CoordinatorOptions options;
    options.db_path = db_;
    options.listen_address = "127.0.0.1:0";
    options.lease = absl::Seconds(1);
    options.max_lease_wait = absl::Seconds(1);
    options.clock = &clock_;
    absl::StatusOr<std::unique_ptr<server::Coordinator>> c =
        server::Coordinator::Start(options);
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::move(*c);
    ASSERT_GT(coordinator_->port(), 0);
    grpc::ChannelArguments args;
    args.SetMaxReceiveMessageSize(128 << 20);  // as skerry-worker's channel
    channel_ = grpc::CreateCustomChannel(
        absl::StrCat("127.0.0.1:", coordinator_->port()),
        grpc::InsecureChannelCredentials(), args);
    fleet_ = FleetService::NewStub(channel_);
    runs_ = RunService::NewStub(channel_);
    skerry::v1::SubmitRunRequest req;
    *req.mutable_spec() = SmallSpec();
    skerry::v1::SubmitRunResponse resp;
    grpc::Status s = runs_->SubmitRun(Context().get(), req, &resp);
    ASSERT_TRUE(s.ok()) << s.error_message();
    run_id_ = resp.run().id();
  }

  uint64_t Join(const std::string& name = "honest") {
    skerry::v1::JoinRequest req;
    req.set_protocol_version(kProtocolVersion);
    req.set_name(name);
    req.set_host("localhost");
    req.set_threads(1);
    skerry::v1::JoinResponse resp;
    grpc::Status s = fleet_->Join(Context().get(), req, &resp);
    EXPECT_TRUE(s.ok()) << s.error_message();
    secrets_[resp.worker_id()] = resp.worker_secret();
    return resp.worker_id();
  }

  // The worker secret Join gave `worker`; none for a worker never joined.
  std::string SecretOf(uint64_t worker) const {
    auto it = secrets_.find(worker);
    return it == secrets_.end() ? std::string() : it->second;
  }

  std::vector<Task> Lease(uint64_t worker, uint32_t max = 1000,
                          uint32_t wait_ms = 200) {
    skerry::v1::LeaseRequest req;
    req.set_worker_id(worker);
    req.set_worker_secret(SecretOf(worker));
    req.set_max_tasks(max);
    req.set_wait_ms(wait_ms);
    skerry::v1::LeaseResponse resp;
    grpc::Status s = fleet_->Lease(Context().get(), req, &resp);
    EXPECT_TRUE(s.ok()) << s.error_message();
    return {resp.tasks().begin(), resp.tasks().end()};
  }

  // A lease of a worker of `protocol` that holds the centres `held`.
  grpc::Status LeaseAs(uint64_t worker, uint32_t protocol,
                       const std::vector<uint64_t>& held,
                       skerry::v1::LeaseResponse* resp) {
    skerry::v1::LeaseRequest req;
    req.set_worker_id(worker);
    req.set_worker_secret(SecretOf(worker));
    req.set_max_tasks(1000);
    req.set_wait_ms(200);
    req.set_protocol_version(protocol);
    for (uint64_t h : held) req.add_held_centres(h);
    return fleet_->Lease(Context().get(), req, resp);
  }

  grpc::Status Report(uint64_t worker, const std::vector<TaskResult>& results,
                      skerry::v1::ReportResponse* resp) {
    skerry::v1::ReportRequest req;
    req.set_worker_id(worker);
    req.set_worker_secret(SecretOf(worker));
    for (const TaskResult& r : results) *req.add_results() = r;
    return fleet_->Report(Context().get(), req, resp);
  }

  skerry::v1::RunState State() {
    skerry::v1::RunRef ref;
    ref.set_run_id(run_id_);
    skerry::v1::GetRunResponse resp;
    grpc::Status s = runs_->GetRun(Context().get(), ref, &resp);
    EXPECT_TRUE(s.ok()) << s.error_message();
    return resp.run().state();
  }

  // Everything stored about genomes and the run, for "nothing changed" checks.
  std::string Snapshot() {
    std::string snapshot = QueryText(
        db_,
        "SELECT group_concat(id || ':' || eval_state || ':' || "
        "coalesce(score, 'null') || ':' || attempts || ':' || error, ';') || "
        "'|' || (SELECT evaluations || ':' || state FROM runs) FROM "
        "(SELECT * FROM genomes ORDER BY id)");
    EXPECT_NE(snapshot.find('|'), std::string::npos) << "snapshot query failed";
    return snapshot;
  }

  // An honest worker finishes the run (moving time on when tasks are held by
  // someone else's lease); then the database must pass --check.
  void FinishHonestly() {
    const uint64_t worker = Join();
    for (int round = 0; round < 100; ++round) {
      if (State() != skerry::v1::RUNNING) break;
      std::vector<Task> tasks = Lease(worker);
      if (tasks.empty()) {
        clock_.Advance(absl::Seconds(2));  // expire abandoned leases
        continue;
      }
      std::vector<TaskResult> results;
      for (const Task& t : tasks) results.push_back(Honest(t));
      skerry::v1::ReportResponse resp;
      grpc::Status s = Report(worker, results, &resp);
      ASSERT_TRUE(s.ok()) << s.error_message();
    }
    ASSERT_EQ(State(), skerry::v1::FINISHED);
    coordinator_.reset();
    absl::StatusOr<store::CheckReport> report = store::CheckDatabase(db_);
    ASSERT_TRUE(report.ok()) << report.status();
    EXPECT_TRUE(report->ok()) << report->ToString();
    EXPECT_EQ(Count(db_,
                    "SELECT count(*) FROM genomes WHERE eval_state = 2 "
                    "AND (score IS NULL OR score != score OR "
                    "abs(score) > 1.7e308)"),
              0)
        << "an evaluated genome without a finite score";
  }

  TempDir dir_;
  std::string db_;
  FakeClock clock_;
  std::unique_ptr<server::Coordinator> coordinator_;
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<FleetService::Stub> fleet_;
  std::unique_ptr<RunService::Stub> runs_;
  uint64_t run_id_ = 0;
  std::map<uint64_t, std::string> secrets_;
};

TEST_F(WireAbuseTest, UnknownWorkerIsNotFoundAndChangesNothing) {
  const std::string before = Snapshot();
  skerry::v1::LeaseRequest lease;
  lease.set_worker_id(987654321);
  lease.set_worker_secret(SecretOf(987654321));
  lease.set_max_tasks(10);
  skerry::v1::LeaseResponse lease_resp;
  grpc::Status s = fleet_->Lease(Context().get(), lease, &lease_resp);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::NOT_FOUND);
  EXPECT_NE(s.error_message().find("unknown worker 987654321"),
            std::string::npos)
      << s.error_message();
  EXPECT_EQ(lease_resp.tasks_size(), 0);

  // A result for a real task from a worker nobody knows.
  const uint64_t worker = Join();
  const std::vector<Task> tasks = Lease(worker);
  ASSERT_EQ(tasks.size(), kPopulation);
  skerry::v1::ReportResponse resp;
  s = Report(987654321, {Honest(tasks[0])}, &resp);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::NOT_FOUND);
  EXPECT_EQ(Snapshot(), before);
  FinishHonestly();
}

// Worker ids are small numbers: any worker could act under another's id
// (renew, hand back, report its leases). Every call now quotes the worker
// secret Join gave with the id; another's id with one's own secret, or with
// none, is NOT_FOUND and changes nothing.
TEST_F(WireAbuseTest, AnotherWorkersIdWithoutItsSecretIsNotFound) {
  const uint64_t honest = Join("honest");
  const uint64_t thief = Join("thief");
  const std::vector<Task> tasks = Lease(honest);
  ASSERT_EQ(tasks.size(), kPopulation);
  const std::string before = Snapshot();
  for (const std::string& secret : {SecretOf(thief), std::string()}) {
    SCOPED_TRACE(secret.empty() ? "no secret" : "the thief's secret");
    skerry::v1::ReportRequest req;
    req.set_worker_id(honest);
    req.set_worker_secret(secret);
    TaskResult forged = Honest(tasks[0]);
    forged.set_score(-1e9);
    *req.add_results() = forged;
    skerry::v1::ReportResponse resp;
    grpc::Status s = fleet_->Report(Context().get(), req, &resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::NOT_FOUND) << s.error_message();
    skerry::v1::HandBackRequest back;
    back.set_worker_id(honest);
    back.set_worker_secret(secret);
    back.set_all_held(true);
    skerry::v1::HandBackResponse back_resp;
    s = fleet_->HandBack(Context().get(), back, &back_resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::NOT_FOUND) << s.error_message();
  }
  EXPECT_EQ(Snapshot(), before);
  // The honest worker still holds its lease and reports.
  skerry::v1::ReportResponse resp;
  ASSERT_TRUE(Report(honest, {Honest(tasks[0])}, &resp).ok());
  EXPECT_EQ(resp.accepted(), 1u);
  FinishHonestly();
}

TEST_F(WireAbuseTest, LeaseOfZeroOrTooManyTasksIsInvalidArgument) {
  const uint64_t worker = Join();
  for (uint32_t bad : {0u, 10001u, std::numeric_limits<uint32_t>::max()}) {
    SCOPED_TRACE(absl::StrCat("max_tasks ", bad));
    skerry::v1::LeaseRequest req;
    req.set_worker_id(worker);
    req.set_worker_secret(SecretOf(worker));
    req.set_max_tasks(bad);
    skerry::v1::LeaseResponse resp;
    grpc::Status s = fleet_->Lease(Context().get(), req, &resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    EXPECT_NE(s.error_message().find("max_tasks"), std::string::npos)
        << s.error_message();
    EXPECT_EQ(resp.tasks_size(), 0);
  }
  // No lease was taken: every task is still at its first attempt.
  const std::vector<Task> tasks = Lease(worker);
  ASSERT_EQ(tasks.size(), kPopulation);
  for (const Task& t : tasks) EXPECT_EQ(t.attempt(), 1u);
  FinishHonestly();
}

// A gene_precision FLOAT32 run's genes travel as Task.genes32 only to a
// worker that says in its LeaseRequest that it reads them (protocol 3); a
// protocol-2 worker, which sends no protocol_version there, gets the same
// values as doubles in Task.genes instead of an empty genome.
TEST_F(WireAbuseTest, Float32GenesComeAsDoublesToAProtocol2Worker) {
  skerry::v1::SubmitRunRequest submit;
  *submit.mutable_spec() = SmallSpec();
  submit.mutable_spec()->set_name("float32");
  submit.mutable_spec()->set_gene_precision(skerry::v1::FLOAT32);
  skerry::v1::SubmitRunResponse submitted;
  grpc::Status s = runs_->SubmitRun(Context().get(), submit, &submitted);
  ASSERT_TRUE(s.ok()) << s.error_message();
  const uint64_t narrow_run = submitted.run().id();
  const uint64_t worker = Join();
  std::map<uint64_t, std::vector<double>> genes_of;  // FLOAT32 run's tasks
  for (const uint32_t protocol : {0u, 2u, kGenes32Protocol}) {
    SCOPED_TRACE(absl::StrCat("protocol_version ", protocol));
    skerry::v1::LeaseResponse resp;
    s = LeaseAs(worker, protocol, {}, &resp);
    ASSERT_TRUE(s.ok()) << s.error_message();
    ASSERT_EQ(resp.tasks_size(), 2 * static_cast<int>(kPopulation));
    for (const Task& t : resp.tasks()) {
      if (t.run_id() != narrow_run) {
        EXPECT_EQ(t.genes_size(), 3);  // a FLOAT64 run: always doubles
        EXPECT_EQ(t.genes32_size(), 0);
        continue;
      }
      std::vector<double> genes;
      if (protocol < kGenes32Protocol) {
        EXPECT_EQ(t.genes32_size(), 0);
        genes.assign(t.genes().begin(), t.genes().end());
      } else {
        EXPECT_EQ(t.genes_size(), 0);
        genes.assign(t.genes32().begin(), t.genes32().end());
      }
      ASSERT_EQ(genes.size(), 3u) << "task " << t.task_id();
      for (double g : genes) {
        EXPECT_EQ(g, static_cast<double>(static_cast<float>(g)))
            << "task " << t.task_id() << ": not a float32 value";
      }
      auto [it, first] = genes_of.emplace(t.task_id(), genes);
      if (!first) {
        EXPECT_EQ(it->second, genes) << "task " << t.task_id();
      }
    }
    clock_.Advance(absl::Seconds(2));  // the leases expire: lease them again
  }
  EXPECT_EQ(genes_of.size(), kPopulation);
  FinishHonestly();
}

// Worker protocol 4: a natural ES run's samples go as their recipes
// (Task.sample), with each centre once to a worker that does not hold it,
// and the worker's own ExpandSample builds from them exactly the genes the
// coordinator sends to a worker of protocol 3 (and stores), bit for bit. The
// distribution genome goes as a recipe of sigma 0 naming its own genes as the
// centre, so those genes travel once.
TEST_F(WireAbuseTest,
       SamplesGoAsRecipesAndTheWorkerBuildsTheCoordinatorsGenes) {
  skerry::v1::SubmitRunRequest submit;
  *submit.mutable_spec() = SmallSpec();
  submit.mutable_spec()->set_name("natural-es");
  submit.mutable_spec()->clear_ga();
  submit.mutable_spec()
      ->mutable_strategy()
      ->mutable_natural_es()
      ->set_population_size(6);
  skerry::v1::SubmitRunResponse submitted;
  grpc::Status s = runs_->SubmitRun(Context().get(), submit, &submitted);
  ASSERT_TRUE(s.ok()) << s.error_message();
  const uint64_t es_run = submitted.run().id();
  const uint64_t worker = Join();
  auto lease = [&](uint32_t protocol, const std::vector<uint64_t>& held,
                   skerry::v1::LeaseResponse* resp) {
    return LeaseAs(worker, protocol, held, resp);
  };

  // Protocol 3: every task carries its genes.
  std::map<uint64_t, std::vector<double>> genes_of;
  skerry::v1::LeaseResponse old;
  s = lease(kGenes32Protocol, {}, &old);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(old.centres_size(), 0);
  for (const Task& t : old.tasks()) {
    EXPECT_FALSE(t.has_sample());
    ASSERT_EQ(t.genes_size(), 3);
    if (t.run_id() == es_run) {
      genes_of[t.task_id()] = {t.genes().begin(), t.genes().end()};
    }
  }
  ASSERT_EQ(genes_of.size(), 7u);    // the distribution genome and 6 samples
  clock_.Advance(absl::Seconds(2));  // the leases expire: lease them again

  // Protocol 4, holding nothing: the samples as recipes, their centre with
  // them once.
  skerry::v1::LeaseResponse now;
  s = lease(kSampleRecipeProtocol, {}, &now);
  ASSERT_TRUE(s.ok()) << s.error_message();
  ASSERT_EQ(now.centres_size(), 1);
  const skerry::v1::Centre& centre = now.centres(0);
  const std::vector<double> centre_genes(centre.genes().begin(),
                                         centre.genes().end());
  ASSERT_EQ(genes_of.count(centre.id()), 1u);
  EXPECT_EQ(centre_genes, genes_of[centre.id()]);  // the distribution genome
  int samples = 0;
  for (const Task& t : now.tasks()) {
    if (t.run_id() != es_run) {
      EXPECT_FALSE(t.has_sample());  // a GA's genome: genes
      EXPECT_EQ(t.genes_size(), 3);
      continue;
    }
    ++samples;
    ASSERT_TRUE(t.has_sample()) << "task " << t.task_id();
    EXPECT_EQ(t.genes_size(), 0);
    EXPECT_EQ(t.genes32_size(), 0);
    EXPECT_EQ(t.sample().centre_id(), centre.id());
    EXPECT_EQ(t.sample().sigma() == 0, t.task_id() == centre.id())
        << "task " << t.task_id();
    Task built = t;
    absl::Status expanded = worker::ExpandSample(&built, &centre_genes);
    ASSERT_TRUE(expanded.ok()) << expanded;
    EXPECT_FALSE(built.has_sample());
    const std::vector<double> genes(built.genes().begin(), built.genes().end());
    EXPECT_EQ(genes, genes_of[t.task_id()]) << "task " << t.task_id();
    // Without the centre, or with another's, the worker says which.
    Task orphan = t;
    EXPECT_THAT(std::string(worker::ExpandSample(&orphan, nullptr).message()),
                ::testing::HasSubstr(
                    absl::StrCat("centre #", centre.id(), " is not held")));
    const std::vector<double> short_centre = {0.0};
    EXPECT_FALSE(worker::ExpandSample(&orphan, &short_centre).ok());
  }
  EXPECT_EQ(samples, 7);  // the centre's own task too
  clock_.Advance(absl::Seconds(2));

  // Holding the centre: it does not come again.
  skerry::v1::LeaseResponse held;
  s = lease(kSampleRecipeProtocol, {centre.id()}, &held);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(held.centres_size(), 0);
  int recipes = 0;
  for (const Task& t : held.tasks()) recipes += t.has_sample() ? 1 : 0;
  EXPECT_EQ(recipes, 7);
  clock_.Advance(absl::Seconds(2));

  // More held centres than any worker keeps: refused, naming the field.
  skerry::v1::LeaseResponse refused;
  s = lease(kSampleRecipeProtocol, std::vector<uint64_t>(1025, 1), &refused);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(s.error_message(), ::testing::HasSubstr("held_centres"));
  FinishHonestly();
}

// Regression (issue 14): a Lease answer of long genomes was filled to 64 MiB,
// which the coordinator builds in memory twice over; with two workers its
// peak memory was twice the goal. An answer now aims at 16 MiB (one task is
// always sent), and the rest comes with the next lease.
TEST_F(WireAbuseTest, ALeaseAnswerOfLongGenomesStopsAt16MiB) {
  skerry::v1::SubmitRunRequest submit;
  *submit.mutable_spec() = SmallSpec();
  submit.mutable_spec()->set_name("long-genomes");
  submit.mutable_spec()->set_genome_length(1 << 18);  // 2 MiB a task
  submit.mutable_spec()->mutable_ga()->set_population_size(12);
  skerry::v1::SubmitRunResponse submitted;
  grpc::Status s = runs_->SubmitRun(Context().get(), submit, &submitted);
  ASSERT_TRUE(s.ok()) << s.error_message();
  const uint64_t worker = Join();
  size_t long_tasks = 0;
  int lease = 0;
  for (; lease < 4 && long_tasks < 12; ++lease) {
    skerry::v1::LeaseResponse resp;
    s = LeaseAs(worker, kSampleRecipeProtocol, {}, &resp);
    ASSERT_TRUE(s.ok()) << s.error_message();
    size_t here = 0;
    for (const Task& t : resp.tasks()) {
      if (t.run_id() == submitted.run().id()) ++here;
    }
    EXPECT_GE(here, 1u) << "lease " << lease;
    EXPECT_LE(here, 8u) << "lease " << lease;  // 8 x 2 MiB = 16 MiB
    EXPECT_LE(resp.ByteSizeLong(), size_t{16 << 20} + (size_t{1} << 21));
    long_tasks += here;
  }
  EXPECT_EQ(long_tasks, 12u);  // all of them...
  EXPECT_GE(lease, 2);         // ...over more than one answer
}

TEST_F(WireAbuseTest, JoinWithBadThreadsOrNamesIsInvalidArgument) {
  const long long workers = Count(db_, "SELECT count(*) FROM workers");
  struct Bad {
    uint32_t threads;
    std::string name;
    std::string host;
    std::string field;  // what the message must name
  };
  const std::vector<Bad> cases = {
      {0, "w", "h", "threads"},
      {4097, "w", "h", "threads"},
      {std::numeric_limits<uint32_t>::max(), "w", "h", "threads"},
      {1, std::string(257, 'n'), "h", "name"},
      {1, "w", std::string(100000, 'h'), "host"},
  };
  for (const Bad& b : cases) {
    SCOPED_TRACE(absl::StrCat("threads ", b.threads, " name ", b.name.size(),
                              " bytes, host ", b.host.size(), " bytes"));
    skerry::v1::JoinRequest req;
    req.set_protocol_version(kProtocolVersion);
    req.set_threads(b.threads);
    req.set_name(b.name);
    req.set_host(b.host);
    skerry::v1::JoinResponse resp;
    grpc::Status s = fleet_->Join(Context().get(), req, &resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    EXPECT_NE(s.error_message().find(b.field), std::string::npos)
        << s.error_message();
    EXPECT_EQ(resp.worker_id(), 0u);
  }
  EXPECT_EQ(Count(db_, "SELECT count(*) FROM workers"), workers);
  FinishHonestly();
}

TEST_F(WireAbuseTest, DuplicateResultsAreAppliedOnce) {
  const uint64_t worker = Join();
  const std::vector<Task> tasks = Lease(worker);
  ASSERT_EQ(tasks.size(), kPopulation);
  std::vector<TaskResult> twice;
  for (const Task& t : tasks) {
    twice.push_back(Honest(t));
    twice.push_back(Honest(t));
  }
  skerry::v1::ReportResponse resp;
  grpc::Status s = Report(worker, twice, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), kPopulation);
  EXPECT_EQ(resp.ignored(), kPopulation);
  EXPECT_EQ(Count(db_, "SELECT evaluations FROM runs"), kPopulation);
  EXPECT_EQ(Count(db_,
                  "SELECT count(*) FROM genomes WHERE generation = 0 AND "
                  "eval_state = 2 AND attempts = 1"),
            kPopulation);
  // The same report again, once everything is committed: all ignored.
  State();  // settles: the engine breeds under the lock GetRun waits for
  const std::string before = Snapshot();
  s = Report(worker, twice, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), 0u);
  EXPECT_EQ(resp.ignored(), 2 * kPopulation);
  EXPECT_EQ(Snapshot(), before);
  FinishHonestly();
}

TEST_F(WireAbuseTest, ResultsForUnknownTasksAreIgnored) {
  const uint64_t worker = Join();
  const std::vector<Task> tasks = Lease(worker);
  ASSERT_EQ(tasks.size(), kPopulation);
  const std::string before = Snapshot();
  std::vector<TaskResult> bogus;
  for (uint64_t id : {uint64_t{0}, uint64_t{123456789},
                      std::numeric_limits<uint64_t>::max()}) {
    TaskResult r = Honest(tasks[0]);
    r.set_task_id(id);
    bogus.push_back(r);
    r.set_error("made up");
    bogus.push_back(r);
  }
  skerry::v1::ReportResponse resp;
  grpc::Status s = Report(worker, bogus, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), 0u);
  EXPECT_EQ(resp.ignored(), bogus.size());
  EXPECT_EQ(Snapshot(), before);
  FinishHonestly();
}

TEST_F(WireAbuseTest, ErrorForAnotherWorkersTaskIsIgnored) {
  const uint64_t holder = Join("holder");
  const uint64_t intruder = Join("intruder");
  const std::vector<Task> tasks = Lease(holder);
  ASSERT_EQ(tasks.size(), kPopulation);
  const std::string before = Snapshot();
  std::vector<TaskResult> failures;
  for (const Task& t : tasks) {
    TaskResult r = Honest(t);
    r.set_error("intruder says it failed");
    failures.push_back(r);
  }
  skerry::v1::ReportResponse resp;
  grpc::Status s = Report(intruder, failures, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), 0u);
  EXPECT_EQ(resp.ignored(), kPopulation);
  EXPECT_EQ(Snapshot(), before);
  // The holder's results still count.
  std::vector<TaskResult> honest;
  for (const Task& t : tasks) honest.push_back(Honest(t));
  s = Report(holder, honest, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), kPopulation);
  FinishHonestly();
}

TEST_F(WireAbuseTest, FailureQuotingAStaleOrFutureAttemptIsIgnored) {
  const uint64_t worker = Join();
  const std::vector<Task> first = Lease(worker);
  ASSERT_EQ(first.size(), kPopulation);
  clock_.Advance(absl::Seconds(2));  // the lease expires
  const std::vector<Task> second = Lease(worker);
  ASSERT_EQ(second.size(), kPopulation);
  for (const Task& t : second) ASSERT_EQ(t.attempt(), 2u);
  const std::string before = Snapshot();
  std::vector<TaskResult> stale;
  for (const Task& t : first) {
    TaskResult r = Honest(t);
    r.set_error("stale failure");
    stale.push_back(r);  // attempt 1
    r.set_attempt(99);
    stale.push_back(r);  // an attempt never handed out
  }
  skerry::v1::ReportResponse resp;
  grpc::Status s = Report(worker, stale, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), 0u);
  EXPECT_EQ(resp.ignored(), stale.size());
  EXPECT_EQ(Snapshot(), before);
  FinishHonestly();
}

TEST_F(WireAbuseTest, NonFiniteScoresAreFailedAttemptsNeverEvaluated) {
  const uint64_t worker = Join();
  const double kBad[] = {std::nan(""), std::numeric_limits<double>::infinity(),
                         -std::numeric_limits<double>::infinity()};
  // Attempt 1 and attempt 2 (max_attempts is 2) of the first three genomes
  // report non-finite scores: those genomes fail and rank last.
  std::set<uint64_t> poisoned;
  for (int attempt = 1; attempt <= 2; ++attempt) {
    SCOPED_TRACE(absl::StrCat("attempt ", attempt));
    std::vector<Task> tasks = Lease(worker);
    std::vector<TaskResult> results;
    for (const Task& t : tasks) {
      if (attempt == 1 && poisoned.size() < 3) poisoned.insert(t.task_id());
      if (poisoned.count(t.task_id()) == 0) continue;
      ASSERT_EQ(t.attempt(), static_cast<uint32_t>(attempt));
      TaskResult r = Honest(t);
      r.set_score(kBad[results.size() % 3]);
      results.push_back(r);
    }
    ASSERT_EQ(results.size(), 3u);
    skerry::v1::ReportResponse resp;
    grpc::Status s = Report(worker, results, &resp);
    ASSERT_TRUE(s.ok()) << s.error_message();
    EXPECT_EQ(resp.accepted(), 3u);
    const std::string ids =
        absl::StrCat(*poisoned.begin(), ",", *std::next(poisoned.begin()), ",",
                     *poisoned.rbegin());
    EXPECT_EQ(Count(db_, absl::StrCat("SELECT count(*) FROM genomes WHERE id "
                                      "IN (",
                                      ids, ") AND eval_state = 2")),
              0);
    EXPECT_EQ(
        Count(db_, absl::StrCat("SELECT count(*) FROM genomes WHERE id "
                                "IN (",
                                ids,
                                ") AND score IS NULL AND "
                                "attempts = ",
                                attempt, " AND error LIKE '%not a finite%'")),
        3);
    EXPECT_EQ(Count(db_, absl::StrCat("SELECT count(*) FROM genomes WHERE id "
                                      "IN (",
                                      ids, ") AND eval_state = ",
                                      attempt == 1 ? skerry::v1::PENDING
                                                   : skerry::v1::FAILED)),
              3);
    clock_.Advance(absl::Seconds(2));  // the others' leases expire
  }
  FinishHonestly();
}

// Issue 11: any worker could store any finite score for any pending genome,
// leased to another worker or never leased, and a hostile score became the
// champion.
TEST_F(WireAbuseTest, ScoreFromAWorkerNotHoldingTheLeaseIsRejected) {
  const uint64_t intruder = Join("intruder");
  // Never leased: the genome ids are in the database for anyone to guess.
  const std::vector<std::string> ids = absl::StrSplit(
      QueryText(db_, "SELECT group_concat(id) FROM genomes ORDER BY id"), ',');
  ASSERT_EQ(ids.size(), kPopulation);
  auto forged = [](uint64_t task_id, uint32_t attempt) {
    TaskResult r;
    r.set_task_id(task_id);
    r.set_attempt(attempt);
    r.set_score(-1e9);  // far better than any sphere value
    r.set_eval_seconds(0.001);
    return r;
  };
  std::vector<TaskResult> unleased;
  for (const std::string& id : ids) {
    unleased.push_back(forged(std::stoull(id), 1));
  }
  const std::string before = Snapshot();
  skerry::v1::ReportResponse resp;
  grpc::Status s = Report(intruder, unleased, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), 0u);
  EXPECT_EQ(resp.ignored(), kPopulation);
  ASSERT_EQ(resp.rejected_size(), static_cast<int>(kPopulation));
  for (const skerry::v1::RejectedResult& r : resp.rejected()) {
    EXPECT_EQ(r.code(),
              static_cast<uint32_t>(grpc::StatusCode::PERMISSION_DENIED))
        << r.message();
  }
  EXPECT_EQ(Snapshot(), before);

  // Leased to another worker: the intruder quotes the holder's very attempt.
  const uint64_t holder = Join("holder");
  const std::vector<Task> tasks = Lease(holder);
  ASSERT_EQ(tasks.size(), kPopulation);
  std::vector<TaskResult> stolen;
  for (const Task& t : tasks)
    stolen.push_back(forged(t.task_id(), t.attempt()));
  s = Report(intruder, stolen, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), 0u);
  ASSERT_EQ(resp.rejected_size(), static_cast<int>(kPopulation));
  for (const skerry::v1::RejectedResult& r : resp.rejected()) {
    EXPECT_EQ(r.code(),
              static_cast<uint32_t>(grpc::StatusCode::PERMISSION_DENIED))
        << r.message();
  }
  EXPECT_EQ(Snapshot(), before);

  // The holder's honest results count, and no forged score is anywhere.
  std::vector<TaskResult> honest;
  for (const Task& t : tasks) honest.push_back(Honest(t));
  s = Report(holder, honest, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_EQ(resp.accepted(), kPopulation);
  FinishHonestly();
  EXPECT_EQ(Count(db_, "SELECT count(*) FROM genomes WHERE score < 0"), 0);
  EXPECT_EQ(Count(db_, "SELECT count(*) FROM runs WHERE best_score < 0"), 0);
}

// Issue 11: one result with a non-finite eval_seconds failed the whole group
// commit (UNAVAILABLE, NOT NULL constraint failed), every time it was resent,
// and honest workers' results in the same group failed with it.
TEST_F(WireAbuseTest, BadResultFieldIsRejectedAloneAndHonestResultsCommit) {
  const uint64_t sloppy = Join("sloppy");
  const uint64_t honest = Join("honest");
  const std::vector<Task> mine = Lease(sloppy, 3);
  const std::vector<Task> theirs = Lease(honest, 3);
  ASSERT_EQ(mine.size(), 3u);
  ASSERT_EQ(theirs.size(), 3u);
  struct Bad {
    double eval_seconds;
    std::string error;
    const char* field;
  };
  const Bad kBad[] = {
      {std::nan(""), "", "eval_seconds"},
      {std::numeric_limits<double>::infinity(), "", "eval_seconds"},
      {-1.0, "", "eval_seconds"},
      {1e300, "", "eval_seconds"},
      {0.1, std::string((1 << 20) + 1, 'e'), "error"},
  };
  for (int round = 0; round < 2; ++round) {  // and once more, resent
    for (const Bad& bad : kBad) {
      SCOPED_TRACE(absl::StrCat("round ", round, ", ", bad.field, " ",
                                bad.eval_seconds));
      std::vector<TaskResult> sloppy_results;
      for (const Task& t : mine) sloppy_results.push_back(Honest(t));
      sloppy_results[1].set_eval_seconds(bad.eval_seconds);
      sloppy_results[1].set_error(bad.error);
      // Sent at the same moment as an honest worker's report, so that both
      // may land in one group commit.
      skerry::v1::ReportResponse theirs_resp;
      grpc::Status theirs_status;
      std::thread other([&] {
        std::vector<TaskResult> results;
        for (const Task& t : theirs) results.push_back(Honest(t));
        auto stub = FleetService::NewStub(channel_);
        skerry::v1::ReportRequest req;
        req.set_worker_id(honest);
        req.set_worker_secret(SecretOf(honest));
        // Only the first time: after that they are duplicates.
        if (round == 0 && &bad == &kBad[0]) {
          for (const TaskResult& r : results) *req.add_results() = r;
        }
        for (const Task& t : theirs) req.add_held_task_ids(t.task_id());
        theirs_status = stub->Report(Context().get(), req, &theirs_resp);
      });
      skerry::v1::ReportResponse resp;
      grpc::Status s = Report(sloppy, sloppy_results, &resp);
      other.join();
      ASSERT_TRUE(s.ok()) << s.error_code() << " " << s.error_message();
      ASSERT_TRUE(theirs_status.ok()) << theirs_status.error_message();
      if (round == 0 && &bad == &kBad[0]) {
        EXPECT_EQ(theirs_resp.accepted(), 3u);
        EXPECT_EQ(resp.accepted(), 2u) << "the good two of the sloppy three";
      } else {
        EXPECT_EQ(resp.accepted(), 0u) << "the good two are duplicates now";
      }
      bool found = false;
      for (const skerry::v1::RejectedResult& r : resp.rejected()) {
        if (r.task_id() != mine[1].task_id()) continue;
        found = true;
        EXPECT_EQ(r.code(),
                  static_cast<uint32_t>(grpc::StatusCode::INVALID_ARGUMENT));
        EXPECT_NE(r.message().find(bad.field), std::string::npos)
            << r.message();
        EXPECT_LT(r.message().size(), 300u) << "quotes no content";
      }
      EXPECT_TRUE(found) << "the bad result is rejected by name";
    }
  }
  // The bad result's genome is still pending at attempt 1: nothing stored.
  EXPECT_EQ(Count(db_, absl::StrCat("SELECT count(*) FROM genomes WHERE id = ",
                                    mine[1].task_id(),
                                    " AND eval_state = ", skerry::v1::PENDING)),
            1);
  // Its worker may still send it properly.
  skerry::v1::ReportResponse resp;
  ASSERT_TRUE(Report(sloppy, {Honest(mine[1])}, &resp).ok());
  EXPECT_EQ(resp.accepted(), 1u);
  FinishHonestly();
}

TEST_F(WireAbuseTest, OversizedReportIsResourceExhaustedAndChangesNothing) {
  const uint64_t worker = Join();
  const std::vector<Task> tasks = Lease(worker);
  ASSERT_EQ(tasks.size(), kPopulation);
  const std::string before = Snapshot();
  {
    // Over the coordinator's 128 MB message limit (server/coordinator.cc).
    TaskResult huge = Honest(tasks[0]);
    huge.set_error(std::string(130u << 20, 'x'));
    skerry::v1::ReportResponse resp;
    grpc::Status s = Report(worker, {huge}, &resp);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED)
        << s.error_message();
  }
  EXPECT_EQ(Snapshot(), before);
  FinishHonestly();
}

TEST_F(WireAbuseTest, WorkerThatNeverReportsHasItsTasksLeasedAgain) {
  const uint64_t silent = Join("silent");
  const uint64_t honest = Join("honest");
  const std::vector<Task> taken = Lease(silent);
  ASSERT_EQ(taken.size(), kPopulation);
  EXPECT_TRUE(Lease(honest, 1000, 0).empty()) << "leased twice at once";
  clock_.Advance(absl::Milliseconds(1500));  // past the 1 s lease
  const std::vector<Task> again = Lease(honest);
  ASSERT_EQ(again.size(), kPopulation);
  for (const Task& t : again) EXPECT_EQ(t.attempt(), 2u);
  std::vector<TaskResult> results;
  for (const Task& t : again) results.push_back(Honest(t));
  skerry::v1::ReportResponse resp;
  ASSERT_TRUE(Report(honest, results, &resp).ok());
  EXPECT_EQ(resp.accepted(), kPopulation);
  // The silent worker wakes up late: its results change nothing.
  State();  // settles: the engine breeds under the lock GetRun waits for
  const std::string before = Snapshot();
  std::vector<TaskResult> late;
  for (const Task& t : taken) late.push_back(Honest(t));
  ASSERT_TRUE(Report(silent, late, &resp).ok());
  EXPECT_EQ(resp.accepted(), 0u);
  EXPECT_EQ(Snapshot(), before);
  FinishHonestly();
}

TEST_F(WireAbuseTest, ReportWithHeldTaskIdsRenewsTheLease) {
  const uint64_t holder = Join("holder");
  const uint64_t other = Join("other");
  const std::vector<Task> taken = Lease(holder);
  ASSERT_EQ(taken.size(), kPopulation);
  clock_.Advance(absl::Milliseconds(600));
  skerry::v1::ReportRequest renew;
  renew.set_worker_id(holder);
  renew.set_worker_secret(SecretOf(holder));
  for (const Task& t : taken) renew.add_held_task_ids(t.task_id());
  skerry::v1::ReportResponse resp;
  ASSERT_TRUE(fleet_->Report(Context().get(), renew, &resp).ok());
  clock_.Advance(
      absl::Milliseconds(600));  // 1.2 s after the lease, 0.6 after renewal
  EXPECT_TRUE(Lease(other, 1000, 0).empty()) << "a renewed lease expired";
  clock_.Advance(absl::Milliseconds(600));
  EXPECT_EQ(Lease(other, 1000, 0).size(), kPopulation);
  FinishHonestly();
}

TEST_F(WireAbuseTest, FloodOfJoinsLeavesTheCoordinatorCorrect) {
  const long long workers = Count(db_, "SELECT count(*) FROM workers");
  constexpr int kThreads = 4;
  constexpr int kJoinsPerThread = 500;
  std::vector<std::vector<uint64_t>> ids(kThreads);
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([this, t, &ids] {
      auto stub = FleetService::NewStub(channel_);
      for (int i = 0; i < kJoinsPerThread; ++i) {
        skerry::v1::JoinRequest req;
        req.set_protocol_version(kProtocolVersion);
        req.set_name(absl::StrCat("flood-", t, "-", i));
        req.set_threads(1);
        skerry::v1::JoinResponse resp;
        if (stub->Join(Context().get(), req, &resp).ok()) {
          ids[t].push_back(resp.worker_id());
        }
      }
    });
  }
  for (std::thread& t : threads) t.join();
  std::set<uint64_t> distinct;
  for (const auto& v : ids) distinct.insert(v.begin(), v.end());
  EXPECT_EQ(distinct.size(), static_cast<size_t>(kThreads * kJoinsPerThread));
  EXPECT_EQ(Count(db_, "SELECT count(*) FROM workers"),
            workers + kThreads * kJoinsPerThread);
  FinishHonestly();
}

}  // namespace
}  // namespace skerry
