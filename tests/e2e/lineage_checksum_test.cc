// Regression (issue 18): a flipped byte in a genome row that a lineage answer
// reads was served as a silently wrong answer, since the lineage queries run
// on connections of their own and did not verify the row checksums of schema
// version 6. Now each of them fails with DATA_LOSS naming run, island,
// generation and slot. The database is a real one made by `skerry local`; one
// bit of one genome's stored genes is flipped in the file, and the lineage
// commands of the real CLI ask a real coordinator about it.
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using testing::RunCommand;
using testing::StoredGenome;

constexpr char kSpec[] = R"(
name: "lineage-checksums"
seed: 11
genome_length: 6
evaluator { builtin { function: "rastrigin" } }
ga {
  population_size: 10
  selection { method: TOURNAMENT tournament_size: 2 }
  crossover { method: UNIFORM rate: 0.9 }
  mutation { rate: 0.3 step: 0.4 }
  elites: 1
}
islands { count: 2 topology: RING interval: 2 migrants: 1 }
stop { max_generations: 6 }
)";

std::string ReadAll(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)),
                     std::istreambuf_iterator<char>());
}

TEST(LineageChecksumTest, FlippedGenomeRowIsDataLossInEveryLineageAnswer) {
  testing::TempDir dir;
  const std::string db = dir.File("run.db");
  const std::string spec = dir.File("run.spec");
  ASSERT_TRUE(testing::WriteTextFile(spec, kSpec));
  testing::CommandResult local =
      RunCommand({SKERRY_CLI_BIN, "local", spec, "--db", db, "--workers", "1"},
                 absl::Seconds(300));
  ASSERT_EQ(local.exit_code, 0) << local.output;
  std::ifstream wal(db + "-wal");
  ASSERT_FALSE(wal.good()) << "the WAL was not folded into the file";

  // A bred genome of the newest generation whose genes are stored once in the
  // file (no later elite copies them): flipping them damages that row alone.
  const std::vector<StoredGenome> genomes = testing::ReadGenomes(db, 1);
  std::string bytes = ReadAll(db);
  const StoredGenome* target = nullptr;
  size_t at = std::string::npos;
  for (auto it = genomes.rbegin(); it != genomes.rend(); ++it) {
    if (it->generation != 5 || it->parent_a == 0 || it->genes.size() != 48) {
      continue;
    }
    const size_t first = bytes.find(it->genes);
    if (first != std::string::npos &&
        bytes.find(it->genes, first + 1) == std::string::npos) {
      target = &*it;
      at = first;
      break;
    }
  }
  ASSERT_NE(target, nullptr) << "no genome with unique stored genes";
  const StoredGenome* other = nullptr;  // undamaged, same generation
  for (const StoredGenome& g : genomes) {
    if (g.generation == 5 && g.id != target->id) other = &g;
  }
  ASSERT_NE(other, nullptr);
  bytes[at + 20] = static_cast<char>(bytes[at + 20] ^ 0x04);
  {
    std::ofstream out(db, std::ios::binary | std::ios::trunc);
    out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  }

  absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
      SKERRY_COORDINATOR_BIN, db, dir.File("coordinator.log"));
  ASSERT_TRUE(c.ok()) << c.status();
  auto cli = [&](std::vector<std::string> args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     c->address()};
    argv.insert(argv.end(), args.begin(), args.end());
    return RunCommand(argv);
  };
  const std::string id = absl::StrCat(target->id);
  const std::string named =
      absl::StrCat("run 1 island ", target->island, " generation ",
                   target->generation, " slot ", target->slot);

  // An undamaged genome's answer that does not read the damaged row is
  // served as before.
  testing::CommandResult fine = cli({"descent", absl::StrCat(other->id)});
  EXPECT_EQ(fine.exit_code, 0) << fine.output;

  const std::vector<std::vector<std::string>> asks = {
      {"ancestors", id},
      {"ancestors", id, "--dot"},
      {"descent", id},
      {"descendants", absl::StrCat(target->parent_a)},
      {"common-ancestor", id, absl::StrCat(other->id)},
      {"coalescence", id},
      {"attribution", id},
  };
  for (const std::vector<std::string>& ask : asks) {
    SCOPED_TRACE(absl::StrJoin(ask, " "));
    testing::CommandResult r = cli(ask);
    EXPECT_NE(r.exit_code, 0) << r.output;
    EXPECT_THAT(r.output, HasSubstr(named)) << r.output;
    EXPECT_THAT(r.output, HasSubstr("does not match its checksum"));
  }
}

}  // namespace
}  // namespace skerry
