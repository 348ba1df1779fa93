// A worker holding leases while the coordinator is killed (SIGKILL) and
// restarted: its results, evaluated while the coordinator was down, are
// accepted by the new coordinator process (worker secret and lease proofs,
// server/auth/fleet_seal.h), and no task is evaluated twice. The evaluator
// counts its evaluations in a file and waits at a gate the test opens, so the
// kill comes while the worker is known to hold leases.
#include <csignal>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/time/time.h"
#include "gtest/gtest.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using testing::DigestIn;
using testing::Process;
using testing::QueryText;
using testing::RunCommand;

// Sphere function; one line per evaluation in count.txt beside the script;
// waits (at most 120 s) for a file named gate there before answering.
constexpr char kEvaluator[] = R"py(import json, os, sys, time
here = os.path.dirname(os.path.abspath(__file__))
for line in sys.stdin:
    if not line.strip():
        continue
    req = json.loads(line)
    genes = [float(g) for g in req.get("genes", [])]
    with open(os.path.join(here, "count.txt"), "a") as f:
        f.write(" ".join(repr(g) for g in genes) + "\n")
    for _ in range(1200):
        if os.path.exists(os.path.join(here, "gate")):
            break
        time.sleep(0.1)
    resp = {"id": req.get("id", "0"), "score": sum(g * g for g in genes)}
    sys.stdout.write(json.dumps(resp) + "\n")
    sys.stdout.flush()
)py";

constexpr char kSpec[] = R"(
name: "lease-restart"
seed: 4242
genome_length: 3
lower_bound: -2
upper_bound: 2
evaluator { external { argv: "/usr/bin/python3" argv: "SCRIPT" } }
ga { population_size: 8 elites: 1 }
stop { max_generations: 3 }
)";

int Lines(const std::string& path) {
  CommandResult wc = RunCommand({"/usr/bin/wc", "-l", path});
  int n = 0;
  std::vector<std::string> words =
      absl::StrSplit(wc.output, ' ', absl::SkipEmpty());
  if (wc.exit_code != 0 || words.empty() || !absl::SimpleAtoi(words[0], &n)) {
    return -1;
  }
  return n;
}

std::string State(const std::string& db) {
  return QueryText(db, "SELECT state FROM runs WHERE id = 1");
}

struct Outcome {
  std::string digest;
  int evaluations_counted = -1;  // lines the evaluator wrote
  std::string evaluations_stored;
};

// One run of the spec by one coordinator and one worker; with `kill`, the
// coordinator is SIGKILLed while the worker holds the first generation's
// leases, and restarted on the same port once the worker has finished them.
Outcome RunOnce(const testing::TempDir& dir, const std::string& name,
                bool kill) {
  Outcome out;
  const std::string folder = dir.File("eval");
  const std::string count = folder + "/count.txt";
  const std::string gate = folder + "/gate";
  std::remove(count.c_str());
  if (kill) {
    std::remove(gate.c_str());
  } else {
    EXPECT_TRUE(testing::WriteTextFile(gate, ""));
  }
  const std::string db = dir.File(name + ".db");
  const std::vector<std::string> flags = {"--lease-seconds", "60",
                                          "--max-wait-ms", "500"};
  absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
      SKERRY_COORDINATOR_BIN, db, dir.File(name + "-coordinator.log"), flags);
  EXPECT_TRUE(c.ok()) << c.status();
  if (!c.ok()) return out;
  const int port = c->port;
  const std::string address = c->address();
  CommandResult submit = RunCommand(
      {SKERRY_CLI_BIN, "--coordinator", address, "submit", dir.File("spec")});
  EXPECT_EQ(submit.exit_code, 0) << submit.output;
  if (submit.exit_code != 0) return out;
  absl::StatusOr<Process> worker =
      Process::Start({SKERRY_WORKER_BIN, "--coordinator", address, "--threads",
                      "2", "--batch", "8", "--sandbox", "none"},
                     dir.File(name + "-worker.log"));
  EXPECT_TRUE(worker.ok()) << worker.status();
  if (!worker.ok()) return out;
  Process coordinator = std::move(c->process);
  if (kill) {
    // Both threads are evaluating (held at the gate): the worker holds the
    // whole first generation's leases.
    EXPECT_TRUE(
        testing::WaitFor([&] { return Lines(count) == 2; }, absl::Seconds(60)))
        << worker->Log();
    coordinator.Kill();  // SIGKILL
    EXPECT_TRUE(testing::WriteTextFile(gate, ""));
    // The worker evaluates what it holds while nobody listens.
    EXPECT_TRUE(
        testing::WaitFor([&] { return Lines(count) == 8; }, absl::Seconds(60)))
        << worker->Log();
    absl::StatusOr<Process> next =
        Process::Start({SKERRY_COORDINATOR_BIN, "--db", db, "--listen",
                        absl::StrCat("127.0.0.1:", port), "--lease-seconds",
                        "60", "--max-wait-ms", "500"},
                       dir.File(name + "-coordinator2.log"));
    EXPECT_TRUE(next.ok()) << next.status();
    if (!next.ok()) return out;
    coordinator = std::move(*next);
  }
  EXPECT_TRUE(
      testing::WaitFor([&] { return State(db) == "4"; }, absl::Minutes(3)))
      << "state " << State(db) << "\n"
      << coordinator.Log() << worker->Log();
  CommandResult digest =
      RunCommand({SKERRY_CLI_BIN, "--coordinator", address, "digest", "1"});
  EXPECT_EQ(digest.exit_code, 0) << digest.output;
  out.digest = DigestIn(digest.output);
  out.evaluations_counted = Lines(count);
  out.evaluations_stored =
      QueryText(db, "SELECT evaluations FROM runs WHERE id = 1");
  coordinator.Signal(SIGTERM);
  EXPECT_TRUE(coordinator.Wait(absl::Seconds(30)).ok());
  worker->Kill();
  return out;
}

TEST(
    LeaseRestartTest,
    ResultsOfLeasesFromBeforeACoordinatorRestartAreAcceptedAndNotEvaluatedAgain) {
  testing::TempDir dir;
  ASSERT_EQ(RunCommand({"/bin/mkdir", dir.File("eval")}).exit_code, 0);
  const std::string script = dir.File("eval") + "/sphere_gate.py";
  ASSERT_TRUE(testing::WriteTextFile(script, kEvaluator));
  std::string spec = kSpec;
  spec.replace(spec.find("SCRIPT"), 6, script);
  ASSERT_TRUE(testing::WriteTextFile(dir.File("spec"), spec));

  const Outcome reference = RunOnce(dir, "reference", /*kill=*/false);
  ASSERT_EQ(reference.digest.size(), 64u);
  ASSERT_GT(reference.evaluations_counted, 8);
  EXPECT_EQ(absl::StrCat(reference.evaluations_counted),
            reference.evaluations_stored);

  const Outcome restarted = RunOnce(dir, "restarted", /*kill=*/true);
  // Every evaluation the evaluator made was stored once: none was refused
  // and made again after the restart.
  EXPECT_EQ(restarted.evaluations_counted, reference.evaluations_counted);
  EXPECT_EQ(restarted.evaluations_stored, reference.evaluations_stored);
  EXPECT_EQ(restarted.digest, reference.digest);
}

}  // namespace
}  // namespace skerry
