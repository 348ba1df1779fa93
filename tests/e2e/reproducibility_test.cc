// Reproducible mode with real processes: the same spec and seed give the same
// digest whatever the fleet does (one worker, three workers of two threads,
// everything in one process, a worker frozen past its lease), and asynchronous
// mode keeps its lineage consistent.
#include <signal.h>

#include <map>
#include <string>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "common/genes.h"
#include "common/version.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using testing::DigestIn;
using testing::Process;
using testing::RunCommand;

// Three islands on a two-way ring with migration every 3 generations, so that
// migrants cross islands many times and every operator is used.
constexpr char kIslandSpec[] = R"(
name: "three-islands"
seed: 424243
genome_length: 6
evaluator { builtin { function: "ackley" } }
ga {
  population_size: 16
  selection { method: TOURNAMENT tournament_size: 2 }
  crossover { method: BLEND rate: 0.7 blend_alpha: 0.2 }
  mutation { rate: 0.3 step: 1.5 }
  elites: 1
  immigrants: 1
}
islands { count: 3 topology: TWO_WAY_RING interval: 3 migrants: 2
          emigrants: EMIGRATE_TOURNAMENT replacement: REPLACE_RANDOM }
stop { max_generations: 15 }
)";

// The evolution strategies on two islands: each island a search of its own,
// a better migrant moving its mean every 3 generations.
constexpr char kStrategySpec[] = R"(
name: "two-searches"
seed: 424244
genome_length: 6
evaluator { builtin { function: "rosenbrock" } }
strategy { KIND { } }
islands { count: 2 topology: RING interval: 3 migrants: 1 }
stop { max_generations: 25 }
)";

class ReproducibilityTest : public ::testing::Test {
 protected:
  void SetUp() override {
    spec_ = dir_.File("islands.spec");
    ASSERT_TRUE(testing::WriteTextFile(spec_, kIslandSpec));
  }

  // Runs the spec on a real coordinator with `workers` worker processes of
  // `threads` threads; `before_finish` may disturb the fleet. Returns the
  // digest.
  // `before_fleet` runs after the submission, before any worker starts.
  std::string RunOnFleet(
      const std::string& name, int workers, int threads,
      const std::function<void(std::vector<Process>&)>& disturb = nullptr,
      const std::vector<std::string>& coordinator_flags = {},
      const std::function<void(const std::string& address)>& before_fleet =
          nullptr) {
    const std::string db = dir_.File(name + ".db");
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db, dir_.File(name + "-coordinator.log"),
        coordinator_flags);
    EXPECT_TRUE(c.ok()) << c.status();
    if (!c.ok()) return "";
    auto cli = [&](std::vector<std::string> args) {
      return testing::RunCli(SKERRY_CLI_BIN, c->address(), args);
    };
    CommandResult submit = cli({"submit", spec_});
    EXPECT_EQ(submit.exit_code, 0) << submit.output;
    db_of_[name] = db;
    if (before_fleet) before_fleet(c->address());
    absl::StatusOr<std::vector<Process>> started =
        testing::StartWorkers(SKERRY_WORKER_BIN, c->address(), workers, threads,
                              name + "-", dir_.File(name + "-worker"));
    EXPECT_TRUE(started.ok()) << started.status();
    std::vector<Process> fleet;
    if (started.ok()) fleet = std::move(*started);
    if (disturb) disturb(fleet);
    CommandResult watch = cli({"watch", "1"});
    EXPECT_EQ(watch.exit_code, 0) << watch.output << c->process.Log();
    CommandResult digest = cli({"digest", "1"});
    EXPECT_EQ(digest.exit_code, 0) << digest.output;
    return DigestIn(digest.output);
  }

  testing::TempDir dir_;
  std::string spec_;
  std::map<std::string, std::string> db_of_;
};

TEST_F(ReproducibilityTest, DigestIsTheSameWhateverTheFleet) {
  const std::string one = RunOnFleet("one", 1, 1);
  ASSERT_EQ(one.size(), 64u);
  const std::string three = RunOnFleet("three", 3, 2);
  EXPECT_EQ(three, one) << "3 workers x 2 threads";

  CommandResult local = RunCommand({SKERRY_CLI_BIN, "local", spec_, "--workers",
                                    "3", "--db", dir_.File("local.db")});
  ASSERT_EQ(local.exit_code, 0) << local.output;
  EXPECT_EQ(DigestIn(local.output), one) << "skerry local\n" << local.output;

  // Islands really exchanged migrants, across islands.
  const std::vector<testing::StoredGenome> genomes =
      testing::ReadGenomes(db_of_["one"], 1);
  std::map<int64_t, int> island_of;
  for (const auto& g : genomes) island_of[g.id] = g.island;
  int crossings = 0;
  for (const auto& g : genomes) {
    if (g.origin == skerry::v1::MIGRANT) {
      ASSERT_EQ(island_of.count(g.parent_a), 1u);
      EXPECT_NE(island_of[g.parent_a], g.island);
      ++crossings;
    }
  }
  // 4 epochs (generations 3, 6, 9, 12) x 3 islands x 2 sources x 2 migrants.
  EXPECT_EQ(crossings, 4 * 3 * 2 * 2);
}

// Every evolution strategy: the same digest with one worker, three workers of
// two threads, and `skerry local`.
TEST_F(ReproducibilityTest, EveryStrategysDigestIsTheSameWhateverTheFleet) {
  for (const std::string kind : {"cma_es", "sep_cma_es", "natural_es"}) {
    SCOPED_TRACE(kind);
    std::string text = kStrategySpec;
    text.replace(text.find("KIND"), 4, kind);
    ASSERT_TRUE(testing::WriteTextFile(spec_, text));
    const std::string one = RunOnFleet(kind + "-one", 1, 1);
    ASSERT_EQ(one.size(), 64u);
    EXPECT_EQ(RunOnFleet(kind + "-three", 3, 2), one)
        << "3 workers x 2 threads";
    CommandResult local =
        RunCommand({SKERRY_CLI_BIN, "local", spec_, "--workers", "3", "--db",
                    dir_.File(kind + "-local.db")});
    ASSERT_EQ(local.exit_code, 0) << local.output;
    EXPECT_EQ(DigestIn(local.output), one) << "skerry local\n" << local.output;
    // 2 islands x 25 generations of the default 4 + floor(3 ln 6) = 9
    // samples (the natural ES: twice as many, 9 mirrored pairs), after each
    // generation's distribution genome.
    EXPECT_EQ(testing::ReadGenomes(db_of_[kind + "-one"], 1).size(),
              2u * 25u * (kind == "natural_es" ? 19u : 10u));
    CommandResult check =
        RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_of_[kind + "-one"]});
    EXPECT_EQ(check.exit_code, 0) << check.output;
  }
}

// GA genomes kept as their recipes between keyframes (ga.keyframe_interval,
// common/child_recipe.h): the run gives the genomes of the same run kept
// whole, with another fleet, stores a fraction of the bytes, and passes
// `--check`, which replays a sample of its keyframes; started again, its
// coordinator gives the champion of the run kept whole, and a backup of it
// the same digest.
TEST_F(ReproducibilityTest, GenomesKeptAsRecipesAreTheGenomesKeptWhole) {
  const std::string whole = RunOnFleet("whole", 1, 1);
  ASSERT_EQ(whole.size(), 64u);
  std::string text = kIslandSpec;
  text.replace(text.find("ga {"), 4, "ga {\n  keyframe_interval: 4");
  ASSERT_TRUE(testing::WriteTextFile(spec_, text));
  EXPECT_EQ(RunOnFleet("recipes", 3, 2), whole) << "3 workers x 2 threads";
  const std::string& db = db_of_["recipes"];
  auto count = [&](const std::string& where) {
    return std::stoi(testing::QueryText(
        db, absl::StrCat("SELECT count(*) FROM genomes WHERE ", where)));
  };
  // Every genome is its recipe (first byte 3, 98 bytes), with its genes
  // after it at keyframes; none is stored as genes alone.
  EXPECT_EQ(count("substr(genes, 1, 1) != x'03' OR length(genes) < 98"), 0);
  // Bred and copied genomes of generations 4, 8 and 12 are keyframes; most
  // others are the recipe alone (a champion is kept whole too).
  EXPECT_EQ(count("generation % 4 = 0 AND generation > 0 AND origin IN "
                  "(2, 3, 4, 6) AND length(genes) = 98"),
            0);
  EXPECT_GT(count("length(genes) = 98"), count("1") / 2);
  CommandResult check =
      RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_of_["recipes"]});
  EXPECT_EQ(check.exit_code, 0) << check.output;

  // A coordinator started again on each store (the recipes' loaded by
  // replay) gives the same champion, genes included; a one-run backup of the
  // recipes holds the same genomes and passes --check.
  auto champion_and_backup = [&](const std::string& name) {
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_of_[name], dir_.File(name + "-again.log"));
    EXPECT_TRUE(c.ok()) << c.status();
    if (!c.ok()) return std::string();
    CommandResult champion =
        testing::RunCli(SKERRY_CLI_BIN, c->address(), {"champion", "1"});
    EXPECT_EQ(champion.exit_code, 0) << champion.output;
    const std::string copy = dir_.File(name + "-backup.db");
    CommandResult backup = testing::RunCli(SKERRY_CLI_BIN, c->address(),
                                           {"backup", "1", "--to", copy});
    EXPECT_EQ(backup.exit_code, 0) << backup.output;
    CommandResult checked =
        RunCommand({SKERRY_COORDINATOR_BIN, "--check", copy});
    EXPECT_EQ(checked.exit_code, 0) << checked.output;
    return champion.output;
  };
  const std::string champion = champion_and_backup("recipes");
  EXPECT_THAT(champion, ::testing::HasSubstr("genes (6)"));
  EXPECT_EQ(champion, champion_and_backup("whole"));
  absl::StatusOr<testing::StartedCoordinator> restored =
      testing::StartCoordinator(SKERRY_COORDINATOR_BIN,
                                dir_.File("recipes-backup.db"),
                                dir_.File("restored.log"));
  ASSERT_TRUE(restored.ok()) << restored.status();
  CommandResult digest =
      testing::RunCli(SKERRY_CLI_BIN, restored->address(), {"digest", "1"});
  EXPECT_EQ(DigestIn(digest.output), whole) << digest.output;
}

// gene_precision FLOAT32, with the GA on three islands and with CMA-ES: the
// same digest with one worker, three workers of two threads and `skerry
// local`; every stored genome is the tagged float32 form (1 + 4 bytes a gene)
// and the run differs from the same spec at FLOAT64.
TEST_F(ReproducibilityTest, Float32RunsAreReproducibleAndStoredInHalf) {
  const std::string ga = kIslandSpec;
  std::string cma = kStrategySpec;
  cma.replace(cma.find("KIND"), 4, "cma_es");
  for (const auto& [kind, base] :
       {std::pair<std::string, std::string>{"ga", ga}, {"cma", cma}}) {
    SCOPED_TRACE(kind);
    ASSERT_TRUE(testing::WriteTextFile(spec_, base));
    const std::string wide = RunOnFleet(kind + "-float64", 1, 2);
    ASSERT_TRUE(testing::WriteTextFile(
        spec_, absl::StrCat(base, "gene_precision: FLOAT32\n")));
    const std::string one = RunOnFleet(kind + "-float32-one", 1, 1);
    ASSERT_EQ(one.size(), 64u);
    EXPECT_NE(one, wide);
    EXPECT_EQ(RunOnFleet(kind + "-float32-three", 3, 2), one)
        << "3 workers x 2 threads";
    CommandResult local =
        RunCommand({SKERRY_CLI_BIN, "local", spec_, "--workers", "2", "--db",
                    dir_.File(kind + "-float32-local.db")});
    ASSERT_EQ(local.exit_code, 0) << local.output;
    EXPECT_EQ(DigestIn(local.output), one) << "skerry local\n" << local.output;
    const std::vector<testing::StoredGenome> genomes =
        testing::ReadGenomes(db_of_[kind + "-float32-one"], 1);
    ASSERT_FALSE(genomes.empty());
    for (const testing::StoredGenome& g : genomes) {
      ASSERT_EQ(g.genes.size(), 1u + 4u * 6u) << "genome " << g.id;
      ASSERT_EQ(g.genes[0], kFloat32Tag) << "genome " << g.id;
    }
    for (const testing::StoredGenome& g :
         testing::ReadGenomes(db_of_[kind + "-float64"], 1)) {
      ASSERT_EQ(g.genes.size(), 8u * 6u) << "genome " << g.id;
    }
    CommandResult check = RunCommand(
        {SKERRY_COORDINATOR_BIN, "--check", db_of_[kind + "-float32-one"]});
    EXPECT_EQ(check.exit_code, 0) << check.output;
  }
}

// A worker frozen while it holds leased tasks, past its lease, then thawed:
// its tasks are leased again to the other worker, its late results are
// ignored, and the digest does not change. The frozen worker is played by the
// test through FleetService, so that it certainly holds a lease (a worker
// process stopped with SIGSTOP at a chosen moment may hold none, and the
// earlier form of this test then passed without testing anything); its late
// results are wrong on purpose.
TEST_F(ReproducibilityTest, FrozenWorkerPastItsLeaseChangesNothing) {
  const std::string reference = RunOnFleet("reference", 1, 1);
  ASSERT_EQ(reference.size(), 64u);
  std::vector<skerry::v1::Task> held;
  uint64_t frozen_id = 0;
  std::string frozen_secret;
  std::shared_ptr<grpc::Channel> channel;
  const std::string frozen = RunOnFleet(
      "frozen", 1, 1,
      [&](std::vector<Process>&) {
        ASSERT_FALSE(held.empty());
        // The real worker takes the held tasks once the lease has expired.
        std::vector<std::string> ids;
        for (const auto& t : held) ids.push_back(absl::StrCat(t.task_id()));
        const std::string retaken = absl::StrCat(
            "SELECT count(*) FROM genomes WHERE eval_state = 2 AND attempts "
            ">= 2 AND id IN (",
            absl::StrJoin(ids, ","), ")");
        const bool all_retaken = testing::WaitFor(
            [&] {
              return testing::QueryText(db_of_["frozen"], retaken) ==
                     absl::StrCat(held.size());
            },
            absl::Seconds(120));
        ASSERT_TRUE(all_retaken) << "the held tasks were never leased again";
        // Thawed: the frozen worker reports wrong scores, too late.
        auto fleet = skerry::v1::FleetService::NewStub(channel);
        skerry::v1::ReportRequest report;
        report.set_worker_id(frozen_id);
        report.set_worker_secret(frozen_secret);
        for (const auto& t : held) {
          skerry::v1::TaskResult* r = report.add_results();
          r->set_task_id(t.task_id());
          r->set_attempt(t.attempt());
          r->set_score(-1e9);  // would be the champion if it were taken
          r->set_eval_seconds(0.1);
        }
        skerry::v1::ReportResponse answer;
        grpc::ClientContext ctx;
        ctx.set_deadline(absl::ToChronoTime(absl::Now() + absl::Seconds(30)));
        grpc::Status s = fleet->Report(&ctx, report, &answer);
        ASSERT_TRUE(s.ok()) << s.error_message();
        EXPECT_EQ(answer.accepted(), 0u);
        EXPECT_EQ(answer.ignored(), held.size());
      },
      {"--lease-seconds", "1"},
      [&](const std::string& address) {
        channel =
            grpc::CreateChannel(address, grpc::InsecureChannelCredentials());
        auto fleet = skerry::v1::FleetService::NewStub(channel);
        skerry::v1::JoinRequest join;
        join.set_protocol_version(kProtocolVersion);
        join.set_name("frozen");
        join.set_threads(1);
        join.add_evaluators("ackley");
        skerry::v1::JoinResponse joined;
        grpc::ClientContext jctx;
        jctx.set_deadline(absl::ToChronoTime(absl::Now() + absl::Seconds(30)));
        ASSERT_TRUE(fleet->Join(&jctx, join, &joined).ok());
        frozen_id = joined.worker_id();
        frozen_secret = joined.worker_secret();
        skerry::v1::LeaseRequest lease;
        lease.set_worker_id(frozen_id);
        lease.set_worker_secret(frozen_secret);
        lease.set_max_tasks(5);
        lease.set_wait_ms(1000);
        skerry::v1::LeaseResponse leased;
        grpc::ClientContext lctx;
        lctx.set_deadline(absl::ToChronoTime(absl::Now() + absl::Seconds(30)));
        ASSERT_TRUE(fleet->Lease(&lctx, lease, &leased).ok());
        held.assign(leased.tasks().begin(), leased.tasks().end());
        // Then it freezes: it neither renews nor reports.
      });
  EXPECT_EQ(held.size(), 5u) << "the frozen worker held a lease";
  EXPECT_EQ(frozen, reference);
}

TEST_F(ReproducibilityTest, AsynchronousModeKeepsLineageConsistent) {
  std::string text = kIslandSpec;
  text.replace(text.find("interval: 3"), 11, "interval: 3 asynchronous: true");
  ASSERT_TRUE(testing::WriteTextFile(spec_, text));
  const std::string digest = RunOnFleet("async", 3, 1);
  ASSERT_EQ(digest.size(), 64u);
  const std::vector<testing::StoredGenome> genomes =
      testing::ReadGenomes(db_of_["async"], 1);
  ASSERT_EQ(genomes.size(), 3u * 16u * 15u);
  std::map<int64_t, const testing::StoredGenome*> by_id;
  for (const auto& g : genomes) by_id[g.id] = &g;
  for (const auto& g : genomes) {
    for (int64_t p : {g.parent_a, g.parent_b}) {
      if (p == 0) continue;
      SCOPED_TRACE(absl::StrCat("genome ", g.id, " parent ", p));
      ASSERT_EQ(by_id.count(p), 1u) << "parent missing";
      EXPECT_LT(by_id[p]->generation, g.generation);
      EXPECT_LT(p, g.id) << "a parent is stored before its child";
    }
  }
}

}  // namespace
}  // namespace skerry
