// Tests for run-spec parsing, defaults and validation (common/spec.h). Defaults
// and ranges: proto/skerry/v1/spec.proto.
#include "common/spec.h"

#include <cmath>
#include <functional>
#include <limits>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using skerry::v1::RunSpec;
using ::testing::HasSubstr;
using ::testing::MatchesRegex;
using ::testing::Not;
using ::testing::StartsWith;

constexpr char kExampleSpec[] = R"pb(
  # A four-island search on Rastrigin.
  name: "rastrigin-islands"
  seed: 7
  genome_length: 20
  objective: MINIMIZE
  evaluator {
    builtin { function: "rastrigin" }
    time_limit_seconds: 5
  }
  ga {
    population_size: 40
    selection { method: TOURNAMENT tournament_size: 3 }
    crossover { method: BLEND rate: 0.9 blend_alpha: 0.25 }
    mutation { rate: 0.05 step: 0.3 }
    elites: 2
    immigrants: 1
  }
  islands {
    count: 4
    population_sizes: [ 40, 40, 30, 30 ]
    topology: RANDOM
    random_degree: 2
    interval: 5
    migrants: 2
    emigrants: EMIGRATE_TOURNAMENT
    replacement: REPLACE_RANDOM
  }
  stop { max_generations: 200 target_score: 0.001 }
  max_attempts: 2
)pb";

RunSpec Parse(absl::string_view text) {
  absl::StatusOr<RunSpec> spec = ParseSpecText(text, "test.spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  return spec.ok() ? *spec : RunSpec();
}

TEST(ParseSpecTextTest, SyntaxErrorNamesFileLineAndColumn) {
  const absl::StatusOr<RunSpec> spec = ParseSpecText(
      "genome_length: 10\nga {\n  elites: x\n}\n", "runs/bad.spec");
  ASSERT_FALSE(spec.ok());
  EXPECT_EQ(spec.status().code(), absl::StatusCode::kInvalidArgument);
  // 1-based: line 3, column 11 is where the bad token "x" starts.
  EXPECT_THAT(std::string(spec.status().message()),
              StartsWith("runs/bad.spec:3:11: "));
}

TEST(ParseSpecTextTest, UnknownFieldIsNamedWithItsLine) {
  const absl::StatusOr<RunSpec> spec = ParseSpecText(
      "genome_length: 10\nga {\n  bogus_field: 1\n}\n", "runs/bad.spec");
  ASSERT_FALSE(spec.ok());
  // At the unknown name itself (column 3), not the ':' after it.
  EXPECT_THAT(std::string(spec.status().message()),
              StartsWith("runs/bad.spec:3:3: "));
  EXPECT_THAT(std::string(spec.status().message()), HasSubstr("bogus_field"));
}

// The observed bug: errors pointed at the token after the problem, and
// columns counted UTF-8 bytes instead of characters.
TEST(ParseSpecTextTest, ParseErrorPointsAtTheTokenAndCountsCharacters) {
  // "\xC3\xA9" is one character (e acute): "bogus" starts at character 11,
  // byte 12.
  const absl::StatusOr<RunSpec> spec =
      ParseSpecText("name: \"\xC3\xA9\" bogus: 1\n", "x.spec");
  ASSERT_FALSE(spec.ok());
  EXPECT_THAT(std::string(spec.status().message()),
              StartsWith("x.spec:1:11: "));
  EXPECT_THAT(std::string(spec.status().message()), HasSubstr("bogus"));
  // A tab is one character too.
  const absl::StatusOr<RunSpec> tabbed =
      ParseSpecText("ga {\n\tbogus: 1\n}\n", "x.spec");
  ASSERT_FALSE(tabbed.ok());
  EXPECT_THAT(std::string(tabbed.status().message()),
              StartsWith("x.spec:2:2: "));
}

// The observed bug: invalid UTF-8 in a spec ended in libprotobuf log lines
// when the spec was sent, and exit 1.
TEST(ParseSpecTextTest, InvalidUtf8InAStringFieldIsRefusedNamingTheField) {
  const absl::StatusOr<RunSpec> raw =
      ParseSpecText("genome_length: 2\nname: \"ab\xFF\"\n", "x.spec");
  ASSERT_FALSE(raw.ok());
  EXPECT_EQ(raw.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(raw.status().message()),
              StartsWith("x.spec:2:10: name: not valid UTF-8"));
  EXPECT_THAT(std::string(raw.status().message()), HasSubstr("0xFF"));
  // Through an escape, in a nested repeated field: named by its path.
  const absl::StatusOr<RunSpec> escaped = ParseSpecText(
      "evaluator { external { argv: \"sim\" argv: \"\\377\" } }\n", "x.spec");
  ASSERT_FALSE(escaped.ok());
  EXPECT_THAT(
      std::string(escaped.status().message()),
      StartsWith("x.spec: evaluator.external.argv[1]: not valid UTF-8"));
  // Valid UTF-8 is taken as it is.
  EXPECT_EQ(Parse("name: \"r\xC3\xA9glage\"\n").name(), "r\xC3\xA9glage");
}

// The observed bug: a spec without an evaluator read as unknown function "".
TEST(ValidateSpecTest, MissingEvaluatorSaysSoAndHowToSetIt) {
  RunSpec spec = Parse("genome_length: 2\n");
  absl::StatusOr<RunSpec> prepared = PrepareSpec(spec);
  ASSERT_FALSE(prepared.ok());
  const std::string message(prepared.status().message());
  EXPECT_THAT(message, StartsWith("evaluator: missing"));
  EXPECT_THAT(message, HasSubstr("builtin { function: \"sphere\" }"));
  EXPECT_THAT(message, Not(HasSubstr("unknown function")));
  spec.mutable_evaluator()->mutable_builtin();  // builtin {} with no function
  prepared = PrepareSpec(spec);
  ASSERT_FALSE(prepared.ok());
  EXPECT_THAT(std::string(prepared.status().message()),
              StartsWith("evaluator.builtin.function: not set"));
}

TEST(ParseSpecTextTest, BadValueReportsPosition) {
  const absl::StatusOr<RunSpec> spec =
      ParseSpecText("genome_length: -4\n", "x.spec");
  ASSERT_FALSE(spec.ok());
  EXPECT_THAT(std::string(spec.status().message()),
              MatchesRegex("x\\.spec:1:[0-9]+: .*"));
}

TEST(ParseSpecTextTest, ExampleSpecParsesAndValidates) {
  absl::StatusOr<RunSpec> spec = PrepareSpec(Parse(kExampleSpec));
  ASSERT_TRUE(spec.ok()) << spec.status();
  EXPECT_EQ(spec->name(), "rastrigin-islands");
  EXPECT_EQ(IslandPopulation(*spec, 0), 40u);
  EXPECT_EQ(IslandPopulation(*spec, 3), 30u);
}

TEST(NormalizeSpecTest, FillsEveryDocumentedDefault) {
  RunSpec spec = Parse(R"pb(
    genome_length: 8
    evaluator { builtin { function: "schwefel" } }
  )pb");
  NormalizeSpec(&spec);
  EXPECT_EQ(spec.name(), "run");
  EXPECT_EQ(spec.objective(), skerry::v1::MINIMIZE);
  // Bounds: the builtin's domain (Jamil & Yang 2013: Schwefel on [-500, 500]).
  EXPECT_EQ(spec.lower_bound(), -500.0);
  EXPECT_EQ(spec.upper_bound(), 500.0);
  EXPECT_EQ(spec.init_lower(), -500.0);
  EXPECT_EQ(spec.init_upper(), 500.0);
  const auto& ga = spec.ga();
  EXPECT_EQ(ga.population_size(), 50u);
  EXPECT_EQ(ga.elites(), 1u);
  EXPECT_EQ(ga.immigrants(), 0u);
  EXPECT_EQ(ga.selection().method(), skerry::v1::TOURNAMENT);
  EXPECT_EQ(ga.selection().tournament_size(), 2u);
  EXPECT_EQ(ga.selection().scaling(), skerry::v1::WINDOWING);
  EXPECT_EQ(ga.selection().linear_scaling_factor(), 2.0);
  EXPECT_EQ(ga.selection().rank_pressure(), 1.5);
  EXPECT_EQ(ga.selection().truncation_fraction(), 0.5);
  EXPECT_EQ(ga.crossover().method(), skerry::v1::UNIFORM);
  EXPECT_EQ(ga.crossover().rate(), 0.8);
  EXPECT_EQ(ga.crossover().blend_alpha(), 0.0);
  EXPECT_EQ(ga.mutation().rate(), 1.0 / 8);
  EXPECT_DOUBLE_EQ(ga.mutation().step(), 100.0);  // 10% of 1000
  const auto& isl = spec.islands();
  EXPECT_EQ(isl.count(), 1u);
  EXPECT_EQ(isl.topology(), skerry::v1::RING);
  EXPECT_EQ(isl.interval(), 10u);
  EXPECT_EQ(isl.migrants(), 1u);
  EXPECT_EQ(isl.emigrants(), skerry::v1::EMIGRATE_BEST);
  EXPECT_EQ(isl.replacement(), skerry::v1::REPLACE_WORST);
  EXPECT_EQ(isl.random_degree(), 1u);
  EXPECT_EQ(spec.evaluator().time_limit_seconds(), 60.0);
  EXPECT_EQ(spec.max_attempts(), 3u);
  EXPECT_EQ(spec.stop().max_generations(), 100u);
  EXPECT_TRUE(ValidateSpec(spec).ok()) << ValidateSpec(spec);
}

TEST(NormalizeSpecTest, KeepsGivenValuesAndExplicitZeros) {
  RunSpec spec = Parse(R"pb(
    genome_length: 4
    lower_bound: -1
    upper_bound: 3
    init_lower: 0
    init_upper: 2
    evaluator { builtin { function: "sphere" } }
    ga {
      elites: 0
      crossover { rate: 0 }
      mutation { rate: 0 }
    }
    stop { max_evaluations: 1000 }
  )pb");
  NormalizeSpec(&spec);
  EXPECT_EQ(spec.lower_bound(), -1.0);
  EXPECT_EQ(spec.upper_bound(), 3.0);
  EXPECT_EQ(spec.init_lower(), 0.0);
  EXPECT_EQ(spec.ga().elites(), 0u);
  EXPECT_EQ(spec.ga().crossover().rate(), 0.0);
  EXPECT_EQ(spec.ga().mutation().rate(), 0.0);
  EXPECT_DOUBLE_EQ(spec.ga().mutation().step(), 0.2);  // 10% of the init width
  // A stop condition was given, so no default generation limit is added.
  EXPECT_EQ(spec.stop().max_generations(), 0u);
  EXPECT_TRUE(ValidateSpec(spec).ok()) << ValidateSpec(spec);
}

TEST(NormalizeSpecTest, IsIdempotent) {
  RunSpec once = Parse(kExampleSpec);
  NormalizeSpec(&once);
  RunSpec twice = once;
  NormalizeSpec(&twice);
  EXPECT_EQ(once.SerializeAsString(), twice.SerializeAsString());
}

TEST(IslandPopulationTest, FallsBackToGaPopulation) {
  RunSpec spec = Parse(R"pb(ga { population_size: 12 }
                            islands { count: 3 })pb");
  EXPECT_EQ(IslandPopulation(spec, 2), 12u);
  spec.mutable_islands()->add_population_sizes(5);
  spec.mutable_islands()->add_population_sizes(6);
  spec.mutable_islands()->add_population_sizes(7);
  EXPECT_EQ(IslandPopulation(spec, 1), 6u);
}

struct BadCase {
  const char* what;
  std::function<void(RunSpec*)> edit;  // applied before normalisation
  const char* field;                   // expected FIELD.PATH
};

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

std::vector<BadCase> BadCases() {
  return {
      {"genome too short", [](RunSpec* s) { s->set_genome_length(0); },
       "genome_length"},
      {"genome too long", [](RunSpec* s) { s->set_genome_length(1000001); },
       "genome_length"},
      {"unknown objective",
       [](RunSpec* s) {
         s->set_objective(static_cast<skerry::v1::Objective>(7));
       },
       "objective"},
      {"unknown function",
       [](RunSpec* s) {
         s->mutable_evaluator()->mutable_builtin()->set_function("nope");
       },
       "evaluator.builtin.function"},
      {"no evaluator",
       [](RunSpec* s) {
         s->mutable_evaluator()->clear_builtin();
         s->set_lower_bound(-1);
         s->set_upper_bound(1);
       },
       "evaluator"},
      {"negative time limit",
       [](RunSpec* s) { s->mutable_evaluator()->set_time_limit_seconds(-1); },
       "evaluator.time_limit_seconds"},
      {"infinite time limit",
       [](RunSpec* s) { s->mutable_evaluator()->set_time_limit_seconds(kInf); },
       "evaluator.time_limit_seconds"},
      {"infinite lower bound", [](RunSpec* s) { s->set_lower_bound(-kInf); },
       "lower_bound"},
      {"NaN upper bound", [](RunSpec* s) { s->set_upper_bound(kNaN); },
       "upper_bound"},
      {"bounds reversed",
       [](RunSpec* s) {
         s->set_lower_bound(2);
         s->set_upper_bound(1);
       },
       "upper_bound"},
      {"bounds equal",
       [](RunSpec* s) {
         s->set_lower_bound(1);
         s->set_upper_bound(1);
       },
       "upper_bound"},
      {"init below bounds", [](RunSpec* s) { s->set_init_lower(-6); },
       "init_lower"},
      {"init above bounds", [](RunSpec* s) { s->set_init_upper(6); },
       "init_upper"},
      {"init reversed",
       [](RunSpec* s) {
         s->set_init_lower(1);
         s->set_init_upper(0);
       },
       "init_upper"},
      {"population too small",
       [](RunSpec* s) { s->mutable_ga()->set_population_size(1); },
       "ga.population_size"},
      {"population too large",
       [](RunSpec* s) { s->mutable_ga()->set_population_size(1000001); },
       "ga.population_size"},
      {"too many islands",
       [](RunSpec* s) { s->mutable_islands()->set_count(257); },
       "islands.count"},
      {"sizes of wrong length",
       [](RunSpec* s) {
         s->mutable_islands()->set_count(3);
         s->mutable_islands()->add_population_sizes(10);
         s->mutable_islands()->add_population_sizes(10);
       },
       "islands.population_sizes"},
      {"island too small",
       [](RunSpec* s) {
         s->mutable_islands()->set_count(2);
         s->mutable_islands()->add_population_sizes(10);
         s->mutable_islands()->add_population_sizes(1);
       },
       "islands.population_sizes[1]"},
      {"elites fill population",
       [](RunSpec* s) { s->mutable_ga()->set_elites(50); }, "ga.elites"},
      {"elites fill smallest island",
       [](RunSpec* s) {
         s->mutable_islands()->set_count(2);
         s->mutable_islands()->add_population_sizes(50);
         s->mutable_islands()->add_population_sizes(3);
         s->mutable_ga()->set_elites(3);
       },
       "ga.elites"},
      {"elites plus immigrants fill population",
       [](RunSpec* s) {
         s->mutable_ga()->set_elites(1);
         s->mutable_ga()->set_immigrants(49);
       },
       "ga.immigrants"},
      {"unknown selection",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_method(
             static_cast<skerry::v1::SelectionMethod>(99));
       },
       "ga.selection.method"},
      {"RAW while minimising",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_scaling(skerry::v1::RAW);
       },
       "ga.selection.scaling"},
      {"linear factor 1",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_linear_scaling_factor(1);
       },
       "ga.selection.linear_scaling_factor"},
      {"linear factor 11",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_linear_scaling_factor(11);
       },
       "ga.selection.linear_scaling_factor"},
      {"tournament above population",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_tournament_size(51);
       },
       "ga.selection.tournament_size"},
      {"rank pressure above 2",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_rank_pressure(2.5);
       },
       "ga.selection.rank_pressure"},
      {"rank pressure below 1",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_rank_pressure(0.5);
       },
       "ga.selection.rank_pressure"},
      {"truncation negative",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_truncation_fraction(-0.1);
       },
       "ga.selection.truncation_fraction"},
      {"truncation above 1",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_selection()->set_truncation_fraction(1.5);
       },
       "ga.selection.truncation_fraction"},
      {"unknown crossover",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_crossover()->set_method(
             static_cast<skerry::v1::CrossoverMethod>(42));
       },
       "ga.crossover.method"},
      {"crossover rate above 1",
       [](RunSpec* s) { s->mutable_ga()->mutable_crossover()->set_rate(1.5); },
       "ga.crossover.rate"},
      {"crossover rate negative",
       [](RunSpec* s) { s->mutable_ga()->mutable_crossover()->set_rate(-0.1); },
       "ga.crossover.rate"},
      {"crossover rate NaN",
       [](RunSpec* s) { s->mutable_ga()->mutable_crossover()->set_rate(kNaN); },
       "ga.crossover.rate"},
      {"blend alpha above 1",
       [](RunSpec* s) {
         s->mutable_ga()->mutable_crossover()->set_blend_alpha(2);
       },
       "ga.crossover.blend_alpha"},
      {"mutation rate above 1",
       [](RunSpec* s) { s->mutable_ga()->mutable_mutation()->set_rate(2); },
       "ga.mutation.rate"},
      {"mutation step zero",
       [](RunSpec* s) { s->mutable_ga()->mutable_mutation()->set_step(0); },
       "ga.mutation.step"},
      {"mutation step negative",
       [](RunSpec* s) { s->mutable_ga()->mutable_mutation()->set_step(-1); },
       "ga.mutation.step"},
      {"mutation step infinite",
       [](RunSpec* s) { s->mutable_ga()->mutable_mutation()->set_step(kInf); },
       "ga.mutation.step"},
      {"unknown topology",
       [](RunSpec* s) {
         s->mutable_islands()->set_topology(
             static_cast<skerry::v1::Topology>(9));
       },
       "islands.topology"},
      {"migrants fill population",
       [](RunSpec* s) { s->mutable_islands()->set_migrants(50); },
       "islands.migrants"},
      // 7 sources x 7 migrants = 49 arrivals + 1 elite leave no offspring
      // slot in a population of 50 (common practice: a generational GA needs
      // room to breed).
      {"fully connected arrivals leave no offspring slot",
       [](RunSpec* s) {
         s->mutable_islands()->set_count(8);
         s->mutable_islands()->set_topology(skerry::v1::FULLY_CONNECTED);
         s->mutable_islands()->set_migrants(7);
       },
       "islands.migrants"},
      {"random degree too high",
       [](RunSpec* s) {
         s->mutable_islands()->set_count(4);
         s->mutable_islands()->set_topology(skerry::v1::RANDOM);
         s->mutable_islands()->set_random_degree(4);
       },
       "islands.random_degree"},
      {"negative wall limit",
       [](RunSpec* s) { s->mutable_stop()->set_max_wall_seconds(-1); },
       "stop.max_wall_seconds"},
      {"NaN target",
       [](RunSpec* s) { s->mutable_stop()->set_target_score(kNaN); },
       "stop.target_score"},
      {"too many attempts", [](RunSpec* s) { s->set_max_attempts(101); },
       "max_attempts"},
  };
}

RunSpec MinimalSpec() {
  return Parse(R"pb(
    genome_length: 5
    evaluator { builtin { function: "rastrigin" } }
  )pb");
}

TEST(ValidateSpecTest, MinimalSpecIsValid) {
  EXPECT_TRUE(PrepareSpec(MinimalSpec()).ok());
}

TEST(ValidateSpecTest, EveryBadFieldIsNamedWithRangeAndValue) {
  for (const BadCase& c : BadCases()) {
    SCOPED_TRACE(c.what);
    RunSpec spec = MinimalSpec();
    c.edit(&spec);
    const absl::StatusOr<RunSpec> prepared = PrepareSpec(spec);
    ASSERT_FALSE(prepared.ok());
    EXPECT_EQ(prepared.status().code(), absl::StatusCode::kInvalidArgument);
    const std::string message(prepared.status().message());
    EXPECT_THAT(message, StartsWith(absl::StrCat(c.field, ": ")));
    // The evaluator's message quotes the bad name instead of a "got" part.
    EXPECT_THAT(message,
                c.field == std::string("evaluator.builtin.function") ||
                        c.field == std::string("evaluator")
                    ? MatchesRegex(".*: .+ \\(allowed: .+\\)")
                    : MatchesRegex(".*: .+ \\(allowed: .+; got .+\\)"));
  }
}

TEST(ValidateSpecTest, MessageShowsAllowedRangeAndValue) {
  RunSpec spec = MinimalSpec();
  spec.mutable_ga()->set_population_size(1);
  EXPECT_EQ(PrepareSpec(spec).status().message(),
            "ga.population_size: out of range (allowed: [2, 1000000]; got 1)");
}

TEST(ValidateSpecTest, RawScalingIsAllowedWhenMaximising) {
  RunSpec spec = MinimalSpec();
  spec.set_objective(skerry::v1::MAXIMIZE);
  spec.mutable_ga()->mutable_selection()->set_method(skerry::v1::ROULETTE);
  spec.mutable_ga()->mutable_selection()->set_scaling(skerry::v1::RAW);
  EXPECT_TRUE(PrepareSpec(spec).ok()) << PrepareSpec(spec).status();
}

TEST(ValidateSpecTest, RandomDegreeIsIgnoredOnOneIsland) {
  RunSpec spec = MinimalSpec();
  spec.mutable_islands()->set_topology(skerry::v1::RANDOM);
  spec.mutable_islands()->set_random_degree(5);
  EXPECT_TRUE(PrepareSpec(spec).ok());
}

TEST(ValidateSpecTest, UnnormalisedSpecWithoutStopConditionIsRejected) {
  RunSpec spec = MinimalSpec();
  NormalizeSpec(&spec);
  spec.mutable_stop()->Clear();
  const absl::Status status = ValidateSpec(spec);
  ASSERT_FALSE(status.ok());
  EXPECT_THAT(std::string(status.message()), StartsWith("stop: "));
}

TEST(ValidateSpecTest, UnnormalisedSpecIsRejectedNotAccepted) {
  // ValidateSpec alone on a raw spec must not pass silently.
  EXPECT_FALSE(ValidateSpec(MinimalSpec()).ok());
}

// gene_precision: FLOAT32 needs bounds a float32 holds and a float32 value
// between them; an unknown value is refused naming the field.
// FLT_MAX = (2 - 2^-23) x 2^127 = 3.40282e+38 (IEEE 754 binary32).
TEST(ValidateSpecTest, Float32PrecisionNeedsBoundsAFloat32Holds) {
  RunSpec spec = Parse(
      "genome_length: 3 evaluator { builtin { function: \"sphere\" } } "
      "gene_precision: FLOAT32");
  EXPECT_TRUE(PrepareSpec(spec).ok()) << PrepareSpec(spec).status();
  RunSpec far = spec;
  far.set_lower_bound(-1e39);
  far.set_init_lower(-1);
  absl::Status s = PrepareSpec(far).status();
  EXPECT_TRUE(absl::IsInvalidArgument(s));
  EXPECT_THAT(std::string(s.message()), HasSubstr("lower_bound"));
  EXPECT_THAT(std::string(s.message()), HasSubstr("3.40282e+38"));
  RunSpec narrow = spec;
  // No float32 lies in [0.1, the next double]: 0.1f is above both.
  narrow.set_lower_bound(0.1);
  narrow.set_upper_bound(std::nextafter(0.1, 1.0));
  narrow.set_init_lower(0.1);
  narrow.set_init_upper(0.1);
  s = PrepareSpec(narrow).status();
  EXPECT_THAT(std::string(s.message()), HasSubstr("no float32 value"));
  RunSpec odd = spec;
  odd.set_gene_precision(static_cast<skerry::v1::GenePrecision>(9));
  s = PrepareSpec(odd).status();
  EXPECT_THAT(std::string(s.message()), HasSubstr("gene_precision"));
  EXPECT_THAT(std::string(s.message()), HasSubstr("FLOAT32"));
}

}  // namespace
}  // namespace skerry
