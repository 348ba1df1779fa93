// Archive and online import end to end (issue 17, housekeeping), with a real
// coordinator, real worker processes and real SQLite files: `skerry archive`
// writes an ended run to a file, checks it, and only then deletes the run
// (refused, with the file kept, while a fork of the run exists); `skerry
// import` brings a file's runs back into the running coordinator with new
// ids and the same genomes (digest); a file holding a fork without its
// parent, a damaged file and a file of a newer schema are refused, importing
// nothing; the audit log names each archive and import; `--check` accepts
// the database after it all.
#include <signal.h>
#include <unistd.h>

#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/e2e/e2e_fleet.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using ::testing::HasSubstr;
using ::testing::Not;
using testing::RunCommand;

constexpr char kSpec[] = R"(
name: "to-archive"
seed: 3131
genome_length: 4
evaluator { builtin { function: "sphere" } }
ga {
  population_size: 10
  selection { method: TOURNAMENT tournament_size: 2 }
  crossover { method: UNIFORM rate: 0.6 }
  mutation { rate: 0.3 step: 0.4 }
  elites: 1
}
islands { count: 2 topology: RING interval: 2 migrants: 1 }
stop { max_generations: 8 }
)";

bool Exists(const std::string& path) { return access(path.c_str(), F_OK) == 0; }

class ArchiveTest : public ::testing::Test {
 protected:
  void SetUp() override {
    ASSERT_TRUE(fleet_.ok());
    ASSERT_TRUE(fleet_.AddWorkers(1, 2));
  }

  CommandResult Cli(std::vector<std::string> args) { return fleet_.Cli(args); }

  // `made` printed run id `id`, and that run finished.
  void Finish(const CommandResult& made, const std::string& id) {
    ASSERT_EQ(made.output, id + "\n");
    fleet_.Finished(made);
  }

  // The run's digest line's SHA-256.
  std::string Digest(const std::string& id) {
    int64_t n = 0;
    EXPECT_TRUE(absl::SimpleAtoi(id, &n)) << id;
    return fleet_.Digest(n);
  }

  testing::TempDir dir_;
  testing::LoopbackFleet fleet_{dir_, "archive.db"};
  const std::string& db_ = fleet_.db();
};

TEST_F(ArchiveTest, ArchivedRunLeavesOnlyAfterItsFileIsWholeAndImportsBack) {
  const std::string spec = dir_.File("spec.txt");
  ASSERT_TRUE(testing::WriteTextFile(spec, kSpec));
  Finish(Cli({"submit", spec}), "1");
  Finish(Cli({"fork", "1", "--at", "3"}), "2");
  const std::string digest_1 = Digest("1");
  ASSERT_EQ(digest_1.size(), 64u);

  // A parent of a fork: the file is written and kept, the run is not deleted.
  const std::string first = dir_.File("first.db");
  CommandResult refused = Cli({"archive", "1", "--to", first});
  EXPECT_EQ(refused.exit_code, 1) << refused.output;
  EXPECT_THAT(refused.output, HasSubstr("but not deleted"));
  EXPECT_THAT(refused.output, HasSubstr("has forks (run 2)"));
  EXPECT_TRUE(Exists(first));
  EXPECT_EQ(Cli({"show", "1"}).exit_code, 0);

  // The fork, then its parent.
  const std::string fork_file = dir_.File("fork.db");
  CommandResult fork = Cli({"archive", "2", "--to", fork_file});
  ASSERT_EQ(fork.exit_code, 0) << fork.output;
  EXPECT_THAT(fork.output, HasSubstr("run 2 archived to " + fork_file));
  const std::string parent_file = dir_.File("parent.db");
  CommandResult parent = Cli({"archive", "1", "--to", parent_file});
  ASSERT_EQ(parent.exit_code, 0) << parent.output;
  EXPECT_THAT(parent.output, HasSubstr("genomes deleted from the coordinator"));
  EXPECT_NE(Cli({"show", "1"}).exit_code, 0);
  EXPECT_NE(Cli({"show", "2"}).exit_code, 0);
  EXPECT_EQ(testing::QueryText(db_, "SELECT count(*) FROM genomes"), "0");

  // A run that is gone: no file, no partial file.
  const std::string gone = dir_.File("gone.db");
  CommandResult missing = Cli({"archive", "1", "--to", gone});
  EXPECT_EQ(missing.exit_code, 1) << missing.output;
  EXPECT_THAT(missing.output, HasSubstr("nothing deleted"));
  EXPECT_FALSE(Exists(gone));
  EXPECT_FALSE(Exists(gone + ".partial"));
  // An existing file is not overwritten.
  CommandResult exists = Cli({"archive", "1", "--to", parent_file});
  EXPECT_EQ(exists.exit_code, 2) << exists.output;
  EXPECT_THAT(exists.output, HasSubstr("already exists"));

  // Refused files import nothing.
  CommandResult orphan = Cli({"import", fork_file});
  EXPECT_EQ(orphan.exit_code, 1) << orphan.output;
  EXPECT_THAT(orphan.output, HasSubstr("is a fork of run 1, which the file "
                                       "does not hold"));
  const std::string newer = dir_.File("newer.db");
  ASSERT_EQ(RunCommand({"/bin/cp", parent_file, newer}).exit_code, 0);
  ASSERT_EQ(RunCommand({"/usr/bin/sqlite3", newer,
                        "UPDATE schema_version SET version = 99"})
                .exit_code,
            0);
  CommandResult too_new = Cli({"import", newer});
  EXPECT_EQ(too_new.exit_code, 1) << too_new.output;
  EXPECT_THAT(too_new.output, HasSubstr("schema version 99 is newer"));
  EXPECT_THAT(too_new.output, Not(HasSubstr(".tmp")));
  const std::string junk = dir_.File("junk.db");
  ASSERT_TRUE(testing::WriteTextFile(junk, "not a database at all\n"));
  CommandResult bad = Cli({"import", junk});
  EXPECT_EQ(bad.exit_code, 1) << bad.output;
  EXPECT_EQ(testing::QueryText(db_, "SELECT count(*) FROM runs"), "0");

  // A run submitted meanwhile takes id 3, not 1 (the table is empty, but
  // runs 1 and 2 existed: a run id is never given twice, so the audit log's
  // entries about run 1 stay about the run archived); the parent comes back
  // past it, with the same genomes.
  Finish(Cli({"submit", spec}), "3");
  CommandResult back = Cli({"import", parent_file});
  ASSERT_EQ(back.exit_code, 0) << back.output;
  EXPECT_THAT(back.output, HasSubstr("imported run 1 as run 4 (160 genomes)"));
  EXPECT_EQ(Digest("4"), digest_1);
  EXPECT_EQ(Digest("3"), digest_1);  // the same spec and seed
  CommandResult lineage = Cli({"ancestors", "4/0/7/0", "--yes"});
  EXPECT_EQ(lineage.exit_code, 0) << lineage.output;
  EXPECT_THAT(lineage.output, HasSubstr(" 4/1/"));  // migrants crossed

  CommandResult audit = Cli({"audit", "--limit", "100"});
  ASSERT_EQ(audit.exit_code, 0) << audit.output;
  EXPECT_THAT(audit.output, HasSubstr("ArchiveRun"));
  EXPECT_THAT(audit.output, HasSubstr("ImportRuns"));

  fleet_.coordinator().process.Signal(SIGTERM);
  ASSERT_TRUE(fleet_.coordinator().process.Wait(absl::Seconds(60)).ok());
  CommandResult check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_});
  EXPECT_EQ(check.exit_code, 0) << check.output;
}

}  // namespace
}  // namespace skerry
