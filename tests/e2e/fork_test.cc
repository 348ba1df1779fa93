// Forks end to end (issue 17, part B), with the real coordinator, real worker
// processes and a real SQLite file: a fork without changes repeats its parent
// genome for genome from the fork's generation on (a digest over the shared
// generations, in DigestResponse's layout), every lineage command follows its
// genomes into the parent's, `--check` accepts both runs, and a fork refuses
// the fields it may not change, naming them.
#include <signal.h>

#include <map>
#include <regex>
#include <string>
#include <tuple>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/e2e/e2e_fleet.h"
#include "tests/e2e/genome_digest.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using testing::DigestFrom;
using ::testing::HasSubstr;
using testing::RunCommand;
using testing::StoredGenome;

// Three islands on a two-way ring migrating every 3 generations, elites and
// immigrants: every origin appears, and lineage crosses islands.
constexpr char kSpec[] = R"(
name: "parent"
seed: 1717
genome_length: 5
evaluator { builtin { function: "rastrigin" } }
ga {
  population_size: 12
  selection { method: TOURNAMENT tournament_size: 2 }
  crossover { method: BLEND rate: 0.7 blend_alpha: 0.2 }
  mutation { rate: 0.3 step: 0.5 }
  elites: 1
  immigrants: 1
}
islands { count: 3 topology: TWO_WAY_RING interval: 3 migrants: 1 }
stop { max_generations: 12 }
)";

std::string Key(const StoredGenome& g) {
  return absl::StrCat(g.run_id, "/", g.island, "/", g.generation, "/", g.slot);
}

class ForkTest : public ::testing::Test {
 protected:
  void SetUp() override {
    spec_ = dir_.File("parent.spec");
    ASSERT_TRUE(testing::WriteTextFile(spec_, kSpec));
    ASSERT_TRUE(fleet_.ok());
    ASSERT_TRUE(fleet_.AddWorkers(2, 2));
  }

  CommandResult Cli(std::vector<std::string> args) { return fleet_.Cli(args); }

  // Submits the spec and follows run 1 to its end.
  void RunParent() {
    CommandResult submit = Cli({"submit", spec_});
    ASSERT_EQ(submit.output, "1\n");
    fleet_.Finished(submit);
  }

  void StopAndCheck() { fleet_.StopAndCheck(); }

  testing::TempDir dir_;
  testing::LoopbackFleet fleet_{dir_, "forks.db"};
  const std::string& db_ = fleet_.db();
  std::string spec_;
};

TEST_F(ForkTest, UnchangedForkRepeatsItsParentAndLineageCrossesIntoIt) {
  RunParent();
  CommandResult fork = Cli({"fork", "1", "--at", "5"});
  ASSERT_EQ(fork.exit_code, 0) << fork.output;
  ASSERT_EQ(fork.output, "2\n");
  CommandResult watch = Cli({"watch", "2"});
  ASSERT_EQ(watch.exit_code, 0) << watch.output;
  EXPECT_THAT(watch.output, HasSubstr("finished"));

  // The same genomes from generation 5 on: same genes, scores, origins and
  // parents (by natural key), whatever the fleet did.
  const std::vector<StoredGenome> parent = testing::ReadGenomes(db_, 1);
  const std::vector<StoredGenome> child = testing::ReadGenomes(db_, 2);
  std::vector<StoredGenome> all = parent;
  all.insert(all.end(), child.begin(), child.end());
  uint64_t parent_count = 0;
  uint64_t child_count = 0;
  const std::string parent_digest = DigestFrom(parent, all, 5, &parent_count);
  const std::string child_digest = DigestFrom(child, all, 5, &child_count);
  EXPECT_EQ(child_digest, parent_digest);
  EXPECT_EQ(child_count, parent_count);
  EXPECT_EQ(child_count, 3u * 12u * 7u);  // 3 islands x 12 x generations 5-11
  EXPECT_EQ(child.size(), child_count) << "the fork holds nothing before 5";

  // The fork's generation 5 links into the parent's generation 4.
  std::map<int64_t, const StoredGenome*> by_id;
  for (const StoredGenome& g : all) by_id[g.id] = &g;
  const StoredGenome* crossing = nullptr;
  for (const StoredGenome& g : child) {
    if (g.generation == 5 && g.parent_a != 0) {
      ASSERT_EQ(by_id.count(g.parent_a), 1u);
      EXPECT_EQ(by_id[g.parent_a]->run_id, 1);
      EXPECT_EQ(by_id[g.parent_a]->generation, 4);
      if (crossing == nullptr) crossing = &g;
    }
  }
  ASSERT_NE(crossing, nullptr);

  // A fork of the fork at its first generation would link two runs deep.
  CommandResult twice = Cli({"fork", "2", "--at", "5"});
  EXPECT_EQ(twice.exit_code, 1) << twice.output;
  EXPECT_THAT(twice.output, HasSubstr("fork run 1 at generation 5 instead"));

  CommandResult show = Cli({"show", "2"});
  ASSERT_EQ(show.exit_code, 0) << show.output;
  EXPECT_THAT(show.output, HasSubstr("forked from run 1 at generation 5"));
  CommandResult list = Cli({"list"});
  ASSERT_EQ(list.exit_code, 0) << list.output;
  EXPECT_THAT(list.output, HasSubstr("parent (fork of 1 at 5)"));

  // Every lineage command follows the fork into its parent.
  const std::regex in_parent(R"(\b1/\d+/[0-4]/\d+\b)");
  const std::string late = absl::StrCat("2/0/9/3");
  CommandResult ancestors = Cli({"ancestors", late, "--yes"});
  ASSERT_EQ(ancestors.exit_code, 0) << ancestors.output;
  EXPECT_TRUE(std::regex_search(ancestors.output, in_parent))
      << ancestors.output;
  CommandResult dot = Cli({"ancestors", late, "--dot", "--depth", "8"});
  ASSERT_EQ(dot.exit_code, 0) << dot.output;
  EXPECT_THAT(dot.output, HasSubstr("digraph"));
  EXPECT_TRUE(std::regex_search(dot.output, in_parent)) << dot.output;
  const StoredGenome& over = *by_id[crossing->parent_a];
  CommandResult descendants =
      Cli({"descendants", Key(over), "--depth", "1", "--yes"});
  ASSERT_EQ(descendants.exit_code, 0) << descendants.output;
  EXPECT_THAT(descendants.output, HasSubstr(Key(*crossing)));
  CommandResult descent = Cli({"descent", Key(*crossing)});
  ASSERT_EQ(descent.exit_code, 0) << descent.output;
  EXPECT_THAT(descent.output, HasSubstr(Key(over).substr(0, 2)));
  EXPECT_TRUE(std::regex_search(descent.output, in_parent)) << descent.output;
  CommandResult attribution = Cli({"attribution", "2/best"});
  EXPECT_EQ(attribution.exit_code, 0) << attribution.output;
  // The copy and its original share every ancestor: their most recent common
  // ancestors are the original's parents, in the parent run.
  StoredGenome original;
  for (const StoredGenome& g : parent) {
    if (g.island == crossing->island && g.generation == 5 &&
        g.slot == crossing->slot) {
      original = g;
    }
  }
  CommandResult common =
      Cli({"common-ancestor", Key(original), Key(*crossing)});
  ASSERT_EQ(common.exit_code, 0) << common.output;
  EXPECT_THAT(common.output, HasSubstr(Key(over)));
  CommandResult coalescence = Cli({"coalescence", "2/*/11"});
  EXPECT_EQ(coalescence.exit_code, 0) << coalescence.output;

  StopAndCheck();
  // `--check` accepts the links into the parent because the run row names
  // it: the same rows without that are reported (the checksum triggers are
  // dropped for the edit and put back).
  const std::string orphaned = dir_.File("orphaned.db");
  ASSERT_EQ(RunCommand({"/bin/cp", db_, orphaned}).exit_code, 0);
  const std::string triggers = testing::QueryText(
      orphaned,
      "SELECT group_concat(sql, '; ') FROM sqlite_master WHERE type = "
      "'trigger' AND tbl_name = 'runs'");
  const std::string drops = testing::QueryText(
      orphaned,
      "SELECT group_concat('DROP TRIGGER ' || name, '; ') FROM sqlite_master "
      "WHERE type = 'trigger' AND tbl_name = 'runs'");
  CommandResult edit = RunCommand(
      {"/usr/bin/sqlite3", orphaned,
       absl::StrCat(drops,
                    "; UPDATE runs SET parent_run = NULL, parent_generation = "
                    "NULL WHERE id = 2; ",
                    triggers, ";")});
  ASSERT_EQ(edit.exit_code, 0) << edit.output;
  CommandResult check =
      RunCommand({SKERRY_COORDINATOR_BIN, "--check", orphaned});
  EXPECT_EQ(check.exit_code, 1) << check.output;
  EXPECT_THAT(check.output,
              HasSubstr("run 2: parent link does not resolve within the run"));
  EXPECT_THAT(check.output,
              HasSubstr("run 2 island 0: generation 0 is missing"));
}

TEST_F(ForkTest, ForkWithChangesStartsFromTheCopiedGenerationAndGoesItsWay) {
  RunParent();
  // Fields that give the copied genomes their shape or meaning are refused,
  // by name, and nothing is made.
  for (const auto& [set, field] :
       std::vector<std::tuple<std::string, std::string>>{
           {"genome_length: 7", "genome_length"},
           {"islands { count: 2 }", "islands.count"},
           {"ga { population_size: 20 }", "ga.population_size"},
           {"objective: MAXIMIZE", "objective"},
           {"stop { max_generations: 3 }", "stop.max_generations"}}) {
    CommandResult refused = Cli({"fork", "1", "--at", "3", "--set", set});
    EXPECT_EQ(refused.exit_code, 1) << set << "\n" << refused.output;
    EXPECT_THAT(refused.output, HasSubstr(field)) << set;
  }
  CommandResult too_late = Cli({"fork", "1", "--at", "40"});
  EXPECT_EQ(too_late.exit_code, 1) << too_late.output;
  EXPECT_THAT(too_late.output, HasSubstr("island 0 is at generation 11"));
  CommandResult bad_text = Cli({"fork", "1", "--at", "3", "--set", "ga {"});
  EXPECT_EQ(bad_text.exit_code, 2) << bad_text.output;
  EXPECT_THAT(bad_text.output, HasSubstr("--set:1:"));
  CommandResult none = Cli({"fork", "9", "--at", "3"});
  EXPECT_EQ(none.exit_code, 1) << none.output;
  EXPECT_THAT(testing::QueryText(db_, "SELECT count(*) FROM runs"), "1");

  const std::string changes = dir_.File("changes.txt");
  ASSERT_TRUE(testing::WriteTextFile(changes, "name: \"hot\"\n"));
  CommandResult fork =
      Cli({"fork", "1", "--at", "3", "--set-file", changes, "--set",
           "ga { mutation { rate: 0.9 step: 1.5 } } stop { max_generations: "
           "14 }"});
  ASSERT_EQ(fork.exit_code, 0) << fork.output;
  ASSERT_EQ(fork.output, "2\n");
  CommandResult watch = Cli({"watch", "2"});
  ASSERT_EQ(watch.exit_code, 0) << watch.output;

  const std::vector<StoredGenome> parent = testing::ReadGenomes(db_, 1);
  const std::vector<StoredGenome> child = testing::ReadGenomes(db_, 2);
  std::vector<StoredGenome> all = parent;
  all.insert(all.end(), child.begin(), child.end());
  // Generation 3 is the parent's, copied with its scores (same evaluator and
  // seed); from generation 4 on the fork breeds with its own rates.
  std::vector<StoredGenome> parent3, child3;
  for (const auto& g : parent) {
    if (g.generation == 3) parent3.push_back(g);
  }
  for (const auto& g : child) {
    if (g.generation == 3) child3.push_back(g);
  }
  uint64_t n1 = 0, n2 = 0;
  EXPECT_EQ(DigestFrom(child3, all, 3, &n2), DigestFrom(parent3, all, 3, &n1));
  EXPECT_EQ(n2, 36u);
  EXPECT_NE(DigestFrom(child, all, 4, &n2), DigestFrom(parent, all, 4, &n1));
  EXPECT_EQ(testing::QueryText(
                db_, "SELECT max(generation) FROM genomes WHERE run_id = 2"),
            "13");
  EXPECT_EQ(testing::QueryText(db_, "SELECT name FROM runs WHERE id = 2"),
            "hot");
  // The fork went further than its parent (generation 13 against 11): the
  // descendants of a parent's genome reach into the fork's last generation.
  CommandResult ancestors = Cli({"ancestors", "2/0/13/0", "--yes"});
  ASSERT_EQ(ancestors.exit_code, 0) << ancestors.output;
  std::smatch old_one;
  ASSERT_TRUE(std::regex_search(ancestors.output, old_one,
                                std::regex(R"(\b1/\d+/2/\d+\b)")))
      << ancestors.output;
  CommandResult descendants = Cli({"descendants", old_one.str(), "--yes"});
  ASSERT_EQ(descendants.exit_code, 0) << descendants.output;
  EXPECT_THAT(descendants.output, HasSubstr("2/0/13/0"));
  // The history before the fork is the parent's: generations 0-2 copied.
  EXPECT_EQ(testing::QueryText(db_,
                               "SELECT count(*) FROM generation_stats WHERE "
                               "run_id = 2 AND generation < 3"),
            "9");
  StopAndCheck();
}

// Deleting runs: refused without --yes, for an active run and for the parent
// of a fork; then every row goes, the audit log stays, the freed pages are
// given back (auto_vacuum=INCREMENTAL on a new database) and `--check` passes.
TEST_F(ForkTest, DeleteRefusesActiveRunsAndParentsOfForksThenFreesTheRows) {
  RunParent();
  CommandResult fork = Cli({"fork", "1", "--at", "5"});
  ASSERT_EQ(fork.exit_code, 0) << fork.output;
  CommandResult watch = Cli({"watch", "2"});
  ASSERT_EQ(watch.exit_code, 0) << watch.output;
  EXPECT_EQ(testing::QueryText(db_, "PRAGMA auto_vacuum"), "2");

  CommandResult unconfirmed = Cli({"delete", "1"});
  EXPECT_EQ(unconfirmed.exit_code, 2) << unconfirmed.output;
  EXPECT_THAT(unconfirmed.output, HasSubstr("--yes"));
  CommandResult parent = Cli({"delete", "1", "--yes"});
  EXPECT_EQ(parent.exit_code, 1) << parent.output;
  EXPECT_THAT(parent.output, HasSubstr("run 1 has forks (run 2)"));

  const std::string long_spec = dir_.File("long.spec");
  ASSERT_TRUE(testing::WriteTextFile(
      long_spec,
      "name: \"long\" genome_length: 4 evaluator { builtin { function: "
      "\"sphere\" } } ga { population_size: 8 } stop { max_generations: "
      "100000 }"));
  CommandResult submit = Cli({"submit", long_spec});
  ASSERT_EQ(submit.exit_code, 0) << submit.output;
  ASSERT_EQ(submit.output, "3\n");
  CommandResult active = Cli({"delete", "3", "--yes"});
  EXPECT_EQ(active.exit_code, 1) << active.output;
  EXPECT_THAT(active.output, HasSubstr("stop it first"));
  ASSERT_EQ(Cli({"stop", "3"}).exit_code, 0);
  CommandResult stopped = Cli({"delete", "3", "--yes"});
  EXPECT_EQ(stopped.exit_code, 0) << stopped.output;
  EXPECT_THAT(stopped.output, HasSubstr("run 3 deleted"));

  const std::string before = testing::QueryText(db_, "PRAGMA page_count");
  CommandResult child = Cli({"delete", "2", "--yes"});
  EXPECT_EQ(child.exit_code, 0) << child.output;
  EXPECT_THAT(child.output, HasSubstr("run 2 deleted (252 genomes;"));
  CommandResult first = Cli({"delete", "1", "--yes"});
  EXPECT_EQ(first.exit_code, 0) << first.output;
  EXPECT_THAT(first.output, HasSubstr("run 1 deleted (432 genomes;"));
  EXPECT_THAT(first.output, ::testing::Not(HasSubstr("; 0 bytes")));
  int64_t pages_before = 0, pages_after = 0;
  ASSERT_TRUE(absl::SimpleAtoi(before, &pages_before));
  ASSERT_TRUE(absl::SimpleAtoi(testing::QueryText(db_, "PRAGMA page_count"),
                               &pages_after));
  EXPECT_LT(pages_after, pages_before);
  CommandResult again = Cli({"delete", "1", "--yes"});
  EXPECT_EQ(again.exit_code, 1) << again.output;
  EXPECT_THAT(again.output, HasSubstr("run 1 not found"));
  for (const char* table :
       {"runs", "islands", "genomes", "generation_stats", "validations"}) {
    EXPECT_EQ(
        testing::QueryText(db_, absl::StrCat("SELECT count(*) FROM ", table)),
        "0")
        << table;
  }
  CommandResult list = Cli({"list"});
  EXPECT_EQ(list.output, "no runs\n");
  StopAndCheck();
}

// Export and import: `skerry backup` files of a parent and its fork go into a
// second coordinator's database with new ids; the digests there equal the
// first coordinator's, the fork still names its parent and its lineage still
// crosses into it. A fork without its parent, a damaged file and a file of a
// newer schema are refused, changing nothing.
TEST_F(ForkTest, ExportedRunsImportIntoAnotherCoordinatorWithLineageIntact) {
  RunParent();
  ASSERT_EQ(Cli({"fork", "1", "--at", "5"}).exit_code, 0);
  ASSERT_EQ(Cli({"watch", "2"}).exit_code, 0);
  std::map<int, std::string> digest_a;
  for (int run : {1, 2}) {
    CommandResult d = Cli({"digest", absl::StrCat(run)});
    ASSERT_EQ(d.exit_code, 0) << d.output;
    digest_a[run] = testing::DigestIn(d.output);
  }
  const std::string all = dir_.File("all.db");
  const std::string fork_only = dir_.File("fork-only.db");
  const std::string parent_only = dir_.File("parent-only.db");
  ASSERT_EQ(Cli({"backup", "all", "--to", all}).exit_code, 0);
  ASSERT_EQ(Cli({"backup", "2", "--to", fork_only}).exit_code, 0);
  ASSERT_EQ(Cli({"backup", "1", "--to", parent_only}).exit_code, 0);

  // The second coordinator holds a run of its own, so every id moves.
  const std::string db_b = dir_.File("b.db");
  {
    absl::StatusOr<testing::StartedCoordinator> b = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_b, dir_.File("b-first.log"));
    ASSERT_TRUE(b.ok()) << b.status();
    CommandResult submit = RunCommand(
        {SKERRY_CLI_BIN, "--coordinator", b->address(), "submit", spec_});
    ASSERT_EQ(submit.exit_code, 0) << submit.output;
    CommandResult refused =
        RunCommand({SKERRY_COORDINATOR_BIN, "--import", all, "--db", db_b});
    EXPECT_EQ(refused.exit_code, 1) << refused.output;  // b serves it
    b->process.Signal(SIGTERM);
    ASSERT_TRUE(b->process.Wait(absl::Seconds(60)).ok());
  }
  auto import_file = [&](const std::string& file) {
    return RunCommand({SKERRY_COORDINATOR_BIN, "--import", file, "--db", db_b});
  };
  CommandResult orphan = import_file(fork_only);
  EXPECT_EQ(orphan.exit_code, 1) << orphan.output;
  EXPECT_THAT(orphan.output,
              HasSubstr("run 2 of the file is a fork of run 1, which the "
                        "file does not hold"));
  // A score changed behind Skerry's back (the checksum triggers dropped for
  // the edit and put back, so that only the row's checksum tells).
  const std::string damaged = dir_.File("damaged.db");
  ASSERT_EQ(RunCommand({"/bin/cp", all, damaged}).exit_code, 0);
  const std::string triggers = testing::QueryText(
      damaged,
      "SELECT group_concat(sql, '; ') FROM sqlite_master WHERE type = "
      "'trigger' AND tbl_name = 'genomes'");
  const std::string drops = testing::QueryText(
      damaged,
      "SELECT group_concat('DROP TRIGGER ' || name, '; ') FROM sqlite_master "
      "WHERE type = 'trigger' AND tbl_name = 'genomes'");
  ASSERT_FALSE(triggers.empty());
  CommandResult edit = RunCommand(
      {"/usr/bin/sqlite3", damaged,
       absl::StrCat(drops,
                    "; UPDATE genomes SET score = 123456 WHERE id = (SELECT "
                    "min(id) FROM genomes WHERE eval_state = 2); ",
                    triggers, ";")});
  ASSERT_EQ(edit.exit_code, 0) << edit.output;
  CommandResult bad = import_file(damaged);
  EXPECT_EQ(bad.exit_code, 1) << bad.output;
  EXPECT_THAT(bad.output, HasSubstr("the file is damaged"));
  EXPECT_THAT(bad.output, HasSubstr("checksum"));
  const std::string newer = dir_.File("newer.db");
  ASSERT_EQ(RunCommand({"/bin/cp", all, newer}).exit_code, 0);
  ASSERT_EQ(RunCommand({"/usr/bin/sqlite3", newer,
                        "UPDATE schema_version SET version = 99"})
                .exit_code,
            0);
  CommandResult too_new = import_file(newer);
  EXPECT_EQ(too_new.exit_code, 1) << too_new.output;
  EXPECT_THAT(too_new.output, HasSubstr("schema version 99 is newer"));
  EXPECT_EQ(testing::QueryText(db_b, "SELECT count(*) FROM runs"), "1");

  CommandResult both = import_file(all);
  ASSERT_EQ(both.exit_code, 0) << both.output;
  EXPECT_THAT(both.output, HasSubstr("imported run 1 as run 2, run 2 as run 3 "
                                     "(684 genomes)"));
  CommandResult alone = import_file(parent_only);
  ASSERT_EQ(alone.exit_code, 0) << alone.output;
  EXPECT_THAT(alone.output, HasSubstr("imported run 1 as run 4 (432 genomes)"));
  CommandResult check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_b});
  EXPECT_EQ(check.exit_code, 0) << check.output;

  absl::StatusOr<testing::StartedCoordinator> b = testing::StartCoordinator(
      SKERRY_COORDINATOR_BIN, db_b, dir_.File("b.log"));
  ASSERT_TRUE(b.ok()) << b.status();
  auto cli_b = [&](std::vector<std::string> args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     b->address()};
    argv.insert(argv.end(), args.begin(), args.end());
    return RunCommand(argv, absl::Seconds(120));
  };
  for (const auto& [run_b, run_a] :
       std::vector<std::pair<int, int>>{{2, 1}, {3, 2}, {4, 1}}) {
    CommandResult d = cli_b({"digest", absl::StrCat(run_b)});
    ASSERT_EQ(d.exit_code, 0) << d.output;
    EXPECT_EQ(testing::DigestIn(d.output), digest_a[run_a])
        << "run " << run_b << " of b against run " << run_a << " of a";
  }
  CommandResult show = cli_b({"show", "3"});
  EXPECT_THAT(show.output, HasSubstr("forked from run 2 at generation 5"));
  CommandResult ancestors = cli_b({"ancestors", "3/0/9/3", "--yes"});
  ASSERT_EQ(ancestors.exit_code, 0) << ancestors.output;
  EXPECT_TRUE(
      std::regex_search(ancestors.output, std::regex(R"(\b2/\d+/[0-4]/\d+\b)")))
      << ancestors.output;
  EXPECT_FALSE(
      std::regex_search(ancestors.output, std::regex(R"(\b1/\d+/\d+/\d+\b)")))
      << "b's own run 1 is no ancestor\n"
      << ancestors.output;
}

}  // namespace
}  // namespace skerry
