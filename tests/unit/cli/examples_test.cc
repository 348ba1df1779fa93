// Every example spec shipped in examples/ parses and passes validation, so a
// user's first `skerry submit` of one never fails on our account.
#include <algorithm>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "common/spec.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

std::vector<std::string> ExampleSpecs() {
  std::vector<std::string> paths;
  for (const auto& entry :
       std::filesystem::directory_iterator(SKERRY_EXAMPLES_DIR)) {
    if (entry.path().extension() == ".spec") paths.push_back(entry.path());
  }
  std::sort(paths.begin(), paths.end());
  return paths;
}

absl::StatusOr<skerry::v1::RunSpec> Load(const std::string& path) {
  std::ifstream file(path);
  std::stringstream text;
  text << file.rdbuf();
  absl::StatusOr<skerry::v1::RunSpec> spec = ParseSpecText(text.str(), path);
  if (!spec.ok()) return spec.status();
  return PrepareSpec(*spec);
}

TEST(ExamplesTest, EveryExampleParsesAndPassesValidation) {
  std::vector<std::string> paths = ExampleSpecs();
  ASSERT_GE(paths.size(), 4u) << "examples in " << SKERRY_EXAMPLES_DIR;
  for (const std::string& path : paths) {
    SCOPED_TRACE(path);
    absl::StatusOr<skerry::v1::RunSpec> spec = Load(path);
    EXPECT_TRUE(spec.ok()) << spec.status();
  }
}

TEST(ExamplesTest, DemoIsRastriginInTenDimensionsOnThreeIslandsOfForty) {
  auto spec = Load(std::string(SKERRY_EXAMPLES_DIR) + "/demo.spec");
  ASSERT_TRUE(spec.ok()) << spec.status();
  EXPECT_EQ(spec->evaluator().builtin().function(), "rastrigin");
  EXPECT_EQ(spec->genome_length(), 10u);
  EXPECT_EQ(spec->islands().count(), 3u);
  EXPECT_EQ(spec->ga().population_size(), 40u);
  EXPECT_EQ(spec->stop().max_generations(), 60u);
  EXPECT_EQ(spec->ga().selection().method(), skerry::v1::TOURNAMENT);
  EXPECT_EQ(spec->ga().crossover().method(), skerry::v1::UNIFORM);
  EXPECT_GT(spec->ga().immigrants(), 0u);
}

TEST(ExamplesTest, SphereQuickStaysTiny) {
  auto spec = Load(std::string(SKERRY_EXAMPLES_DIR) + "/sphere-quick.spec");
  ASSERT_TRUE(spec.ok()) << spec.status();
  uint64_t evaluations = uint64_t{spec->ga().population_size()} *
                         spec->islands().count() *
                         spec->stop().max_generations();
  EXPECT_LE(evaluations, 100u);
}

TEST(ExamplesTest, OneExampleMaximizesWithRouletteAndLinearScaling) {
  int found = 0;
  for (const std::string& path : ExampleSpecs()) {
    auto spec = Load(path);
    ASSERT_TRUE(spec.ok()) << spec.status();
    const auto& selection = spec->ga().selection();
    if (spec->objective() == skerry::v1::MAXIMIZE &&
        selection.method() == skerry::v1::ROULETTE &&
        selection.scaling() == skerry::v1::LINEAR) {
      ++found;
    }
  }
  EXPECT_GE(found, 1);
}

}  // namespace
}  // namespace skerry
