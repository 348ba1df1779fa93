// The Debian package installed on this machine for real, with apt-get, which
// resolves its dependencies as on a fresh Debian 12; then removed again.
//
// Opt-in (CTest label `deploy`, `scripts/test --tier deploy`): it changes
// this machine while it runs (a package, the system user `skerry`, removed
// again at the end unless it was there before) and needs root. Skipped with a
// message without root or apt-get, or when a skerry package is already
// installed (it is not ours to replace).
#include <unistd.h>

#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/version.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/deploy/deploy_util.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using ::testing::HasSubstr;
using testing::RunTool;

TEST(DpkgInstallTest, PackageInstallsWithAptItsProgramsRunAndItRemovesCleanly) {
  if (geteuid() != 0) GTEST_SKIP() << "needs root to install a package";
  if (!testing::OnPath("apt-get") || !testing::OnPath("dpkg-query")) {
    GTEST_SKIP() << "apt-get is not available (not a Debian system)";
  }
  if (RunTool({"dpkg-query", "-W", "-f=${db:Status-Status}", "skerry"})
          .output == "installed") {
    GTEST_SKIP() << "a skerry package is already installed here; remove it "
                    "first (apt-get remove skerry) to run this test";
  }
  const bool user_existed =
      RunTool({"getent", "passwd", "skerry"}).exit_code == 0;
  testing::TempDir dir;
  CommandResult built =
      RunTool({"env", std::string("BUILD_DIR=") + SKERRY_BUILD_DIR,
               "PACKAGE_DIR=" + dir.path(), "JOBS=1",
               SKERRY_SOURCE_DIR "/scripts/package"},
              absl::Seconds(600));
  ASSERT_EQ(built.exit_code, 0) << built.output;
  const std::string deb =
      RunTool({"sh", "-c",
               absl::StrCat("ls '", dir.path(), "'/skerry_*.deb | head -1")})
          .output;
  const std::string path = deb.substr(0, deb.find('\n'));
  ASSERT_FALSE(path.empty()) << built.output;

  CommandResult install =
      RunTool({"env", "DEBIAN_FRONTEND=noninteractive", "apt-get", "install",
               "-y", "--no-install-recommends", path},
              absl::Seconds(600));
  ASSERT_EQ(install.exit_code, 0) << install.output;
  for (const char* program :
       {"skerry-coordinator", "skerry-worker", "skerry"}) {
    CommandResult version =
        RunTool({absl::StrCat("/usr/bin/", program), "--version"});
    EXPECT_EQ(version.output, VersionLine(program));
  }
  EXPECT_EQ(RunTool({"getent", "passwd", "skerry"}).exit_code, 0)
      << "postinst did not make the system user";
  // The worker unit's --evaluator-dirs default must exist, or every worker
  // started by the unit refuses to start.
  EXPECT_TRUE(testing::PathExists("/usr/local/lib/skerry/evaluators"))
      << "postinst did not make the evaluator folder";
  if (testing::OnPath("man")) {
    EXPECT_THAT(RunTool({"man", "-w", "skerry-worker"}).output,
                HasSubstr("skerry-worker.1"));
  }
  if (testing::OnPath("systemd-analyze")) {
    CommandResult verify =
        RunTool({"systemd-analyze", "verify", "--man=no",
                 "skerry-coordinator.service", "skerry-worker@main.service"},
                absl::Seconds(60));
    EXPECT_EQ(verify.exit_code, 0) << verify.output;
    EXPECT_EQ(verify.output, "");
  }

  CommandResult remove = RunTool({"env", "DEBIAN_FRONTEND=noninteractive",
                                  "apt-get", "remove", "-y", "skerry"},
                                 absl::Seconds(300));
  EXPECT_EQ(remove.exit_code, 0) << remove.output;
  EXPECT_FALSE(testing::PathExists("/usr/bin/skerry-worker"));
  // Settings are conffiles: kept until purge.
  EXPECT_TRUE(testing::PathExists("/etc/skerry/worker.env"));
  CommandResult purge = RunTool({"env", "DEBIAN_FRONTEND=noninteractive",
                                 "apt-get", "purge", "-y", "skerry"},
                                absl::Seconds(300));
  EXPECT_EQ(purge.exit_code, 0) << purge.output;
  EXPECT_FALSE(testing::PathExists("/etc/skerry/worker.env"));
  EXPECT_FALSE(testing::PathExists("/usr/local/lib/skerry/evaluators"))
      << "postrm left the (empty) evaluator folder";
  // The package keeps its user (a database may still belong to it); the test
  // takes away the one its install made.
  if (!user_existed) RunTool({"userdel", "skerry"});
}

}  // namespace
}  // namespace skerry
