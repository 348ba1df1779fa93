// The coordinator's budgets end to end (issue 11): the real skerry-coordinator
// binary with its budget flags on a loopback port, specs submitted by the real
// `skerry` CLI. One in-range SubmitRun (genome length 10^6, population 10^6)
// used to freeze the coordinator, grow its memory by ~110 MB/s, time other
// calls out and ignore SIGTERM; now it is refused at once, naming the budget,
// the value and the flag, and the coordinator goes on serving and stops when
// told.
#include <csignal>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

class BudgetTest : public ::testing::Test {
 protected:
  void Start(const std::vector<std::string>& flags) {
    db_ = dir_.File("skerry.db");
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_, dir_.File("coordinator.log"), flags);
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
  }

  testing::CommandResult Submit(const std::string& name,
                                const std::string& spec_text) {
    const std::string path = dir_.File(name + ".spec");
    EXPECT_TRUE(testing::WriteTextFile(path, spec_text));
    return testing::RunCommand({SKERRY_CLI_BIN, "--coordinator",
                                coordinator_->address(), "submit", path});
  }

  static std::string Spec(const std::string& name, uint32_t population,
                          uint32_t length) {
    return absl::StrCat("name: \"", name, "\" genome_length: ", length,
                        " evaluator { builtin { function: \"sphere\" } } "
                        "ga { population_size: ",
                        population, " } stop { max_generations: 2 }\n");
  }

  // SIGTERM, and the coordinator must exit 0 (bounded wait).
  void ExpectSigtermStops() {
    coordinator_->process.Signal(SIGTERM);
    absl::StatusOr<int> code = coordinator_->process.Wait(absl::Seconds(60));
    ASSERT_TRUE(code.ok()) << code.status() << "\n"
                           << coordinator_->process.Log();
    EXPECT_EQ(*code, 0) << coordinator_->process.Log();
  }

  testing::TempDir dir_;
  std::string db_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
};

TEST_F(BudgetTest, MillionByMillionSpecIsRefusedAndTheCoordinatorServesOn) {
  Start({});  // the defaults, from this machine's memory
  testing::CommandResult huge = Submit("huge", Spec("huge", 1000000, 1000000));
  EXPECT_NE(huge.exit_code, 0) << huge.output;
  EXPECT_THAT(huge.output, HasSubstr("1000000000000"));
  EXPECT_THAT(huge.output, HasSubstr("--max-generation-genes"));
  EXPECT_EQ(testing::QueryText(db_, "SELECT count(*) FROM runs"), "0");
  testing::CommandResult small = Submit("small", Spec("small", 6, 3));
  EXPECT_EQ(small.exit_code, 0) << small.output;
  testing::CommandResult list = testing::RunCommand(
      {SKERRY_CLI_BIN, "--coordinator", coordinator_->address(), "list"});
  EXPECT_EQ(list.exit_code, 0) << list.output;
  EXPECT_THAT(list.output, HasSubstr("small"));
  ExpectSigtermStops();
}

TEST_F(BudgetTest, EachBudgetFlagIsEnforcedAndNamedInTheRefusal) {
  Start({"--max-generation-genes", "2000", "--max-generation-genomes", "50",
         "--max-name-bytes", "8", "--max-evaluator-bytes", "64",
         "--max-task-bytes", "4096"});
  struct Case {
    std::string name;
    std::string spec;
    std::string flag;
  };
  const std::vector<Case> cases = {
      {"genes", Spec("genes", 40, 60), "--max-generation-genes"},
      {"name", Spec("a-long-name", 6, 3), "--max-name-bytes"},
      {"genomes", Spec("genomes", 51, 2), "--max-generation-genomes"},
      {"evaluator",
       "name: \"ext\" genome_length: 3 lower_bound: -1 upper_bound: 1 "
       "evaluator { external { argv: \"" +
           std::string(100, 'p') +
           "\" } } ga { population_size: 6 } stop { max_generations: 2 }\n",
       "--max-evaluator-bytes"},
      // 8 x 600 genes is over 4096 bytes, the generation under 2000 genes.
      {"task", Spec("task", 2, 600), "--max-task-bytes"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.name);
    testing::CommandResult r = Submit(c.name, c.spec);
    EXPECT_NE(r.exit_code, 0) << r.output;
    EXPECT_THAT(r.output, HasSubstr(c.flag));
  }
  EXPECT_EQ(testing::QueryText(db_, "SELECT count(*) FROM runs"), "0");
  testing::CommandResult ok = Submit("ok", Spec("ok", 6, 3));
  EXPECT_EQ(ok.exit_code, 0) << ok.output;
  ExpectSigtermStops();
}

TEST_F(BudgetTest, BadBudgetFlagIsRefusedAtStart) {
  testing::CommandResult r =
      testing::RunCommand({SKERRY_COORDINATOR_BIN, "--db", dir_.File("x.db"),
                           "--max-task-bytes", "999999999999"});
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_THAT(r.output, HasSubstr("--max-task-bytes"));
}

}  // namespace
}  // namespace skerry
