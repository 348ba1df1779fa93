// deploy/slurm/skerry-workers.sbatch against a real single-node Slurm on this
// machine: the test starts munged, slurmctld and slurmd (Debian's munge and
// slurm-wlm) with a key, a configuration, ports and spool folders of its own
// in a temporary folder, submits the job-array script against a real
// coordinator on loopback, and stops everything again.
//
// Opt-in (CTest label `deploy`, `scripts/test --tier deploy`): it needs root
// and the packages from `deploy/install-deps.sh --deploy-tier`, and runs
// daemons; it is not run by default or in CI. Skipped with a message when
// those are missing. Every wait is bounded.
#include <netinet/in.h>
#include <signal.h>
#include <sys/socket.h>
#include <unistd.h>

#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/strip.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/deploy/deploy_util.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using ::testing::HasSubstr;
using ::testing::Not;
using testing::Process;
using testing::RunTool;

// A free TCP port on loopback (bound once and released).
int FreePort() {
  const int fd = socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  socklen_t len = sizeof(addr);
  int port = 0;
  if (bind(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) == 0 &&
      getsockname(fd, reinterpret_cast<sockaddr*>(&addr), &len) == 0) {
    port = ntohs(addr.sin_port);
  }
  close(fd);
  return port;
}

std::string ShortHostName() {
  char buf[256] = {};
  gethostname(buf, sizeof(buf) - 1);
  std::string name = buf;
  return name.substr(0, name.find('.'));
}

class SlurmTest : public ::testing::Test {
 protected:
  void SetUp() override {
    if (geteuid() != 0) {
      GTEST_SKIP() << "needs root: slurmd runs jobs as their users";
    }
    for (const char* tool : {"munged", "mungekey", "slurmctld", "slurmd",
                             "sbatch", "squeue", "sinfo", "scancel"}) {
      if (!testing::OnPath(tool)) {
        GTEST_SKIP() << tool
                     << " is not installed: run deploy/install-deps.sh "
                        "--deploy-tier (packages slurmd slurmctld "
                        "slurm-client munge)";
      }
    }
    conf_ = dir_.File("slurm.conf");
    ASSERT_EQ(
        RunTool({"mungekey", "--create", "--keyfile", dir_.File("munge.key")})
            .exit_code,
        0);
    absl::StatusOr<Process> munged =
        Process::Start({"/usr/sbin/munged", "--foreground", "--force",
                        "--key-file=" + dir_.File("munge.key"),
                        "--socket=" + dir_.File("munge.socket"),
                        "--pid-file=" + dir_.File("munged.pid"),
                        "--log-file=" + dir_.File("munged.log"),
                        "--seed-file=" + dir_.File("munged.seed")},
                       dir_.File("munged.out"));
    ASSERT_TRUE(munged.ok()) << munged.status();
    munged_ = std::make_unique<Process>(std::move(*munged));
    ASSERT_TRUE(testing::WaitFor(
        [&] { return testing::PathExists(dir_.File("munge.socket")); },
        absl::Seconds(30)))
        << munged_->Log();

    const std::string host = ShortHostName();
    for (const char* sub : {"state", "spool"}) {
      ASSERT_EQ(RunTool({"mkdir", "-p", dir_.File(sub)}).exit_code, 0);
    }
    ASSERT_TRUE(testing::WriteTextFile(
        conf_,
        absl::StrCat(
            "ClusterName=skerrytest\nSlurmctldHost=", host, "(127.0.0.1)\n",
            "SlurmctldPort=", FreePort(), "\nSlurmdPort=", FreePort(),
            "\nSlurmUser=root\nSlurmdUser=root\n",
            "AuthType=auth/munge\nCredType=cred/munge\nAuthInfo=socket=",
            dir_.File("munge.socket"), "\nStateSaveLocation=",
            dir_.File("state"), "\nSlurmdSpoolDir=", dir_.File("spool"),
            "\nSlurmctldPidFile=", dir_.File("slurmctld.pid"),
            "\nSlurmdPidFile=", dir_.File("slurmd.pid"),
            "\nSlurmctldLogFile=", dir_.File("slurmctld.log"),
            "\nSlurmdLogFile=", dir_.File("slurmd.log"),
            "\nProctrackType=proctrack/linuxproc\nTaskPlugin=task/none\n"
            "SelectType=select/cons_tres\nSelectTypeParameters=CR_CPU\n"
            "SchedulerType=sched/builtin\nMpiDefault=none\n"
            "JobAcctGatherType=jobacct_gather/none\n"
            "AccountingStorageType=accounting_storage/none\n"
            "JobCompType=jobcomp/none\nReturnToService=2\nKillWait=10\n"
            "MinJobAge=300\nNodeName=",
            host, " NodeAddr=127.0.0.1 CPUs=2 State=UNKNOWN\n",
            "PartitionName=test Nodes=ALL Default=YES MaxTime=INFINITE "
            "State=UP\n")));
    absl::StatusOr<Process> ctld =
        Process::Start({"/usr/sbin/slurmctld", "-D", "-i", "-f", conf_},
                       dir_.File("slurmctld.out"));
    ASSERT_TRUE(ctld.ok()) << ctld.status();
    slurmctld_ = std::make_unique<Process>(std::move(*ctld));
    absl::StatusOr<Process> d =
        Process::Start({"/usr/sbin/slurmd", "-D", "-f", conf_, "-N", host},
                       dir_.File("slurmd.out"));
    ASSERT_TRUE(d.ok()) << d.status();
    slurmd_ = std::make_unique<Process>(std::move(*d));
    ASSERT_TRUE(testing::WaitFor(
        [&] {
          CommandResult info = Slurm({"sinfo", "-h", "-o", "%t"});
          return info.exit_code == 0 &&
                 absl::StripAsciiWhitespace(info.output) == "idle";
        },
        absl::Seconds(90)))
        << testing::ReadWholeFile(dir_.File("slurmctld.log")) << slurmd_->Log();

    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, dir_.File("skerry.db"),
        dir_.File("coordinator.log"), {"--lease-seconds", "5"});
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
  }

  void TearDown() override {
    if (slurmctld_ != nullptr) {
      Slurm({"scancel", "--full", "--partition=test"});
      testing::WaitFor(
          [&] {
            CommandResult q = Slurm({"squeue", "-h"});
            return q.exit_code != 0 || q.output.empty();
          },
          absl::Seconds(60));
    }
    for (Process* p : {slurmd_.get(), slurmctld_.get(), munged_.get()}) {
      if (p == nullptr) continue;
      p->Signal(SIGTERM);
      if (!p->Wait(absl::Seconds(30)).ok()) p->Kill();
    }
    if (coordinator_ != nullptr) coordinator_->process.Kill();
  }

  // A Slurm client command with this cluster's configuration.
  CommandResult Slurm(std::vector<std::string> argv,
                      absl::Duration timeout = absl::Seconds(60)) {
    argv.insert(argv.begin(), {"env", "SLURM_CONF=" + conf_});
    return RunTool(argv, timeout);
  }
  // sbatch --wait: returns when every array task has ended, with exit code 0
  // only when all of them exited 0.
  CommandResult SubmitWorkers(const std::vector<std::string>& options,
                              int idle_seconds) {
    std::vector<std::string> argv = {
        "env", "SLURM_CONF=" + conf_,
        "SKERRY_COORDINATOR=" + coordinator_->address(),
        std::string("SKERRY_WORKER=") + SKERRY_WORKER_BIN,
        absl::StrCat("SKERRY_IDLE_SECONDS=", idle_seconds),
        // The evaluator program's folder, shown to the evaluator sandbox.
        std::string("SKERRY_WORKER_FLAGS=--evaluator-dirs ") + SKERRY_SOURCE_DIR
            "/tests/deploy/programs",
        "sbatch", "--wait", "--output=" + dir_.File("worker-%A_%a.log")};
    argv.insert(argv.end(), options.begin(), options.end());
    argv.push_back(SKERRY_SOURCE_DIR "/deploy/slurm/skerry-workers.sbatch");
    return RunTool(argv, absl::Seconds(600));
  }
  CommandResult Cli(std::vector<std::string> args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     coordinator_->address()};
    argv.insert(argv.end(), args.begin(), args.end());
    return testing::RunCommand(argv, absl::Seconds(60));
  }
  std::string WorkerLogs() {
    return RunTool({"sh", "-c",
                    absl::StrCat("cat '", dir_.path(), "'/worker-*.log")})
        .output;
  }
  // The run finished with the digest of `skerry local` on the same spec, and
  // the database passes --check.
  void ExpectFinishedAsOnLoopback(const std::string& spec) {
    EXPECT_THAT(Cli({"show", "1"}).output, HasSubstr("finished"));
    CommandResult local =
        testing::RunLocalReference(spec, dir_.File("loopback.db"));
    ASSERT_EQ(local.exit_code, 0) << local.output;
    EXPECT_EQ(testing::DigestIn(Cli({"digest", "1"}).output),
              testing::DigestIn(local.output));
    CommandResult check = testing::RunCommand(
        {SKERRY_COORDINATOR_BIN, "--check", dir_.File("skerry.db")});
    EXPECT_EQ(check.exit_code, 0) << check.output;
  }

  testing::TempDir dir_;
  std::string conf_;
  std::unique_ptr<Process> munged_;
  std::unique_ptr<Process> slurmctld_;
  std::unique_ptr<Process> slurmd_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
};

TEST_F(SlurmTest, JobArrayWorkersFinishTheRunAndLeaveWhenIdle) {
  const std::string spec = dir_.File("run.spec");
  ASSERT_TRUE(testing::WriteTextFile(
      spec, testing::SlowSphereSpec("slurm", 2, 10, 10, 0.01)));
  ASSERT_EQ(Cli({"submit", spec}).exit_code, 0);
  CommandResult job =
      SubmitWorkers({"--array=0-1", "--cpus-per-task=1"}, /*idle_seconds=*/3);
  ASSERT_EQ(job.exit_code, 0) << job.output << WorkerLogs();
  const std::string logs = WorkerLogs();
  // One worker per array task, with the task's CPUs as threads.
  EXPECT_THAT(logs, HasSubstr("_0-"));
  EXPECT_THAT(logs, HasSubstr("_1-"));
  EXPECT_THAT(logs, HasSubstr(": 1 threads, coordinator "));
  EXPECT_THAT(logs, HasSubstr("no work for 3s (--exit-when-idle)"));
  ExpectFinishedAsOnLoopback(spec);
}

TEST_F(SlurmTest, TimeLimitSignalStopsTheWorkerCleanlyAndAnotherArrayFinishes) {
  // About 40 s of evaluation on one thread: longer than the time to the
  // signal, so the worker is stopped in the middle of the run.
  const std::string spec = dir_.File("run.spec");
  ASSERT_TRUE(testing::WriteTextFile(
      spec, testing::SlowSphereSpec("slurm-limit", 2, 10, 40, 0.05)));
  ASSERT_EQ(Cli({"submit", spec}).exit_code, 0);
  // A one-minute limit with SIGTERM asked for 50 s before it. A job killed
  // at the limit would end TIMEOUT, and sbatch --wait would fail.
  CommandResult limited = SubmitWorkers(
      {"--array=0", "--cpus-per-task=1", "--time=1", "--signal=B:TERM@50"},
      /*idle_seconds=*/600);
  EXPECT_EQ(limited.exit_code, 0) << limited.output << WorkerLogs();
  const std::string logs = WorkerLogs();
  EXPECT_THAT(logs, HasSubstr("skerry-worker: stopping"));
  EXPECT_THAT(logs, Not(HasSubstr("no work for")));
  EXPECT_THAT(Cli({"show", "1"}).output, HasSubstr("running"))
      << "the run ended before the signal: make it longer";

  CommandResult rest =
      SubmitWorkers({"--array=0-1", "--cpus-per-task=1"}, /*idle_seconds=*/3);
  ASSERT_EQ(rest.exit_code, 0) << rest.output << WorkerLogs();
  ExpectFinishedAsOnLoopback(spec);
}

}  // namespace
}  // namespace skerry
