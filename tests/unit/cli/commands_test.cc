#include "cli/commands.h"

#include <chrono>
#include <fstream>
#include <memory>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "cli/client.h"
#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "gtest/gtest.h"
#include "server/engine/breeder.h"
#include "tests/unit/cli/mock_run_service.h"

namespace skerry::cli {
namespace {

using ::skerry::cli::testing::ScriptedFollower;
using ::testing::_;
using ::testing::DoAll;
using ::testing::HasSubstr;
using ::testing::Invoke;
using ::testing::Return;
using ::testing::SetArgPointee;

template <typename T>
T FromText(const std::string& text) {
  T message;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(text, &message))
      << text;
  return message;
}

std::string WriteTemp(const std::string& name, const std::string& contents) {
  std::string path = ::testing::TempDir() + "/" + name;
  std::ofstream(path) << contents;
  return path;
}

v1::RunSummary Summary(v1::RunState state, uint64_t evaluations) {
  v1::RunSummary summary;
  summary.set_id(3);
  summary.set_state(state);
  summary.set_evaluations(evaluations);
  summary.add_islands()->set_generation(
      static_cast<uint32_t>(evaluations / 10));
  return summary;
}

v1::GetRunResponse RunningRun() {
  return FromText<v1::GetRunResponse>(R"pb(
    run { id: 3 name: "demo" state: RUNNING objective: MINIMIZE }
    spec {
      name: "demo"
      stop { max_generations: 60 }
    }
    workers: 2
  )pb");
}

class CommandsTest : public ::skerry::cli::testing::MockCliTest {
 protected:
  uint64_t run_id_ = 0;
};

TEST_F(CommandsTest, SubmitSendsSpecAndTextAndPrintsTheRunId) {
  const std::string text =
      "name: \"t\" genome_length: 2\n"
      "evaluator { builtin { function: \"sphere\" } }\n";
  std::string path = WriteTemp("ok.spec", text);
  v1::SubmitRunRequest sent;
  v1::SubmitRunResponse response;
  response.mutable_run()->set_id(41);
  EXPECT_CALL(*mock_, SubmitRun(_, _, _))
      .WillOnce(DoAll(
          Invoke([&](grpc::ClientContext*, const v1::SubmitRunRequest& request,
                     v1::SubmitRunResponse*) { sent = request; }),
          SetArgPointee<2>(response), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"submit", path}), kExitOk) << err_.str();
  EXPECT_EQ(out_.str(), "41\n");
  EXPECT_EQ(sent.spec_text(), text);
  EXPECT_EQ(sent.spec().name(), "t");
  EXPECT_EQ(sent.spec().genome_length(), 2u);
  EXPECT_EQ(targets_, std::vector<std::string>({"127.0.0.1:7431"}));
}

TEST_F(CommandsTest, SubmitSendsThePriorityGiven) {
  std::string path =
      WriteTemp("prio.spec",
                "name: \"t\" genome_length: 2\n"
                "evaluator { builtin { function: \"sphere\" } }\n");
  v1::SubmitRunRequest sent;
  v1::SubmitRunResponse response;
  response.mutable_run()->set_id(42);
  EXPECT_CALL(*mock_, SubmitRun(_, _, _))
      .WillOnce(DoAll(
          Invoke([&](grpc::ClientContext*, const v1::SubmitRunRequest& request,
                     v1::SubmitRunResponse*) { sent = request; }),
          SetArgPointee<2>(response), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"submit", path, "--priority", "3"}), kExitOk) << err_.str();
  EXPECT_EQ(sent.priority(), 3u);
}

TEST_F(CommandsTest, SubmitRetriesWithTheSameRequestIdWhenNothingAnswered) {
  std::string path =
      WriteTemp("retry.spec",
                "name: \"t\" genome_length: 2\n"
                "evaluator { builtin { function: \"sphere\" } }\n");
  std::vector<std::string> ids;
  v1::SubmitRunResponse response;
  response.mutable_run()->set_id(43);
  auto record = [&](grpc::ClientContext*, const v1::SubmitRunRequest& request,
                    v1::SubmitRunResponse*) {
    ids.push_back(request.request_id());
  };
  EXPECT_CALL(*mock_, SubmitRun(_, _, _))
      .WillOnce(DoAll(Invoke(record),
                      Return(grpc::Status(grpc::StatusCode::UNAVAILABLE,
                                          "failed to connect"))))
      .WillOnce(DoAll(Invoke(record), SetArgPointee<2>(response),
                      Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"submit", path}), kExitOk) << err_.str();
  EXPECT_EQ(out_.str(), "43\n");
  ASSERT_EQ(ids.size(), 2u);
  EXPECT_GE(ids[0].size(), 16u);
  EXPECT_EQ(ids[0], ids[1]);  // the retry is the same submission
  EXPECT_EQ(sleeps_.size(), 1u);
}

TEST_F(CommandsTest, EachInvocationMakesItsOwnRequestId) {
  std::string path =
      WriteTemp("ids.spec",
                "name: \"t\" genome_length: 2\n"
                "evaluator { builtin { function: \"sphere\" } }\n");
  std::vector<std::string> ids;
  v1::SubmitRunResponse response;
  response.mutable_run()->set_id(44);
  EXPECT_CALL(*mock_, SubmitRun(_, _, _))
      .Times(2)
      .WillRepeatedly(DoAll(
          Invoke([&](grpc::ClientContext*, const v1::SubmitRunRequest& request,
                     v1::SubmitRunResponse*) {
            ids.push_back(request.request_id());
          }),
          SetArgPointee<2>(response), Return(grpc::Status::OK)));
  EXPECT_EQ(SubmitCommand(*client_, path, io_, &run_id_), kExitOk);
  EXPECT_EQ(SubmitCommand(*client_, path, io_, &run_id_), kExitOk);
  ASSERT_EQ(ids.size(), 2u);
  EXPECT_NE(ids[0], ids[1]);
}

TEST_F(CommandsTest, UnavailableTheCoordinatorAnsweredIsNotUnreachable) {
  EXPECT_CALL(*mock_, ListRuns(_, _, _))
      .WillOnce(Return(grpc::Status(grpc::StatusCode::UNAVAILABLE,
                                    "results could not be stored",
                                    kAnsweredUnavailable)));
  EXPECT_EQ(Cli({"list"}), kExitFailure);
  EXPECT_THAT(err_.str(), HasSubstr("answered: unavailable"));
  EXPECT_THAT(err_.str(), ::testing::Not(HasSubstr("cannot reach")));
}

TEST_F(CommandsTest, UnavailableWithNoAnswerIsUnreachable) {
  EXPECT_CALL(*mock_, ListRuns(_, _, _))
      .WillOnce(Return(
          grpc::Status(grpc::StatusCode::UNAVAILABLE, "failed to connect")));
  EXPECT_EQ(Cli({"list"}), kExitUnreachable);
  EXPECT_THAT(err_.str(), HasSubstr("cannot reach"));
}

TEST_F(CommandsTest, SubmitRefusesAPriorityOutOfRangeWithoutCalling) {
  std::string path =
      WriteTemp("prio.spec",
                "name: \"t\" genome_length: 2\n"
                "evaluator { builtin { function: \"sphere\" } }\n");
  // No SubmitRun call is expected (StrictMock).
  EXPECT_EQ(Cli({"submit", path, "--priority", "1001"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("--priority"));
}

TEST_F(CommandsTest, EveryUnaryCallCarriesADeadline) {
  absl::Time before = absl::Now();
  EXPECT_CALL(*mock_, ListRuns(_, _, _))
      .WillOnce(Invoke([&](grpc::ClientContext* context,
                           const v1::ListRunsRequest&, v1::ListRunsResponse*) {
        absl::Time deadline = absl::FromChrono(context->deadline());
        EXPECT_GT(deadline, before);
        EXPECT_LE(deadline, absl::Now() + absl::Seconds(30));
        return grpc::Status::OK;
      }));
  EXPECT_EQ(Cli({"list"}), kExitOk);
  EXPECT_EQ(out_.str(), "no runs\n");
}

TEST_F(CommandsTest, TimeoutOptionSetsEveryCallsDeadline) {
  absl::Time before = absl::Now();
  EXPECT_CALL(*mock_, ListRuns(_, _, _))
      .WillOnce(Invoke([&](grpc::ClientContext* context,
                           const v1::ListRunsRequest&, v1::ListRunsResponse*) {
        absl::Time deadline = absl::FromChrono(context->deadline());
        EXPECT_GT(deadline, before + absl::Seconds(100));
        EXPECT_LE(deadline, absl::Now() + absl::Seconds(120));
        return grpc::Status::OK;
      }));
  EXPECT_EQ(Cli({"--timeout", "120", "list"}), kExitOk);
  EXPECT_EQ(CallTimeout(), absl::Seconds(120));
}

TEST_F(CommandsTest, TimeoutOutOfRangeIsAUsageErrorNamingTheOption) {
  EXPECT_EQ(Cli({"--timeout", "0", "list"}), kExitUsage);
  EXPECT_THAT(err_.str(),
              HasSubstr("--timeout must be an integer in [1, 3600]"));
}

TEST_F(CommandsTest,
       SubmitReportsSyntaxErrorWithFileLineColumnAndSendsNothing) {
  std::string path = WriteTemp("bad.spec", "name: \"t\"\ngenome_length: ten\n");
  EXPECT_EQ(Cli({"submit", path}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr(path + ":2:"));
  EXPECT_EQ(out_.str(), "");
}

TEST_F(CommandsTest, SubmitReportsABadFieldWithItsAllowedRange) {
  std::string path =
      WriteTemp("range.spec",
                "genome_length: 0\n"
                "evaluator { builtin { function: \"sphere\" } }\n");
  EXPECT_EQ(Cli({"submit", path}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("genome_length"));
  EXPECT_THAT(err_.str(), HasSubstr("allowed"));
}

TEST_F(CommandsTest, SubmitOfAMissingFileSaysWhichFile) {
  EXPECT_EQ(Cli({"submit", "/nonexistent/x.spec"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("cannot read /nonexistent/x.spec"));
}

TEST_F(CommandsTest, ServerRefusalIsExitOneWithTheGrpcMessage) {
  std::string path = WriteTemp(
      "ok2.spec",
      "genome_length: 2 evaluator { builtin { function: \"sphere\" } }");
  EXPECT_CALL(*mock_, SubmitRun(_, _, _))
      .WillOnce(Return(grpc::Status(grpc::StatusCode::PERMISSION_DENIED,
                                    "owner quota reached")));
  EXPECT_EQ(Cli({"submit", path}), kExitFailure);
  EXPECT_EQ(err_.str(), "skerry: SubmitRun: owner quota reached\n");
}

TEST_F(CommandsTest, UnreachableCoordinatorIsExitThree) {
  EXPECT_CALL(*mock_, ListRuns(_, _, _))
      .WillOnce(Return(grpc::Status(grpc::StatusCode::UNAVAILABLE,
                                    "failed to connect to all addresses")));
  EXPECT_EQ(Cli({"list"}), kExitUnreachable);
  EXPECT_THAT(err_.str(),
              HasSubstr("cannot reach the coordinator at 127.0.0.1:7431"));
  EXPECT_THAT(err_.str(), HasSubstr("failed to connect to all addresses"));
}

TEST_F(CommandsTest, DeadlineExceededIsExitThreeToo) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(Return(grpc::Status(grpc::StatusCode::DEADLINE_EXCEEDED,
                                    "Deadline Exceeded")));
  EXPECT_CALL(*mock_, GetHistory(_, _, _)).Times(0);
  EXPECT_EQ(Cli({"show", "3"}), kExitUnreachable);
  EXPECT_THAT(err_.str(), HasSubstr("did not answer in time"));
}

TEST_F(CommandsTest, UsageErrorIsExitTwoAndMakesNoCall) {
  EXPECT_EQ(Cli({"show", "three"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("RUN must be a run id"));
  EXPECT_THAT(err_.str(), HasSubstr("`skerry show --help`"));
}

TEST_F(CommandsTest, HelpPrintsOnStdoutAndExitsZero) {
  EXPECT_EQ(Cli({"help"}), kExitOk);
  EXPECT_THAT(out_.str(), HasSubstr("usage: skerry"));
  out_.str("");
  EXPECT_EQ(Cli({"help", "watch"}), kExitOk);
  EXPECT_THAT(out_.str(), HasSubstr("usage: skerry watch RUN"));
  out_.str("");
  EXPECT_EQ(Cli({"pause", "--help"}), kExitOk);
  EXPECT_THAT(out_.str(), HasSubstr("usage: skerry pause RUN"));
  EXPECT_EQ(Cli({"help", "nothing"}), kExitUsage);
  EXPECT_TRUE(targets_.empty());
}

TEST_F(CommandsTest, ShowPrintsSummaryThenGenerationTable) {
  v1::GetHistoryRequest asked;
  v1::GetHistoryResponse history = FromText<v1::GetHistoryResponse>(R"pb(
    generations { island: 0 generation: 0 best: 5 mean: 9 evaluations: 40 }
    generations { island: 1 generation: 0 best: 4 mean: 11 evaluations: 40 }
  )pb");
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, GetHistory(_, _, _))
      .WillOnce(DoAll(
          Invoke([&](grpc::ClientContext*, const v1::GetHistoryRequest& request,
                     v1::GetHistoryResponse*) { asked = request; }),
          SetArgPointee<2>(history), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"show", "3"}), kExitOk) << err_.str();
  EXPECT_TRUE(asked.all_islands());
  EXPECT_EQ(asked.run_id(), 3u);
  EXPECT_THAT(out_.str(), HasSubstr("state       running\n"));
  EXPECT_THAT(out_.str(), HasSubstr("workers     2\n"));
  EXPECT_THAT(out_.str(), HasSubstr("GEN  BEST  MEAN  EVALS  ISLANDS\n"
                                    "  0     4    10     80        2\n"));
}

TEST_F(CommandsTest, HistoryAsksForOneIsland) {
  v1::GetHistoryRequest asked;
  EXPECT_CALL(*mock_, GetHistory(_, _, _))
      .WillOnce(DoAll(
          Invoke([&](grpc::ClientContext*, const v1::GetHistoryRequest& request,
                     v1::GetHistoryResponse*) { asked = request; }),
          Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"history", "3", "--island", "2"}), kExitOk);
  EXPECT_EQ(asked.island(), 2u);
  EXPECT_FALSE(asked.all_islands());
  EXPECT_EQ(out_.str(), "no complete generation yet\n");
}

TEST_F(CommandsTest, HistoryRejectsAnIslandOutOfRange) {
  EXPECT_EQ(Cli({"history", "3", "--island", "256"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("--island must be an integer in [0, 255]"));
}

TEST_F(CommandsTest, PausePrintsTheNewState) {
  v1::RunRef asked;
  EXPECT_CALL(*mock_, PauseRun(_, _, _))
      .WillOnce(DoAll(Invoke([&](grpc::ClientContext*, const v1::RunRef& ref,
                                 v1::RunSummary*) { asked = ref; }),
                      SetArgPointee<2>(Summary(v1::PAUSED, 0)),
                      Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"pause", "3"}), kExitOk);
  EXPECT_EQ(asked.run_id(), 3u);
  EXPECT_EQ(out_.str(), "run 3 paused\n");
}

TEST_F(CommandsTest, PrioritySendsTheNewWeightAndPrintsIt) {
  v1::SetPriorityRequest asked;
  v1::RunSummary changed = Summary(v1::RUNNING, 0);
  changed.set_priority(7);
  EXPECT_CALL(*mock_, SetPriority(_, _, _))
      .WillOnce(DoAll(
          Invoke([&](grpc::ClientContext*, const v1::SetPriorityRequest& req,
                     v1::RunSummary*) { asked = req; }),
          SetArgPointee<2>(changed), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"priority", "3", "7"}), kExitOk);
  EXPECT_EQ(asked.run_id(), 3u);
  EXPECT_EQ(asked.priority(), 7u);
  EXPECT_EQ(out_.str(), "run 3 priority 7\n");
}

TEST_F(CommandsTest, PriorityOutOfRangeIsRefusedBeforeAnythingIsSent) {
  EXPECT_CALL(*mock_, SetPriority(_, _, _)).Times(0);
  EXPECT_EQ(Cli({"priority", "3", "1001"}), kExitUsage);
  EXPECT_THAT(err_.str(), HasSubstr("[1, 1000]"));
  EXPECT_EQ(Cli({"priority", "3"}), kExitUsage);
}

TEST_F(CommandsTest, DigestPrintsHashAndGenomeCount) {
  v1::DigestResponse digest;
  digest.set_sha256("ab12");
  digest.set_genomes(7200);
  EXPECT_CALL(*mock_, GetDigest(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(digest), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"digest", "3"}), kExitOk);
  EXPECT_EQ(out_.str(), "ab12  7,200 genomes\n");
}

TEST_F(CommandsTest, StopOfAFinishedRunShowsTheServersReason) {
  EXPECT_CALL(*mock_, StopRun(_, _, _))
      .WillOnce(Return(grpc::Status(grpc::StatusCode::FAILED_PRECONDITION,
                                    "run 3 is already finished")));
  EXPECT_EQ(Cli({"stop", "3"}), kExitFailure);
  EXPECT_EQ(err_.str(), "skerry: StopRun: run 3 is already finished\n");
}

TEST_F(CommandsTest, WatchPrintsOneLinePerUpdateWhenNotATerminal) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  std::vector<v1::FollowRunRequest> asks;
  EXPECT_CALL(*mock_, FollowRunRaw(_))
      .WillOnce(Invoke([&asks](grpc::ClientContext* context) {
        // A run may last days: the stream has no deadline.
        EXPECT_EQ(context->deadline(),
                  std::chrono::system_clock::time_point::max());
        return new ScriptedFollower(
            {Summary(v1::RUNNING, 10), Summary(v1::RUNNING, 20),
             Summary(v1::FINISHED, 30)},
            grpc::Status::OK, &asks);
      }));
  EXPECT_EQ(Cli({"watch", "3"}), kExitOk) << err_.str();
  // The first request names the run; one more is asked for after each
  // summary is printed, never ahead of it.
  ASSERT_EQ(asks.size(), 4u);
  EXPECT_EQ(asks[0].run_id(), 3u);
  EXPECT_EQ(out_.str(),
            "run 3 running  gen 1/60  evals 10  best -\n"
            "run 3 running  gen 2/60  evals 20  best -\n"
            "run 3 finished  gen 3/60  evals 30  best -\n"
            "run 3 finished after 30 evaluations; no score yet\n");
}

TEST_F(CommandsTest, WatchRedrawsOneLineInPlaceOnATerminal) {
  io_.interactive = true;
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, FollowRunRaw(_))
      .WillOnce(Return(new ScriptedFollower(
          {Summary(v1::RUNNING, 10), Summary(v1::FINISHED, 20)},
          grpc::Status::OK)));
  EXPECT_EQ(Cli({"watch", "3"}), kExitOk);
  EXPECT_EQ(out_.str(),
            "\rrun 3 running  gen 1/60  evals 10  best -\x1b[K"
            "\rrun 3 finished  gen 2/60  evals 20  best -\x1b[K\n"
            "run 3 finished after 20 evaluations; no score yet\n");
}

TEST_F(CommandsTest, WatchReconnectsWhenTheCoordinatorComesBack) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  grpc::Status gone(grpc::StatusCode::UNAVAILABLE, "Socket closed");
  EXPECT_CALL(*mock_, FollowRunRaw(_))
      .WillOnce(Return(new ScriptedFollower({Summary(v1::RUNNING, 10)}, gone)))
      .WillOnce(Return(new ScriptedFollower({}, gone)))
      .WillOnce(Return(new ScriptedFollower({}, gone)))
      .WillOnce(Return(
          new ScriptedFollower({Summary(v1::FINISHED, 30)}, grpc::Status::OK)));
  EXPECT_EQ(Cli({"watch", "3"}), kExitOk);
  EXPECT_EQ(sleeps_,
            std::vector<absl::Duration>(
                {absl::Seconds(1), absl::Seconds(2), absl::Seconds(4)}));
  EXPECT_THAT(err_.str(),
              HasSubstr("(FollowRun: Socket closed); retrying in 1s"));
  EXPECT_THAT(out_.str(),
              HasSubstr("run 3 finished after 30 evaluations; no score yet\n"));
}

TEST_F(CommandsTest, WatchGivesUpAfterBoundedReconnections) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  grpc::Status gone(grpc::StatusCode::UNAVAILABLE, "connection refused");
  EXPECT_CALL(*mock_, FollowRunRaw(_))
      .Times(kWatchRetries + 1)
      .WillRepeatedly(Invoke([gone](grpc::ClientContext*) {
        return new ScriptedFollower({}, gone);
      }));
  EXPECT_EQ(Cli({"watch", "3"}), kExitUnreachable);
  EXPECT_EQ(sleeps_.size(), static_cast<size_t>(kWatchRetries));
  EXPECT_EQ(sleeps_.back(), kWatchMaxBackoff);
  EXPECT_THAT(err_.str(), HasSubstr("gave up watching run 3"));
}

TEST_F(CommandsTest, WatchOfAnUnknownRunIsExitOne) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(Return(grpc::Status(grpc::StatusCode::NOT_FOUND, "no run 77")));
  EXPECT_EQ(Cli({"watch", "77"}), kExitFailure);
  EXPECT_EQ(err_.str(), "skerry: GetRun: no run 77\n");
}

TEST_F(CommandsTest, WatchOfAFailedRunIsExitOneAndSaysWhy) {
  v1::GetRunResponse failed = RunningRun();
  failed.mutable_run()->set_state(v1::FAILED_RUN);
  failed.mutable_run()->set_message("every evaluation failed");
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(failed), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"watch", "3"}), kExitFailure);
  EXPECT_THAT(out_.str(), HasSubstr("run 3 failed"));
  EXPECT_THAT(out_.str(), HasSubstr("every evaluation failed"));
}

v1::GetChampionResponse Champion() {
  return FromText<v1::GetChampionResponse>(R"pb(
    genome {
      id: 812
      key { run_id: 3 island: 1 generation: 9 slot: 4 }
      origin: ELITE
      parent_a: 700
      genes: [ 1, 2 ]
      score: 0.25
    }
  )pb");
}

TEST_F(CommandsTest, ChampionPrintsTheGenomeWithTheSpecName) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, GetChampion(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(Champion()), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"champion", "3"}), kExitOk);
  EXPECT_THAT(out_.str(), HasSubstr("champion of run 3 \"demo\"\n"));
  EXPECT_THAT(
      out_.str(),
      HasSubstr("key         run 3 / island 1 / generation 9 / slot 4\n"));
}

TEST_F(CommandsTest, ChampionShowsTheSeedItsEvaluatorWasGiven) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, GetChampion(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(Champion()), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"champion", "3"}), kExitOk);
  // The seed the coordinator puts in the genome's task (engine.cc).
  const v1::GenomeKey k = Champion().genome().key();
  EXPECT_THAT(out_.str(), HasSubstr(absl::StrCat(
                              "eval seed   ",
                              engine::EvalSeed(RunningRun().spec(), k.island(),
                                               k.generation(), k.slot()),
                              "\n")));
}

TEST_F(CommandsTest, NetworkWritesTheChampionsNetworkWithItsSeed) {
  v1::GetRunResponse run = RunningRun();
  v1::NetworkSpec* net =
      run.mutable_spec()->mutable_evaluator()->mutable_network();
  net->set_inputs(2);
  v1::LayerSpec* out = net->add_layers();  // one neuron: 2 weights, a bias
  out->set_size(1);
  out->set_activation(v1::ACTIVATION_TANH);
  v1::GetChampionResponse champion = Champion();
  champion.mutable_genome()->clear_genes();
  for (double g : {0.5, -1.0, 0.25}) champion.mutable_genome()->add_genes(g);
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(run), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, GetChampion(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(champion), Return(grpc::Status::OK)));
  const std::string path = ::testing::TempDir() + "/network.json";
  EXPECT_EQ(Cli({"network", "3", "-o", path}), kExitOk) << err_.str();
  std::stringstream written;
  written << std::ifstream(path).rdbuf();
  EXPECT_THAT(written.str(), HasSubstr("skerry-network"));
  EXPECT_THAT(written.str(), HasSubstr("evaluation_seed"));
  EXPECT_THAT(written.str(), HasSubstr("-1"));
}

TEST_F(CommandsTest, NetworkOfARunWithoutNetworksSaysWhy) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"network", "3", "-o", ::testing::TempDir() + "/n.json"}),
            kExitFailure);
  EXPECT_THAT(err_.str(), HasSubstr("not networks"));
}

TEST_F(CommandsTest, ChampionJsonGoesToTheOutFile) {
  std::string path = ::testing::TempDir() + "/champion.json";
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, GetChampion(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(Champion()), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"champion", "3", "--json", "--out", path}), kExitOk);
  EXPECT_EQ(out_.str(), "champion of run 3 written to " + path + "\n");
  std::stringstream written;
  written << std::ifstream(path).rdbuf();
  EXPECT_THAT(written.str(),
              HasSubstr("{\"runId\":\"3\",\"specName\":\"demo\","));
  EXPECT_THAT(written.str(), HasSubstr("\"origin\":\"ELITE\""));
}

TEST_F(CommandsTest, ChampionToAnUnwritableFileIsExitOneNamingTheFile) {
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, GetChampion(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(Champion()), Return(grpc::Status::OK)));
  EXPECT_EQ(Cli({"champion", "3", "--out", "/nonexistent/dir/c.txt"}),
            kExitFailure);
  EXPECT_THAT(err_.str(), HasSubstr("cannot write /nonexistent/dir/c.txt"));
}

TEST_F(CommandsTest, SubmitWithWatchFollowsTheNewRun) {
  std::string path = WriteTemp(
      "watch.spec",
      "genome_length: 2 evaluator { builtin { function: \"sphere\" } }");
  v1::SubmitRunResponse response;
  response.mutable_run()->set_id(3);
  EXPECT_CALL(*mock_, SubmitRun(_, _, _))
      .WillOnce(DoAll(SetArgPointee<2>(response), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, GetRun(_, _, _))
      .WillOnce(
          DoAll(SetArgPointee<2>(RunningRun()), Return(grpc::Status::OK)));
  EXPECT_CALL(*mock_, FollowRunRaw(_))
      .WillOnce(Return(
          new ScriptedFollower({Summary(v1::FINISHED, 10)}, grpc::Status::OK)));
  EXPECT_EQ(Cli({"submit", path, "--watch"}), kExitOk);
  EXPECT_THAT(out_.str(), HasSubstr("3\nrun 3 finished  gen 1/60"));
}

}  // namespace
}  // namespace skerry::cli
