// Signals and evaluator processes, with real processes: a coordinator on a
// loopback port, skerry-worker binaries and an external evaluator that never
// answers (programs/hang_forever.py, which also starts a grandchild).
// Regression tests for "SIGINT to a worker leaves evaluator processes
// orphaned forever": the first SIGINT ends every evaluator process and hands
// the tasks back at once (the lease is ten minutes, far beyond the test's
// bounded waits, so only the hand-back lets a second worker lease them); a
// worker killed with SIGKILL leaves no evaluator process behind either.
#include <dirent.h>
#include <signal.h>
#include <sys/stat.h>

#include <fstream>
#include <memory>
#include <set>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_replace.h"
#include "absl/strings/str_split.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/process.h"
#include "worker/sandbox.h"

namespace skerry {
namespace {

constexpr char kHangSpec[] = R"(
name: "hang"
seed: 3
genome_length: 2
lower_bound: -1
upper_bound: 1
evaluator {
  external { argv: "python3" argv: "PROGRAM" argv: "FOLDER" }
  time_limit_seconds: 3600
}
ga { population_size: 2 }
stop { max_generations: 1 }
)";

struct Started {
  pid_t parent = 0;
  pid_t program = 0;
  pid_t grandchild = 0;
};

// Alive and not a zombie.
bool Alive(pid_t pid) {
  std::ifstream stat(absl::StrCat("/proc/", pid, "/stat"));
  if (!stat) return false;
  std::string text((std::istreambuf_iterator<char>(stat)),
                   std::istreambuf_iterator<char>());
  const size_t paren = text.rfind(')');
  return paren != std::string::npos && paren + 2 < text.size() &&
         text[paren + 2] != 'Z';
}

// Live processes whose command line holds `marker`, other than this one.
std::vector<pid_t> ProcessesNaming(const std::string& marker) {
  std::vector<pid_t> out;
  DIR* proc = opendir("/proc");
  if (proc == nullptr) return out;
  while (dirent* d = readdir(proc)) {
    int pid = 0;
    if (!absl::SimpleAtoi(d->d_name, &pid) || pid == getpid()) continue;
    std::ifstream f(absl::StrCat("/proc/", pid, "/cmdline"));
    std::string cmdline((std::istreambuf_iterator<char>(f)),
                        std::istreambuf_iterator<char>());
    if (cmdline.find(marker) != std::string::npos && Alive(pid)) {
      out.push_back(pid);
    }
  }
  closedir(proc);
  return out;
}

// Every evaluator program and its child end (bounded wait).
void ExpectGone(const std::vector<Started>& started) {
  for (const Started& s : started) {
    EXPECT_TRUE(
        testing::WaitFor([&] { return !Alive(s.program); }, absl::Seconds(20)))
        << "evaluator " << s.program << " outlived its worker";
    EXPECT_TRUE(testing::WaitFor([&] { return !Alive(s.grandchild); },
                                 absl::Seconds(20)))
        << "the evaluator's child " << s.grandchild << " outlived the worker";
  }
}

class WorkerSignalTest : public ::testing::Test {
 protected:
  void SetUp() override {
    folder_ = dir_.File("evaluations");
    mkdir(folder_.c_str(), 0755);
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, dir_.File("skerry.db"),
        dir_.File("coordinator.log"), {"--lease-seconds", "600"});
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
    const std::string spec = dir_.File("hang.spec");
    ASSERT_TRUE(testing::WriteTextFile(
        spec,
        absl::StrReplaceAll(kHangSpec,
                            {{"PROGRAM", std::string(SKERRY_TEST_PROGRAMS_DIR) +
                                             "/hang_forever.py"},
                             {"FOLDER", folder_}})));
    testing::CommandResult r =
        testing::RunCommand({SKERRY_CLI_BIN, "--coordinator",
                             coordinator_->address(), "submit", spec});
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }

  std::unique_ptr<testing::Process> StartWorker(const std::string& name,
                                                const std::string& sandbox) {
    absl::StatusOr<testing::Process> w = testing::Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", coordinator_->address(),
         "--threads", "2", "--name", name, "--sandbox", sandbox,
         "--evaluator-dirs", SKERRY_TEST_PROGRAMS_DIR},
        dir_.File(name + ".log"));
    EXPECT_TRUE(w.ok()) << w.status();
    return w.ok() ? std::make_unique<testing::Process>(std::move(*w)) : nullptr;
  }

  // The evaluations started so far under the worker `parent`.
  std::vector<Started> StartedUnder(pid_t parent) {
    std::vector<Started> out;
    DIR* d = opendir(folder_.c_str());
    if (d == nullptr) return out;
    while (dirent* e = readdir(d)) {
      std::vector<std::string> parts = absl::StrSplit(e->d_name, '-');
      Started s;
      if (parts.size() != 4 || parts[0] != "started" ||
          !absl::SimpleAtoi(parts[1], &s.parent) ||
          !absl::SimpleAtoi(parts[2], &s.program) ||
          !absl::SimpleAtoi(parts[3], &s.grandchild) || s.parent != parent) {
        continue;
      }
      out.push_back(s);
    }
    closedir(d);
    return out;
  }

  bool WaitForStarted(pid_t parent, size_t n) {
    return testing::WaitFor([&] { return StartedUnder(parent).size() >= n; },
                            absl::Seconds(120));
  }

  testing::TempDir dir_;
  std::string folder_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
};

TEST_F(WorkerSignalTest,
       FirstSigintKillsEvaluatorProcessesAndHandsTheTasksBackAtOnce) {
  std::unique_ptr<testing::Process> first = StartWorker("first", "none");
  ASSERT_NE(first, nullptr);
  ASSERT_TRUE(WaitForStarted(first->pid(), 2)) << first->Log();
  const std::vector<Started> started = StartedUnder(first->pid());

  first->Signal(SIGINT);
  absl::StatusOr<int> code = first->Wait(absl::Seconds(60));
  ASSERT_TRUE(code.ok()) << "the worker did not stop after SIGINT\n"
                         << first->Log();
  EXPECT_EQ(*code, 0) << first->Log();
  ExpectGone(started);

  // The tasks were handed back: another worker leases them now, not after
  // the ten-minute lease.
  std::unique_ptr<testing::Process> second = StartWorker("second", "none");
  ASSERT_NE(second, nullptr);
  EXPECT_TRUE(WaitForStarted(second->pid(), 2))
      << "the second worker got no task\n"
      << second->Log() << "\ncoordinator:\n"
      << coordinator_->process.Log();
}

TEST_F(WorkerSignalTest, TwoQuickSigintsLeaveNoEvaluatorProcess) {
  std::unique_ptr<testing::Process> worker = StartWorker("twice", "none");
  ASSERT_NE(worker, nullptr);
  ASSERT_TRUE(WaitForStarted(worker->pid(), 2)) << worker->Log();
  worker->Signal(SIGINT);
  worker->Signal(SIGINT);
  ASSERT_TRUE(worker->Wait(absl::Seconds(60)).ok()) << worker->Log();
  EXPECT_TRUE(testing::WaitFor([&] { return ProcessesNaming(folder_).empty(); },
                               absl::Seconds(20)))
      << ProcessesNaming(folder_).size() << " evaluator processes remain";
}

TEST_F(WorkerSignalTest, SandboxedEvaluatorsDieWithAWorkerKilledBySigkill) {
  std::string warning;
  if (!worker::SetUpSandbox(worker::SandboxMode::kBwrap, {}, {}, &warning)
           .ok()) {
    GTEST_SKIP() << "bubblewrap cannot run on this machine";
  }
  std::unique_ptr<testing::Process> worker = StartWorker("killed", "bwrap");
  ASSERT_NE(worker, nullptr);
  // bwrap, its init and the program and its child, for each of two tasks.
  ASSERT_TRUE(testing::WaitFor(
      [&] { return ProcessesNaming(folder_).size() >= 6; }, absl::Seconds(120)))
      << worker->Log();
  worker->Kill();
  EXPECT_TRUE(testing::WaitFor([&] { return ProcessesNaming(folder_).empty(); },
                               absl::Seconds(20)))
      << ProcessesNaming(folder_).size() << " evaluator processes remain";
}

// Regression: a worker without a sandbox killed by SIGKILL (as every test's
// Process does at its end) took its evaluator programs with it but left their
// own children (hang_forever.py's sleeping grandchild) running for good.
TEST_F(WorkerSignalTest,
       UnsandboxedEvaluatorsAndTheirChildrenDieWithAWorkerKilledBySigkill) {
  std::unique_ptr<testing::Process> worker = StartWorker("killed", "none");
  ASSERT_NE(worker, nullptr);
  ASSERT_TRUE(WaitForStarted(worker->pid(), 2)) << worker->Log();
  const std::vector<Started> started = StartedUnder(worker->pid());
  ASSERT_EQ(started.size(), 2u);
  worker->Kill();
  ExpectGone(started);
  EXPECT_TRUE(testing::WaitFor([&] { return ProcessesNaming(folder_).empty(); },
                               absl::Seconds(20)))
      << ProcessesNaming(folder_).size() << " evaluator processes remain";
}

}  // namespace
}  // namespace skerry
