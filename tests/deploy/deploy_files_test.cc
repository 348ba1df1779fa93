// The container, Kubernetes, Slurm and systemd files against each other and
// against the binaries' flags (check_deploy_files.py does the reading; YAML by
// PyYAML). No image can be pulled or run here, so this is what is checked of
// the container files: they parse, and their names, ports, paths and flags
// agree with the programs they start.
#include <string>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/deploy/deploy_util.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using testing::RunTool;

testing::CommandResult Check(const std::string& part,
                             const std::string& deploy_dir = "") {
  std::vector<std::string> argv = {"/usr/bin/python3",
                                   SKERRY_SOURCE_DIR
                                   "/tests/deploy/check_deploy_files.py",
                                   part,
                                   "--source",
                                   SKERRY_SOURCE_DIR,
                                   "--coordinator",
                                   SKERRY_COORDINATOR_BIN,
                                   "--worker",
                                   SKERRY_WORKER_BIN};
  if (!deploy_dir.empty()) {
    argv.push_back("--deploy-dir");
    argv.push_back(deploy_dir);
  }
  return RunTool(argv, absl::Seconds(120));
}

TEST(DeployFilesTest, KubernetesManifestsParseAndAgreeWithTheBinaries) {
  testing::CommandResult r = Check("kubernetes");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(DeployFilesTest, ContainerfileIsMultiStageDebian12AndAgreesWithTheFlags) {
  testing::CommandResult r = Check("container");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(DeployFilesTest, SlurmScriptGivesTheWorkerOnlyFlagsItHas) {
  testing::CommandResult r = Check("slurm");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(DeployFilesTest, SystemdUnitsGiveTheBinariesOnlyFlagsTheyHave) {
  testing::CommandResult r = Check("units");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(DeployFilesTest, AWorkerManifestPointingAtAnotherPortIsReported) {
  testing::TempDir dir;
  const std::string copy = dir.File("deploy");
  ASSERT_EQ(RunTool({"cp", "-r", SKERRY_SOURCE_DIR "/deploy", copy}).exit_code,
            0);
  const std::string workers = copy + "/kubernetes/workers.yaml";
  std::string text = testing::ReadWholeFile(workers);
  const size_t at = text.find("skerry-coordinator:7431");
  ASSERT_NE(at, std::string::npos);
  text.replace(at, 23, "skerry-coordinator:7432");
  ASSERT_TRUE(testing::WriteTextFile(workers, text));
  testing::CommandResult r = Check("kubernetes", copy);
  EXPECT_EQ(r.exit_code, 1) << r.output;
  EXPECT_THAT(r.output, HasSubstr("--coordinator skerry-coordinator:7432"));
}

}  // namespace
}  // namespace skerry
