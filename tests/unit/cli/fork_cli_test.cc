// `skerry fork` and `skerry delete` against a mock RunService stub: what is
// sent, what is printed, and what is refused before anything is sent; and how
// show and list name a fork.
#include <fstream>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "cli/client.h"
#include "cli/commands.h"
#include "cli/format.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/unit/cli/mock_run_service.h"

namespace skerry::cli {
namespace {

using ::testing::_;
using ::testing::DoAll;
using ::testing::HasSubstr;
using ::testing::Invoke;
using ::testing::Return;
using ::testing::SetArgPointee;

class ForkCliTest : public ::skerry::cli::testing::MockCliTest {
 protected:
  static v1::SubmitRunResponse Made(uint64_t id) {
    v1::SubmitRunResponse r;
    r.mutable_run()->set_id(id);
    return r;
  }
};

TEST_F(ForkCliTest, ForkSendsRunGenerationAndTheChangesOfFileThenSet) {
  const std::string file = ::testing::TempDir() + "/fork-changes.txt";
  std::ofstream(file) << "name: \"hot\"";
  v1::ForkRunRequest asked;
  EXPECT_CALL(*mock_, ForkRun(_, _, _))
      .WillOnce(
          DoAll(Invoke([&](grpc::ClientContext*, const v1::ForkRunRequest& req,
                           v1::SubmitRunResponse*) { asked = req; }),
                SetArgPointee<2>(Made(7)), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"fork", "3", "--at", "12", "--set-file", file, "--set",
                 "ga { mutation { rate: 0.05 } }", "--priority", "4"}),
            kExitOk)
      << err_.str();
  EXPECT_EQ(asked.run_id(), 3u);
  EXPECT_EQ(asked.generation(), 12u);
  EXPECT_EQ(asked.changes(), "name: \"hot\"\nga { mutation { rate: 0.05 } }");
  EXPECT_EQ(asked.priority(), 4u);
  EXPECT_TRUE(absl::StartsWith(asked.request_id(), "fork-"))
      << asked.request_id();
  EXPECT_EQ(out_.str(), "7\n");
}

TEST_F(ForkCliTest, ForkRetriesAnUnansweredCallWithTheSameRequestId) {
  std::vector<std::string> ids;
  EXPECT_CALL(*mock_, ForkRun(_, _, _))
      .WillOnce(
          DoAll(Invoke([&](grpc::ClientContext*, const v1::ForkRunRequest& req,
                           v1::SubmitRunResponse*) {
                  ids.push_back(req.request_id());
                }),
                Return(grpc::Status(grpc::StatusCode::UNAVAILABLE,
                                    "connection refused"))))
      .WillOnce(
          DoAll(Invoke([&](grpc::ClientContext*, const v1::ForkRunRequest& req,
                           v1::SubmitRunResponse*) {
                  ids.push_back(req.request_id());
                }),
                SetArgPointee<2>(Made(8)), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"fork", "3", "--at", "0"}), kExitOk) << err_.str();
  ASSERT_EQ(ids.size(), 2u);
  EXPECT_EQ(ids[0], ids[1]);
  EXPECT_EQ(sleeps_.size(), 1u);
  EXPECT_EQ(out_.str(), "8\n");
}

TEST_F(ForkCliTest, BadChangesAndAMissingGenerationAreRefusedBeforeSending) {
  EXPECT_CALL(*mock_, ForkRun(_, _, _)).Times(0);
  EXPECT_EQ(Cli({"fork", "3", "--at", "5", "--set", "ga {"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("--set:1:"));
  EXPECT_EQ(Cli({"fork", "3"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("--at"));
}

// Each Cli call below takes the fixture's one client: one call per test.
TEST_F(ForkCliTest, ANegativeGenerationIsRefusedBeforeSending) {
  EXPECT_CALL(*mock_, ForkRun(_, _, _)).Times(0);
  EXPECT_EQ(Cli({"fork", "3", "--at", "-1"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("--at"));
}

TEST_F(ForkCliTest, AnUnreadableChangesFileIsRefusedBeforeSending) {
  EXPECT_CALL(*mock_, ForkRun(_, _, _)).Times(0);
  EXPECT_EQ(Cli({"fork", "3", "--at", "2", "--set-file", "/nonexistent/x"}),
            kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("--set-file: cannot read /nonexistent/x"));
}

TEST_F(ForkCliTest, TheServersRefusalNamesTheField) {
  EXPECT_CALL(*mock_, ForkRun(_, _, _))
      .WillOnce(Return(grpc::Status(
          grpc::StatusCode::INVALID_ARGUMENT,
          "genome_length: a fork may not change it (the parent's is 6, the "
          "fork's would be 7)")));
  EXPECT_EQ(Cli({"fork", "3", "--at", "5", "--set", "genome_length: 7"}),
            kExitFailure);
  EXPECT_THAT(err_.str(), HasSubstr("ForkRun: genome_length: a fork may not"));
}

TEST_F(ForkCliTest, DeleteNeedsYesThenPrintsWhatWent) {
  EXPECT_EQ(Cli({"delete", "3"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("--yes"));
  v1::RunRef asked;
  v1::DeleteRunResponse gone;
  gone.set_run_id(3);
  gone.set_genomes(4320);
  gone.set_bytes_freed(1048576);
  EXPECT_CALL(*mock_, DeleteRun(_, _, _))
      .WillOnce(DoAll(Invoke([&](grpc::ClientContext*, const v1::RunRef& req,
                                 v1::DeleteRunResponse*) { asked = req; }),
                      SetArgPointee<2>(gone), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"delete", "3", "--yes"}), kExitOk) << err_.str();
  EXPECT_EQ(asked.run_id(), 3u);
  EXPECT_EQ(out_.str(),
            "run 3 deleted (4,320 genomes; 1,048,576 bytes given back to the "
            "file system)\n");
}

TEST_F(ForkCliTest, ShowAndListNameTheParentOfAFork) {
  v1::GetRunResponse response;
  v1::RunSummary* run = response.mutable_run();
  run->set_id(4);
  run->set_name("hot");
  run->set_state(v1::RUNNING);
  run->set_parent_run(1);
  run->set_parent_generation(30);
  EXPECT_THAT(FormatRunDetails(response),
              HasSubstr("forked from run 1 at generation 30\n"));
  EXPECT_THAT(FormatRunList({*run}, absl::UTCTimeZone()),
              HasSubstr("hot (fork of 1 at 30)"));
  run->set_parent_run(0);
  EXPECT_THAT(FormatRunDetails(response),
              ::testing::Not(HasSubstr("forked from")));
}

}  // namespace
}  // namespace skerry::cli
