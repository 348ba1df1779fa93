// What `cmake --install` lays out, the man pages against the --help texts, the
// systemd units against `systemd-analyze verify`, and every binary's
// --version. The install is staged under a temporary root (DESTDIR, prefix
// /usr, as in the Debian package): nothing outside it is touched.
#include <regex>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/version.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/deploy/deploy_util.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using testing::HelpFlags;
using testing::ManFlags;
using testing::PathExists;
using testing::ReadWholeFile;
using testing::RunTool;

struct Program {
  const char* name;
  const char* built;  // path in the build tree
};
const Program kPrograms[] = {
    {"skerry-coordinator", SKERRY_COORDINATOR_BIN},
    {"skerry-worker", SKERRY_WORKER_BIN},
    {"skerry", SKERRY_CLI_BIN},
};

class InstallTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    root_ = new testing::TempDir();
    install_ =
        new testing::CommandResult(testing::StagedInstall(root_->path()));
  }
  static void TearDownTestSuite() {
    delete install_;
    delete root_;
  }
  void SetUp() override {
    ASSERT_EQ(install_->exit_code, 0) << install_->output;
  }
  static std::string Root(const std::string& path) {
    return root_->path() + path;
  }

  static testing::TempDir* root_;
  static testing::CommandResult* install_;
};
testing::TempDir* InstallTest::root_ = nullptr;
testing::CommandResult* InstallTest::install_ = nullptr;

TEST_F(InstallTest, LaysOutBinariesUnitsSettingsManPagesAndDocs) {
  for (const char* path : {
           "/usr/bin/skerry-coordinator",
           "/usr/bin/skerry-worker",
           "/usr/bin/skerry",
           "/usr/lib/systemd/system/skerry-coordinator.service",
           "/usr/lib/systemd/system/skerry-worker@.service",
           "/usr/lib/sysusers.d/skerry.conf",
           "/etc/skerry/coordinator.env",
           "/etc/skerry/worker.env",
           "/usr/share/man/man1/skerry.1",
           "/usr/share/man/man1/skerry-coordinator.1",
           "/usr/share/man/man1/skerry-worker.1",
           "/usr/share/doc/skerry/deployment.md",
           "/usr/share/doc/skerry/user-guide.md",
           "/usr/share/doc/skerry/safety.md",
           "/usr/share/doc/skerry/README.md",
           "/usr/share/doc/skerry/examples/sphere-quick.spec",
           "/usr/share/skerry/slurm/skerry-workers.sbatch",
           "/usr/share/skerry/container/Containerfile",
           "/usr/share/skerry/kubernetes/coordinator.yaml",
           "/usr/share/skerry/kubernetes/workers.yaml",
       }) {
    EXPECT_TRUE(PathExists(Root(path))) << path << " is missing";
  }
  // Nothing but what we name: no test or benchmark program.
  EXPECT_FALSE(PathExists(Root("/usr/bin/skerry-bench")));
}

TEST_F(InstallTest, UnitsNameTheInstalledBinariesAndSettings) {
  const std::string coordinator =
      ReadWholeFile(Root("/usr/lib/systemd/system/skerry-coordinator.service"));
  EXPECT_THAT(coordinator, HasSubstr("ExecStart=/usr/bin/skerry-coordinator "));
  EXPECT_THAT(coordinator,
              HasSubstr("EnvironmentFile=-/etc/skerry/coordinator.env"));
  const std::string worker =
      ReadWholeFile(Root("/usr/lib/systemd/system/skerry-worker@.service"));
  EXPECT_THAT(worker, HasSubstr("ExecStart=/usr/bin/skerry-worker "));
  EXPECT_THAT(worker,
              HasSubstr("LoadCredential=token:/etc/skerry/worker.token"));
}

TEST_F(InstallTest, InstalledBinariesPrintTheReleaseVersion) {
  for (const Program& p : kPrograms) {
    SCOPED_TRACE(p.name);
    testing::CommandResult r =
        RunTool({Root(absl::StrCat("/usr/bin/", p.name)), "--version"});
    EXPECT_EQ(r.exit_code, 0) << r.output;
    EXPECT_EQ(r.output, VersionLine(p.name));
    EXPECT_THAT(r.output, HasSubstr(absl::StrCat(" ", kVersion, " ")));
  }
}

TEST_F(InstallTest, ManPagesNameExactlyTheFlagsOfTheHelpTexts) {
  for (const Program& p : kPrograms) {
    SCOPED_TRACE(p.name);
    testing::CommandResult help = RunTool({p.built, "--help"});
    ASSERT_EQ(help.exit_code, 0) << help.output;
    const std::string man =
        ReadWholeFile(Root(absl::StrCat("/usr/share/man/man1/", p.name, ".1")));
    ASSERT_FALSE(man.empty());
    EXPECT_EQ(ManFlags(man), HelpFlags(help.output));
    EXPECT_THAT(man, HasSubstr(absl::StrCat("\"skerry ", kVersion, "\"")));
  }
}

TEST_F(InstallTest, TheClientsManPageListsEveryCommandOfItsHelp) {
  testing::CommandResult help = RunTool({SKERRY_CLI_BIN, "--help"});
  ASSERT_EQ(help.exit_code, 0) << help.output;
  const std::string man = ReadWholeFile(Root("/usr/share/man/man1/skerry.1"));
  // Commands are the indented words of the "Commands:" block.
  const size_t start = help.output.find("Commands:\n");
  const size_t end = help.output.find("\nOptions:");
  ASSERT_NE(start, std::string::npos);
  const std::string block = help.output.substr(start, end - start);
  const std::regex command("\n  ([a-z][a-z-]*) ");
  int commands = 0;
  for (auto it = std::sregex_iterator(block.begin(), block.end(), command);
       it != std::sregex_iterator(); ++it) {
    const std::string name = (*it)[1];
    ++commands;
    EXPECT_THAT(man, HasSubstr(absl::StrCat("\n.B ", name, "\n")))
        << "command " << name << " is missing from skerry.1";
  }
  EXPECT_GE(commands, 20);
}

// systemd-analyze verify with the staged root as the system: the units' keys,
// their commands (the installed binaries must exist and be executable) and
// their dependencies. It prints warnings (an unknown key, a bad value) and
// still exits 0, so any output is a failure too.
class UnitsVerifyTest : public InstallTest {
 protected:
  void SetUp() override {
    InstallTest::SetUp();
    if (!testing::OnPath("systemd-analyze")) {
      GTEST_SKIP() << "systemd-analyze is not installed (package systemd; "
                      "deploy/install-deps.sh installs it)";
    }
    // The targets the units refer to, and the folders systemd 252 expects
    // under --root (its temporary files go to ROOT/tmp).
    for (const char* dir : {"/tmp", "/etc/systemd/system"}) {
      ASSERT_EQ(RunTool({"mkdir", "-p", Root(dir)}).exit_code, 0);
    }
    testing::CommandResult copy =
        RunTool({"sh", "-c",
                 absl::StrCat("cp -n /usr/lib/systemd/system/*.target '",
                              Root("/usr/lib/systemd/system/"), "'")});
    ASSERT_EQ(copy.exit_code, 0) << copy.output;
  }
  testing::CommandResult Verify(const std::string& unit) {
    return RunTool({"systemd-analyze", "verify", "--man=no",
                    "--root=" + root_->path(), unit},
                   absl::Seconds(60));
  }
};

TEST_F(UnitsVerifyTest, CoordinatorUnitVerifiesCleanly) {
  testing::CommandResult r = Verify("skerry-coordinator.service");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(r.output, "");
}

TEST_F(UnitsVerifyTest, WorkerTemplateVerifiesForAConfigNameAndAnAddress) {
  testing::CommandResult by_name = Verify("skerry-worker@main.service");
  EXPECT_EQ(by_name.exit_code, 0) << by_name.output;
  EXPECT_EQ(by_name.output, "");
  // An instance with a colon must be given as FILE:NAME, or verify reads the
  // colon as that separator.
  testing::CommandResult by_address =
      Verify(Root("/usr/lib/systemd/system/skerry-worker@.service") +
             ":skerry-worker@lab1.example.org:7431.service");
  EXPECT_EQ(by_address.exit_code, 0) << by_address.output;
  EXPECT_EQ(by_address.output, "");
}

TEST_F(UnitsVerifyTest, VerifyReportsAnUnknownKeyInAUnit) {
  // The check above can fail: a unit with a misspelt key is reported.
  const std::string bad = Root("/etc/systemd/system/skerry-typo.service");
  ASSERT_TRUE(testing::WriteTextFile(
      bad, "[Service]\nProtectSystm=strict\nExecStart=/usr/bin/skerry\n"));
  testing::CommandResult r = Verify("skerry-typo.service");
  EXPECT_THAT(r.output, HasSubstr("Unknown key"));
}

TEST_F(InstallTest, CoordinatorUnitIsHardenedAndRunsAsItsOwnUser) {
  const std::string unit =
      ReadWholeFile(Root("/usr/lib/systemd/system/skerry-coordinator.service"));
  for (const char* line :
       {"User=skerry", "StateDirectory=skerry", "ProtectSystem=strict",
        "ProtectHome=yes", "PrivateTmp=yes", "NoNewPrivileges=yes",
        "KillSignal=SIGTERM", "CapabilityBoundingSet=\n"}) {
    EXPECT_THAT(unit, HasSubstr(line));
  }
  const std::string sysusers =
      ReadWholeFile(Root("/usr/lib/sysusers.d/skerry.conf"));
  EXPECT_THAT(sysusers, HasSubstr("u skerry - "));
}

TEST_F(InstallTest,
       WorkerUnitTakesThreadsFromItsConfigAndTheTokenAsACredential) {
  const std::string unit =
      ReadWholeFile(Root("/usr/lib/systemd/system/skerry-worker@.service"));
  for (const char* line :
       {"EnvironmentFile=-/etc/skerry/worker-%i.env",
        "--threads ${SKERRY_THREADS}",
        "--token-file ${CREDENTIALS_DIRECTORY}/token", "DynamicUser=yes",
        "ProtectSystem=strict", "NoNewPrivileges=yes", "PrivateTmp=yes",
        "KillSignal=SIGTERM", "TimeoutStopSec="}) {
    EXPECT_THAT(unit, HasSubstr(line));
  }
  EXPECT_THAT(ReadWholeFile(Root("/etc/skerry/worker.env")),
              HasSubstr("\nSKERRY_THREADS="));
}

}  // namespace
}  // namespace skerry
