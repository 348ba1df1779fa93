// The lineage commands (cli/lineage.h) against a real LineageService on an
// in-process gRPC channel, over the hand-built graph of lineage_graph.h.
#include <memory>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "cli/lineage.h"
#include "gmock/gmock.h"
#include "google/protobuf/util/json_util.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "server/lineage/lineage_service.h"
#include "tests/support/process.h"
#include "tests/unit/lineage/lineage_graph.h"

namespace skerry::cli {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;
namespace t = skerry::testing;

class LineageCliTest : public ::testing::Test {
 protected:
  void SetUp() override {
    t::WriteGraph(dir_.File("graph.db"));
    auto service = lineage::LineageServiceImpl::Open(dir_.File("graph.db"));
    ASSERT_TRUE(service.ok()) << service.status();
    service_ = std::move(*service);
    grpc::ServerBuilder builder;
    builder.RegisterService(service_.get());
    server_ = builder.BuildAndStart();
    ASSERT_NE(server_, nullptr);
  }
  void TearDown() override {
    if (server_) server_->Shutdown();
  }

  // Runs `skerry ARGS...`; answers prompts with `answer`.
  int Run(const std::vector<std::string>& argv,
          std::optional<bool> answer = std::nullopt,
          uint64_t confirm_rows = kConfirmRows) {
    out_.str("");
    err_.str("");
    asked_.clear();
    absl::StatusOr<ParsedArgs> args = ParseArgs(argv, "");
    EXPECT_TRUE(args.ok()) << args.status();
    if (!args.ok()) return -1;
    Io io;
    io.out = &out_;
    io.err = &err_;
    auto factory = [this](const std::string&) {
      return skerry::v1::LineageService::NewStub(
          server_->InProcessChannel(grpc::ChannelArguments()));
    };
    Confirm confirm = [&](const std::string& q) {
      asked_ = q;
      return answer;
    };
    return LineageCommand(*args, factory, confirm, io, confirm_rows);
  }

  t::TempDir dir_;
  std::unique_ptr<lineage::LineageServiceImpl> service_;
  std::unique_ptr<grpc::Server> server_;
  std::ostringstream out_, err_;
  std::string asked_;
};

TEST(GenomeRefTest, ParsesIdsKeysAndChampions) {
  auto id = ParseGenomeRef("#42");
  ASSERT_TRUE(id.ok());
  EXPECT_EQ(id->id(), 42u);
  EXPECT_EQ(ParseGenomeRef("42")->id(), 42u);
  auto key = ParseGenomeRef("3/0/12/5");
  ASSERT_TRUE(key.ok());
  EXPECT_EQ(key->key().run_id(), 3u);
  EXPECT_EQ(key->key().generation(), 12u);
  EXPECT_EQ(key->key().slot(), 5u);
  EXPECT_EQ(ParseGenomeRef("3/best")->champion_of_run(), 3u);
  for (const char* bad : {"", "#", "0", "3/0/12", "3/0/x/5", "0/0/1/1",
                          "1/2/3/4/5", "-4", "best", "0/best"}) {
    SCOPED_TRACE(bad);
    auto r = ParseGenomeRef(bad);
    EXPECT_TRUE(absl::IsInvalidArgument(r.status()));
    EXPECT_THAT(std::string(r.status().message()), HasSubstr("genome"));
  }
  auto all = ParsePopulationRef("3/*/60");
  ASSERT_TRUE(all.ok());
  EXPECT_TRUE(all->all_islands());
  EXPECT_EQ(all->generation(), 60u);
  EXPECT_EQ(ParsePopulationRef("3/1/60")->island(), 1u);
  EXPECT_FALSE(ParsePopulationRef("3/60").ok());
}

TEST_F(LineageCliTest, AncestorsPrintIdsAndKeysOfEveryAncestor) {
  ASSERT_EQ(Run({"ancestors", "1/0/2/0"}), kExitOk) << err_.str();
  const std::string out = out_.str();
  EXPECT_THAT(out, HasSubstr("ancestors of #21 1/0/2/0 (crossover, score 5)"));
  EXPECT_THAT(out, HasSubstr("#12  1/0/1/1"));
  EXPECT_THAT(out, HasSubstr("#2  1/0/0/1"));
  EXPECT_THAT(out, HasSubstr("4 ancestors\n"));
}

TEST_F(LineageCliTest, JsonStreamIsOneParsableMessagePerLine) {
  ASSERT_EQ(Run({"ancestors", "21", "--json", "--depth", "1"}), kExitOk);
  std::istringstream lines(out_.str());
  std::string line;
  int nodes = 0;
  while (std::getline(lines, line)) {
    skerry::v1::LineageChunk chunk;
    ASSERT_TRUE(google::protobuf::util::JsonStringToMessage(line, &chunk).ok())
        << line;
    nodes += chunk.nodes_size();
  }
  EXPECT_EQ(nodes, 2);  // H and G
}

TEST_F(LineageCliTest, LargeAnswerAsksAndPrintsWhenTheUserAgrees) {
  ASSERT_EQ(Run({"descendants", "2"}, true, 3), kExitOk) << err_.str();
  EXPECT_THAT(asked_, HasSubstr("more than 3 genomes"));
  EXPECT_THAT(out_.str(), HasSubstr("10 descendants\n"));
}

TEST_F(LineageCliTest, LargeAnswerWithoutTerminalIsRefusedUnlessYes) {
  EXPECT_EQ(Run({"descendants", "2"}, std::nullopt, 3), kExitFailure);
  EXPECT_THAT(err_.str(), HasSubstr("without --yes"));
  EXPECT_THAT(out_.str(), Not(HasSubstr("#11")));  // nothing printed
  EXPECT_EQ(Run({"descendants", "2", "--yes"}, std::nullopt, 3), kExitOk);
  EXPECT_TRUE(asked_.empty());
  EXPECT_EQ(Run({"descendants", "2"}, false, 3), kExitFailure);
  EXPECT_THAT(err_.str(), HasSubstr("not printing"));
}

TEST_F(LineageCliTest, DescentShowsEachStepWithItsGain) {
  ASSERT_EQ(Run({"descent", "1/best"}), kExitOk) << err_.str();
  const std::string out = out_.str();
  EXPECT_THAT(out, HasSubstr("line of descent of #31 1/0/3/0: 3 steps back to "
                             "#2 1/0/0/1 (seeded)"));
  EXPECT_THAT(out, HasSubstr("1/0/2/2  #23  crossover"));
  EXPECT_THAT(out, HasSubstr("fitter parent"));
}

TEST_F(LineageCliTest, CommonAncestorAndCoalescenceAndAttribution) {
  ASSERT_EQ(Run({"common-ancestor", "21", "1/1/2/0"}), kExitOk) << err_.str();
  EXPECT_THAT(out_.str(), HasSubstr("in generation 0 (2 and 2 generations"));
  EXPECT_THAT(out_.str(), HasSubstr("#2  1/0/0/1"));

  ASSERT_EQ(Run({"coalescence", "1/*/2"}), kExitOk) << err_.str();
  EXPECT_THAT(out_.str(), HasSubstr("  2     0          7        2\n"));
  EXPECT_THAT(out_.str(), HasSubstr("  0     2          4        2\n"));

  ASSERT_EQ(Run({"attribution", "27"}), kExitOk) << err_.str();
  EXPECT_THAT(out_.str(), HasSubstr("total gain 0.5"));
  EXPECT_THAT(out_.str(), HasSubstr("0 -> 1   migrant  #15"));
}

TEST_F(LineageCliTest, DotDrawsTheAncestryWithTheLineInBold) {
  ASSERT_EQ(Run({"ancestors", "21", "--dot", "--depth", "2"}), kExitOk)
      << err_.str();
  const std::string dot = out_.str();
  EXPECT_THAT(dot, HasSubstr("digraph ancestry"));
  EXPECT_THAT(dot, HasSubstr("g12 -> g21 [label=\"crossover\", penwidth=3"));
  EXPECT_THAT(dot,
              HasSubstr("g11 -> g21 [label=\"crossover\", style=dashed];"));
  EXPECT_EQ(Run({"ancestors", "21", "--dot", "--json"}), kExitUsage);
}

TEST_F(LineageCliTest, BadGenomeIsAUsageErrorAndUnknownOneFails) {
  EXPECT_EQ(Run({"descent", "1/2"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("skerry: descent: '1/2' is not a genome"));
  EXPECT_EQ(Run({"descent", "1/0/9/9"}), kExitFailure);
  EXPECT_THAT(err_.str(), HasSubstr("no genome 1/0/9/9"));
  EXPECT_EQ(Run({"ancestors", "21", "--depth", "0"}), kExitUsage);
}

TEST(LineageCommandTableTest, EveryLineageCommandIsRegistered) {
  std::vector<std::string> names;
  for (const CommandSpec& spec : LineageCommandSpecs()) {
    names.push_back(spec.name);
    SCOPED_TRACE(spec.name);
    const CommandSpec* found = FindCommand(spec.name);
    ASSERT_NE(found, nullptr);
    EXPECT_EQ(found->handler, spec.handler);
  }
  EXPECT_THAT(names, ::testing::UnorderedElementsAre(
                         "ancestors", "descent", "descendants",
                         "common-ancestor", "coalescence", "attribution"));
  EXPECT_THAT(GeneralHelp(), HasSubstr("common-ancestor"));
}

}  // namespace
}  // namespace skerry::cli
