// The crash loop: one run with several islands while the harness kills the
// coordinator with SIGKILL at seeded random moments and restarts it on the same
// database, kills workers with SIGKILL, and freezes one with SIGSTOP past its
// lease. At the end the run has finished, SQLite's integrity check and our own
// invariants hold (--check), no genome is missing or doubled, and the digest
// equals that of an uninterrupted run of the same spec and seed.
//
// SKERRY_CRASH_KILLS sets the number of coordinator kills (default 20, as in
// CI; use 100 or more locally). Every wait is bounded.
#include <signal.h>

#include <algorithm>
#include <cstdlib>
#include <ostream>
#include <random>
#include <string>
#include <utility>

#include "absl/strings/escaping.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "gtest/gtest.h"
#include "skerry/v1/strategy.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using testing::DigestIn;
using testing::Process;
using testing::QueryText;
using testing::RunCommand;

constexpr int kIslands = 4;

constexpr char kSpec[] = R"(
name: "crash-loop"
seed: 99173
genome_length: 8
evaluator { builtin { function: "griewank" } }
ga {
  population_size: 20
  selection { method: STOCHASTIC_UNIVERSAL scaling: LINEAR }
  crossover { method: TWO_POINT rate: 0.8 }
  mutation { rate: 0.2 step: 20 }
  elites: 2
  immigrants: 1
  KIND
}
islands { count: 4 topology: RANDOM random_degree: 2 interval: 4 migrants: 2 }
stop { max_generations: GENERATIONS }
)";

// The evolution strategies: four islands of 10 samples (each island a search
// of its own, a better migrant moving its mean), restarting whenever a stop
// criterion holds, which on Griewank happens many times in 250 generations.
constexpr char kCmaSpec[] = R"(
name: "crash-loop-cma"
seed: 99174
genome_length: 8
evaluator { builtin { function: "griewank" } }
strategy { KIND { population_size: 10 sigma: 100 } }
islands { count: 4 topology: RING interval: 4 migrants: 1 }
stop { max_generations: GENERATIONS }
)";

// IPOP-CMA-ES: four islands of 5 samples on Rastrigin in 2 dimensions, where
// each island's first search ends (TolFun) after 100 to 230 generations; the
// restart doubles its population, so an update then spans 2 generations and
// the later kills also land inside updates whose samples the saved state
// holds.
constexpr char kIpopSpec[] = R"(
name: "crash-loop-ipop"
seed: 99174
genome_length: 2
evaluator { builtin { function: "rastrigin" } }
lower_bound: -5.12
upper_bound: 5.12
init_lower: -5.12
init_upper: 5.12
strategy { cma_es { population_size: 5 ipop { } } }
islands { count: 4 topology: RING interval: 4 migrants: 1 }
stop { max_generations: GENERATIONS }
)";

// The natural ES: four islands of 5 mirrored pairs with weight decay, a
// better migrant becoming an island's centre.
constexpr char kNaturalEsSpec[] = R"(
name: "crash-loop-natural-es"
seed: 99175
genome_length: 8
evaluator { builtin { function: "griewank" } }
strategy { KIND { population_size: 10 sigma: 2 learning_rate: 5 weight_decay: 0.001 } }
islands { count: 4 topology: RING interval: 4 migrants: 1 }
stop { max_generations: GENERATIONS }
)";

// The largest restart count of any island's stored strategy state (-1 when
// unreadable), and the population its search has then.
std::pair<int, int> MostRestarts(const std::string& db) {
  std::pair<int, int> most = {-1, 0};
  for (int island = 0; island < kIslands; ++island) {
    const std::string bytes = absl::HexStringToBytes(QueryText(
        db, absl::StrCat("SELECT hex(state) FROM strategy_states WHERE "
                         "run_id = 1 AND island = ",
                         island)));
    skerry::v1::StrategyState state;
    if (!state.ParseFromString(bytes)) return {-1, 0};
    const int restarts = static_cast<int>(state.cma_es().restarts());
    if (restarts > most.first) {
      most = {restarts, static_cast<int>(state.cma_es().search().lambda())};
    }
  }
  return most;
}

struct LoopCase {
  const char* name;
  const char* spec;
  const char* kind;  // replaces KIND in the spec
  int population;
  int default_kills;       // without SKERRY_CRASH_KILLS
  const char* extra = "";  // more top-level fields, appended to the spec
};

// Test names print the case's name, not its bytes.
void PrintTo(const LoopCase& c, std::ostream* os) { *os << c.name; }

// Long enough for the kills wanted: about a dozen generations per kill.
int GenerationsFor(int kills) { return std::max(250, kills * 13); }

int KillsWanted(int n) {
  if (const char* env = std::getenv("SKERRY_CRASH_KILLS")) {
    if (!absl::SimpleAtoi(env, &n) || n < 1 || n > 100000) n = 20;
  }
  return n;
}

int64_t Evaluations(const std::string& db) {
  int64_t n = 0;
  if (!absl::SimpleAtoi(
          QueryText(db, "SELECT evaluations FROM runs WHERE id = 1"), &n)) {
    return 0;
  }
  return n;
}

std::string State(const std::string& db) {
  return QueryText(db, "SELECT state FROM runs WHERE id = 1");
}

class CrashLoopTest : public ::testing::TestWithParam<LoopCase> {};

TEST_P(CrashLoopTest, KilledCoordinatorAndWorkersLoseNothingAndChangeNothing) {
  testing::TempDir dir;
  const LoopCase& param = GetParam();
  const int kPopulation = param.population;
  const int kills_wanted = KillsWanted(param.default_kills);
  const int kGenerations = GenerationsFor(kills_wanted);
  const std::string spec = dir.File("crash.spec");
  {
    std::string text = param.spec;
    text.replace(text.find("GENERATIONS"), 11, absl::StrCat(kGenerations));
    if (size_t k = text.find("KIND"); k != std::string::npos) {
      text.replace(k, 4, param.kind);
    }
    text += param.extra;
    ASSERT_TRUE(testing::WriteTextFile(spec, text));
  }
  // The reference: the same spec and seed, nothing disturbed.
  CommandResult reference =
      RunCommand({SKERRY_CLI_BIN, "local", spec, "--workers", "2", "--db",
                  dir.File("reference.db")},
                 absl::Seconds(300));
  ASSERT_EQ(reference.exit_code, 0) << reference.output;
  const std::string want = DigestIn(reference.output);
  ASSERT_EQ(want.size(), 64u) << reference.output;

  const std::string db = dir.File("crash.db");
  const std::string log = dir.File("coordinator.log");
  const std::vector<std::string> flags = {"--lease-seconds", "1",
                                          "--max-wait-ms", "500"};
  // kill -9 drops the ownership lock with the process, so each restart may
  // take the database at once.
  absl::StatusOr<testing::StartedCoordinator> c =
      testing::StartCoordinator(SKERRY_COORDINATOR_BIN, db, log, flags);
  ASSERT_TRUE(c.ok()) << c.status();
  // Later coordinators must listen on the same port so that workers find them.
  const int port = c->port;
  const std::string address = c->address();
  CommandResult submit =
      RunCommand({SKERRY_CLI_BIN, "--coordinator", address, "submit", spec});
  ASSERT_EQ(submit.exit_code, 0) << submit.output;

  int worker_serial = 0;
  auto start_worker = [&]() {
    absl::StatusOr<Process> w = Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", address, "--threads", "2",
         "--batch", "6", "--name", absl::StrCat("w", worker_serial)},
        dir.File(absl::StrCat("worker", worker_serial, ".log")));
    ++worker_serial;
    EXPECT_TRUE(w.ok()) << w.status();
    return std::move(*w);
  };
  std::vector<Process> workers;
  workers.push_back(start_worker());
  workers.push_back(start_worker());
  workers.push_back(start_worker());

  std::mt19937 rng(20261201);  // seeded: the same moments on every run
  int kills = 0;
  int worker_kills = 0;
  bool froze = false;
  std::unique_ptr<testing::StartedCoordinator> coordinator =
      std::make_unique<testing::StartedCoordinator>(std::move(*c));
  const absl::Time give_up =
      absl::Now() + absl::Minutes(8) + absl::Seconds(3 * kills_wanted);
  while (kills < kills_wanted && absl::Now() < give_up) {
    // Wait for some progress since the last start, then a random moment more.
    const int64_t before = Evaluations(db);
    const bool progressed = testing::WaitFor(
        [&] { return Evaluations(db) > before || State(db) != "2"; },
        absl::Seconds(60));
    ASSERT_TRUE(progressed) << "no progress after restart " << kills << "\n"
                            << coordinator->process.Log();
    if (State(db) != "2") break;  // finished before all kills were spent
    absl::SleepFor(
        absl::Milliseconds(std::uniform_int_distribution<int>(0, 60)(rng)));
    coordinator->process.Kill();  // SIGKILL
    ++kills;
    if (kills % 4 == 0) {
      // A worker dies too, and a fresh one joins.
      const size_t victim = static_cast<size_t>(rng() % workers.size());
      workers[victim].Kill();
      workers[victim] = start_worker();
      ++worker_kills;
    }
    if (kills == 3) {
      // Freeze one worker (holding its lease, most likely) past its lease.
      workers[0].Signal(SIGSTOP);
      froze = true;
    }
    if (kills == 6 && froze) workers[0].Signal(SIGCONT);
    // The new coordinator listens on the old port so that workers find it.
    const std::string next_log =
        dir.File(absl::StrCat("coordinator", kills, ".log"));
    absl::StatusOr<Process> next =
        Process::Start({SKERRY_COORDINATOR_BIN, "--db", db, "--listen",
                        absl::StrCat("127.0.0.1:", port), "--lease-seconds",
                        "1", "--max-wait-ms", "500"},
                       next_log);
    ASSERT_TRUE(next.ok()) << next.status();
    coordinator = std::make_unique<testing::StartedCoordinator>(
        testing::StartedCoordinator{std::move(*next), port});
    ASSERT_TRUE(testing::WaitFor(
        [&] {
          return coordinator->process.Log().find("listening on port") !=
                 std::string::npos;
        },
        absl::Seconds(30)))
        << coordinator->process.Log();
  }
  if (froze) workers[0].Signal(SIGCONT);
  EXPECT_GE(kills, std::min(kills_wanted, param.default_kills))
      << "the run finished before enough kills; make it longer";
  RecordProperty("coordinator_kills", kills);
  RecordProperty("worker_kills", worker_kills);

  ASSERT_TRUE(
      testing::WaitFor([&] { return State(db) == "4"; }, absl::Minutes(5)))
      << "run did not finish; state " << State(db) << "\n"
      << coordinator->process.Log();

  CommandResult digest =
      RunCommand({SKERRY_CLI_BIN, "--coordinator", address, "digest", "1"});
  ASSERT_EQ(digest.exit_code, 0) << digest.output;
  EXPECT_EQ(DigestIn(digest.output), want)
      << "after " << kills << " coordinator kills and " << worker_kills
      << " worker kills";

  coordinator->process.Signal(SIGTERM);
  ASSERT_TRUE(coordinator->process.Wait(absl::Seconds(30)).ok());
  for (Process& w : workers) w.Kill();

  CommandResult check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", db});
  EXPECT_EQ(check.exit_code, 0) << check.output;
  EXPECT_NE(check.output.find("integrity_check: ok"), std::string::npos)
      << check.output;
  // No genome missing or doubled: exactly one per natural key.
  EXPECT_EQ(QueryText(db, "SELECT count(*) FROM genomes WHERE run_id = 1"),
            absl::StrCat(kIslands * kPopulation * kGenerations));
  EXPECT_EQ(QueryText(db,
                      "SELECT count(*) FROM (SELECT DISTINCT island, "
                      "generation, slot FROM genomes WHERE run_id = 1)"),
            absl::StrCat(kIslands * kPopulation * kGenerations));
  EXPECT_EQ(QueryText(db, "SELECT count(*) FROM genomes WHERE eval_state = 1"),
            "0");
  if (std::string(param.name) == "ga_float32") {
    // Every genome stored as a tagged float32 blob: 1 + 4 x 8 bytes.
    EXPECT_EQ(QueryText(db,
                        "SELECT count(*) FROM genomes WHERE run_id = 1 AND "
                        "(length(genes) != 33 OR substr(genes, 1, 1) != "
                        "x'01')"),
              "0");
  }
  if (std::string(param.name) == "natural_es") {
    // Every sample stored as its recipe (common/sample_recipe.h: 50 bytes,
    // tag 2), rebuilt for the digest and the check above.
    EXPECT_EQ(QueryText(db,
                        "SELECT count(*) FROM genomes WHERE run_id = 1 AND "
                        "origin = 7 AND (length(genes) != 50 OR "
                        "substr(genes, 1, 1) != x'02')"),
              "0");
  }
  if (std::string(param.name) == "ipop_cma_es") {
    // The case is only worth its time if the population grew.
    const auto [restarts, lambda] = MostRestarts(db);
    EXPECT_GE(restarts, 1);
    EXPECT_GE(lambda, 10);
  }
}

// The GA with the kills CI has always made; each evolution strategy with
// fewer, to keep CI time reasonable (SKERRY_CRASH_KILLS sets all of them).
INSTANTIATE_TEST_SUITE_P(
    EveryStrategy, CrashLoopTest,
    ::testing::Values(
        LoopCase{"ga", kSpec, "", 20, 20},
        // Every gene a float32 value: what the coordinator
        // stores, rounded, is what it breeds from after each
        // restart.
        LoopCase{"ga_float32", kSpec, "", 20, 6, "gene_precision: FLOAT32\n"},
        // Genomes kept as their recipes between keyframes every 5th
        // generation: a restarted coordinator replays the generation it
        // breeds from, and migrants cross islands from replayed ancestry.
        LoopCase{"ga_recipes", kSpec, "keyframe_interval: 5", 20, 6},
        // The evolution strategies' generations: the samples and the
        // distribution genome.
        LoopCase{"cma_es", kCmaSpec, "cma_es", 11, 8},
        LoopCase{"sep_cma_es", kCmaSpec, "sep_cma_es", 11, 8},
        LoopCase{"ipop_cma_es", kIpopSpec, "", 6, 8},
        LoopCase{"natural_es", kNaturalEsSpec, "natural_es", 11, 8}),
    [](const ::testing::TestParamInfo<LoopCase>& param_info) {
      return std::string(param_info.param.name);
    });

}  // namespace
}  // namespace skerry
