#include "cli/format.h"

#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/text_format.h"
#include "google/protobuf/util/json_util.h"
#include "gtest/gtest.h"

namespace skerry::cli {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

template <typename T>
T FromText(const std::string& text) {
  T message;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(text, &message))
      << text;
  return message;
}

TEST(FormatScoreTest, SixSignificantDigits) {
  struct Case {
    double score;
    const char* text;
  };
  for (const Case& c :
       {Case{3.979836, "3.97984"}, Case{0, "0"}, Case{157.2864, "157.286"},
        Case{1.5e-7, "1.5e-07"}, Case{-39.16616570, "-39.1662"},
        Case{1234567.0, "1.23457e+06"}}) {
    SCOPED_TRACE(c.text);
    EXPECT_EQ(FormatScore(c.score), c.text);
  }
}

TEST(FormatScoreTest, NonFiniteScoresAreSpelledOut) {
  EXPECT_EQ(FormatScore(std::numeric_limits<double>::quiet_NaN()), "nan");
  EXPECT_EQ(FormatScore(std::numeric_limits<double>::infinity()), "inf");
  EXPECT_EQ(FormatScore(-std::numeric_limits<double>::infinity()), "-inf");
}

TEST(FormatCountTest, GroupsThousandsWithCommas) {
  EXPECT_EQ(FormatCount(0), "0");
  EXPECT_EQ(FormatCount(999), "999");
  EXPECT_EQ(FormatCount(1000), "1,000");
  EXPECT_EQ(FormatCount(7200), "7,200");
  EXPECT_EQ(FormatCount(1234567), "1,234,567");
  EXPECT_EQ(FormatCount(18446744073709551615ull), "18,446,744,073,709,551,615");
}

TEST(FormatTimestampTest, FormatsInTheGivenZoneAndDashForUnset) {
  // 2024-05-01 12:00:00 UTC is 1714564800 s after the epoch (date -d).
  EXPECT_EQ(FormatTimestamp(1714564800000, absl::UTCTimeZone()),
            "2024-05-01 12:00:00");
  EXPECT_EQ(FormatTimestamp(0, absl::UTCTimeZone()), "-");
}

TEST(FormatTableTest, PadsColumnsAndRightAlignsNumbers) {
  std::string table =
      FormatTable({"ID", "NAME", "BEST"},
                  {{"1", "alpha", "0.5"}, {"12", "b", "10.25"}}, {0, 2});
  EXPECT_EQ(table,
            "ID  NAME    BEST\n"
            " 1  alpha    0.5\n"
            "12  b      10.25\n");
}

TEST(FormatTableTest, NoTrailingBlanksWhenTheLastColumnIsEmpty) {
  std::string table = FormatTable({"A", "B"}, {{"x", ""}, {"y", "done"}}, {});
  EXPECT_EQ(table, "A  B\nx\ny  done\n");
}

TEST(FormatRunListTest, OneRowPerRun) {
  std::vector<v1::RunSummary> runs = {
      FromText<v1::RunSummary>(R"pb(
        id: 3
        name: "heating-loop-gains"
        owner: "ana"
        state: RUNNING
        evaluations: 4800
        has_best: true
        best_score: 3.979836
        created_unix_ms: 1714564800000
        islands { island: 0 generation: 39 }
        islands { island: 1 generation: 40 }
      )pb"),
      FromText<v1::RunSummary>(R"pb(id: 4 name: "q" state: QUEUED)pb")};
  EXPECT_EQ(FormatRunList(runs, absl::UTCTimeZone()),
            "ID  NAME                OWNER  STATE      GEN  EVALS     BEST  "
            "CREATED\n"
            " 3  heating-loop-gains  ana    running  39-40  4,800  3.97984  "
            "2024-05-01 12:00:00\n"
            " 4  q                          queued       -      0        -  "
            "-\n");
}

TEST(FormatRunListTest, SaysSoWhenThereAreNoRuns) {
  EXPECT_EQ(FormatRunList({}, absl::UTCTimeZone()), "no runs\n");
}

TEST(FormatRunDetailsTest, ShowsStateEvaluationsWorkersIslandsAndChampion) {
  auto run = FromText<v1::GetRunResponse>(R"pb(
    run {
      id: 3
      name: "heating-loop-gains"
      owner: "ana"
      state: RUNNING
      seed: 9
      evaluations: 14400
      has_best: true
      best_score: 0.994959
      champion_id: 812
      objective: MINIMIZE
      islands {
        island: 0
        generation: 12
        evaluated: 30
        population: 40
        best: 0.994959
        mean: 21.5
        diversity: 0.75
        has_stats: true
      }
      islands { island: 1 generation: 12 evaluated: 40 population: 40 }
    }
    workers: 2
  )pb");
  EXPECT_EQ(FormatRunDetails(run),
            "run         3 \"heating-loop-gains\"\n"
            "owner       ana\n"
            "state       running\n"
            "objective   minimize\n"
            "seed        9\n"
            "evaluations 14,400\n"
            "workers     2\n"
            "champion    score 0.994959 (genome 812)\n"
            "\n"
            "ISLAND  GEN  EVALUATED      BEST  MEAN  DIVERSITY\n"
            "     0   12      30/40  0.994959  21.5       0.75\n"
            "     1   12      40/40         -     -          -\n");
}

TEST(FormatRunDetailsTest, ShowsTheMessageOfAFailedRunAndDoneIslands) {
  auto run = FromText<v1::GetRunResponse>(R"pb(
    run {
      id: 5
      name: "x"
      state: FAILED_RUN
      message: "scaling: negative score"
      islands { island: 0 generation: 3 population: 10 done: true }
    }
  )pb");
  std::string text = FormatRunDetails(run);
  EXPECT_THAT(text, HasSubstr("state       failed\n"));
  EXPECT_THAT(text, HasSubstr("champion    none yet\n"));
  EXPECT_THAT(text, HasSubstr("message     scaling: negative score\n"));
  EXPECT_THAT(text, HasSubstr("  done\n"));
}

std::vector<v1::GenerationStats> ThreeGenerationsTwoIslands() {
  std::vector<v1::GenerationStats> history;
  for (uint32_t island = 0; island < 2; ++island) {
    for (uint32_t generation = 0; generation < 3; ++generation) {
      v1::GenerationStats stats;
      stats.set_island(island);
      stats.set_generation(generation);
      stats.set_best(10.0 - generation - island);  // island 1 is one better
      stats.set_mean(20.0 - generation + 2 * island);
      stats.set_evaluations(40);
      history.push_back(stats);
    }
  }
  return history;
}

TEST(FormatGenerationTableTest, CombinesIslandsPerGeneration) {
  EXPECT_EQ(
      FormatGenerationTable(ThreeGenerationsTwoIslands(), v1::MINIMIZE, 0),
      "GEN  BEST  MEAN  EVALS  ISLANDS\n"
      "  0     9    21     80        2\n"
      "  1     8    20     80        2\n"
      "  2     7    19     80        2\n");
}

TEST(FormatGenerationTableTest, MaximizeTakesTheLargestBest) {
  std::string table =
      FormatGenerationTable(ThreeGenerationsTwoIslands(), v1::MAXIMIZE, 0);
  EXPECT_THAT(table, HasSubstr("  0    10    21"));
}

TEST(FormatGenerationTableTest, KeepsTheLastRowsAndSaysHowManyAreHidden) {
  std::string table =
      FormatGenerationTable(ThreeGenerationsTwoIslands(), v1::MINIMIZE, 2);
  EXPECT_EQ(table,
            "(1 earlier generations not shown; --all shows every one)\n"
            "GEN  BEST  MEAN  EVALS  ISLANDS\n"
            "  1     8    20     80        2\n"
            "  2     7    19     80        2\n");
}

TEST(FormatGenerationTableTest, EmptyHistorySaysSo) {
  EXPECT_EQ(FormatGenerationTable({}, v1::MINIMIZE, 20),
            "no complete generation yet\n");
}

TEST(FormatHistoryTest, OneRowPerIslandAndGeneration) {
  auto stats = FromText<v1::GenerationStats>(R"pb(
    island: 1
    generation: 7
    best: 2
    mean: 20.25
    worst: 81.5
    diversity: 0.5
    evaluations: 1200
    failed: 3
  )pb");
  EXPECT_EQ(FormatHistory({stats}),
            "ISLAND  GEN  BEST   MEAN  WORST  DIVERSITY  EVALS  FAILED\n"
            "     1    7     2  20.25   81.5        0.5  1,200       3\n");
}

TEST(FormatProgressLineTest, ShowsGenerationOfMaxEvaluationsAndBest) {
  auto run = FromText<v1::RunSummary>(R"pb(
    id: 3
    state: RUNNING
    evaluations: 14400
    has_best: true
    best_score: 3.979836
    islands { generation: 12 }
  )pb");
  EXPECT_EQ(FormatProgressLine(run, 60),
            "run 3 running  gen 12/60  evals 14,400  best 3.97984");
  EXPECT_EQ(FormatProgressLine(run, 0),
            "run 3 running  gen 12  evals 14,400  best 3.97984");
}

TEST(FormatProgressLineTest, ShowsEveryIslandsGenerationAndBest) {
  auto run = FromText<v1::RunSummary>(R"pb(
    id: 3
    state: RUNNING
    evaluations: 14400
    has_best: true
    best_score: 3.979836
    islands { island: 0 generation: 12 has_stats: true best: 4.5 }
    islands { island: 1 generation: 13 has_stats: true best: 3.979836 }
    islands { island: 2 generation: 0 }
  )pb");
  EXPECT_EQ(
      FormatProgressLine(run, 60),
      "run 3 running  gen 0-13/60  evals 14,400  best 3.97984  | 0:g12 4.5 "
      "1:g13 3.97984 2:g0 -");
}

TEST(FormatProgressLineTest, CountsDoneIslandsAndHasNoNewline) {
  auto run = FromText<v1::RunSummary>(R"pb(
    id: 3
    state: RUNNING
    islands { generation: 60 done: true }
    islands { generation: 58 }
  )pb");
  std::string line = FormatProgressLine(run, 60);
  EXPECT_EQ(line,
            "run 3 running  gen 58-60/60  evals 0  best -  islands done 1/2  | "
            "0:g60 - 0:g58 -");
  EXPECT_THAT(line, Not(HasSubstr("\n")));
}

TEST(FormatProgressLineTest, SaysWhenTheCoordinatorDroppedUpdates) {
  auto run = FromText<v1::RunSummary>(R"pb(
    id: 3
    state: RUNNING
    dropped_updates: 7
    islands { generation: 2 }
  )pb");
  EXPECT_EQ(FormatProgressLine(run, 0),
            "run 3 running  gen 2  evals 0  best -  [7 updates dropped: read "
            "too slowly]");
}

TEST(FormatRunDetailsTest, ShowsAPriorityAboveTheDefault) {
  v1::GetRunResponse response;
  response.mutable_run()->set_id(4);
  response.mutable_run()->set_priority(1);
  EXPECT_THAT(FormatRunDetails(response), Not(HasSubstr("priority")));
  response.mutable_run()->set_priority(3);
  EXPECT_THAT(FormatRunDetails(response), HasSubstr("priority    3\n"));
}

TEST(FormatFinalStateTest, NamesStateEvaluationsBestAndReason) {
  auto run = FromText<v1::RunSummary>(R"pb(
    id: 3
    state: FINISHED
    evaluations: 7200
    has_best: true
    best_score: 0.5
    champion_id: 99
    message: "max_generations reached"
  )pb");
  EXPECT_EQ(
      FormatFinalState(run),
      "run 3 finished after 7,200 evaluations; best score 0.5 (genome 99)\n"
      "  max_generations reached\n");
}

v1::Genome SampleChampion() {
  return FromText<v1::Genome>(R"pb(
    id: 812
    key { run_id: 3 island: 2 generation: 41 slot: 7 }
    origin: CROSSOVER
    parent_a: 700
    parent_b: 701
    genes: [ 0.5, -1, 2.25, 3, 4, 1e-12 ]
    score: 0.994959
    state: EVALUATED
  )pb");
}

TEST(FormatChampionTest, ShowsIdNaturalKeyOriginScoreAndGenes) {
  EXPECT_EQ(FormatChampion(SampleChampion(), "heating-loop-gains"),
            "champion of run 3 \"heating-loop-gains\"\n"
            "genome      812\n"
            "key         run 3 / island 2 / generation 41 / slot 7\n"
            "origin      crossover (parent 700, 701)\n"
            "score       0.994959\n"
            "genes (6)\n"
            "  0.5  -1  2.25  3  4\n"
            "  1e-12\n");
}

TEST(ChampionJsonTest, UsesProtobufJsonMappingAndParsesBack) {
  auto json = ChampionJson(SampleChampion(), 3, "say \"hi\"");
  ASSERT_TRUE(json.ok()) << json.status();
  // 64-bit integers are JSON strings in protobuf's JSON mapping
  // (developers.google.com/protocol-buffers/docs/proto3#json).
  EXPECT_THAT(*json, HasSubstr("\"runId\":\"3\""));
  EXPECT_THAT(*json, HasSubstr("\"id\":\"812\""));
  EXPECT_THAT(*json, HasSubstr("\"origin\":\"CROSSOVER\""));
  google::protobuf::Struct parsed;
  ASSERT_TRUE(google::protobuf::util::JsonStringToMessage(*json, &parsed).ok())
      << *json;
  EXPECT_EQ(parsed.fields().at("specName").string_value(), "say \"hi\"");
  const auto& genome = parsed.fields().at("genome").struct_value();
  EXPECT_DOUBLE_EQ(genome.fields().at("score").number_value(), 0.994959);
  EXPECT_EQ(genome.fields().at("genes").list_value().values_size(), 6);
  // The genome part alone parses back into the same Genome.
  v1::Genome round_trip;
  std::string genome_json;
  ASSERT_TRUE(google::protobuf::util::MessageToJsonString(
                  parsed.fields().at("genome"), &genome_json)
                  .ok());
  ASSERT_TRUE(
      google::protobuf::util::JsonStringToMessage(genome_json, &round_trip)
          .ok());
  EXPECT_EQ(round_trip.SerializeAsString(),
            SampleChampion().SerializeAsString());
}

TEST(ChampionJsonTest, PrintsZeroFieldsToo) {
  v1::Genome genome;
  auto json = ChampionJson(genome, 1, "");
  ASSERT_TRUE(json.ok()) << json.status();
  EXPECT_THAT(*json, HasSubstr("\"score\":0"));
  EXPECT_THAT(*json, HasSubstr("\"specName\":\"\""));
}

TEST(RunStateNameTest, EveryStateHasAWordAndTerminalOnesAreKnown) {
  EXPECT_EQ(RunStateName(v1::QUEUED), "queued");
  EXPECT_EQ(RunStateName(v1::PAUSED), "paused");
  EXPECT_EQ(RunStateName(v1::FAILED_RUN), "failed");
  EXPECT_TRUE(IsTerminal(v1::FINISHED));
  EXPECT_TRUE(IsTerminal(v1::STOPPED));
  EXPECT_TRUE(IsTerminal(v1::FAILED_RUN));
  EXPECT_FALSE(IsTerminal(v1::PAUSED));
  EXPECT_FALSE(IsTerminal(v1::RUNNING));
}

}  // namespace
}  // namespace skerry::cli

namespace skerry::cli {
namespace {

TEST(FormatFailedGenomesTest, NamesEachFailedGenomeAndItsError) {
  auto run = FromText<v1::GetRunResponse>(R"pb(
    failed_count: 2
    failed {
      id: 41
      key { run_id: 1 island: 0 generation: 3 slot: 7 }
      attempts: 3
      error: "score is not a finite number (nan)"
    }
  )pb");
  EXPECT_EQ(FormatFailedGenomes(run),
            "\n2 genomes failed every attempt (they rank last); the newest 1:\n"
            "  genome 41 (0/3/7, 3 attempts): score is not a finite number "
            "(nan)\n");
  EXPECT_EQ(FormatFailedGenomes(v1::GetRunResponse()), "");
}

}  // namespace
}  // namespace skerry::cli
