// Bounds on evaluator metrics (common/metric_bounds.h).
#include "common/metric_bounds.h"

#include <cmath>
#include <limits>
#include <map>
#include <string>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

TEST(MetricBoundsTest, NamedFiniteMetricsWithinTheCountPass) {
  std::map<std::string, double> m;
  for (size_t i = 0; i < kMaxMetrics; ++i) m[absl::StrCat("m.", i, "-x_y")] = i;
  EXPECT_TRUE(CheckMetrics(m).ok());
  EXPECT_TRUE(CheckMetrics(std::map<std::string, double>{}).ok());
}

TEST(MetricBoundsTest, EachBrokenBoundIsRefusedNamingIt) {
  struct Case {
    std::map<std::string, double> metrics;
    const char* says;
  };
  std::map<std::string, double> many;
  for (size_t i = 0; i <= kMaxMetrics; ++i) many[absl::StrCat("m", i)] = 1;
  const Case cases[] = {
      {many, "at most 32"},
      {{{"", 1}}, "1 to 64 characters"},
      {{{std::string(65, 'a'), 1}}, "got 65"},
      {{{"temp c", 1}}, "\"temp c\" may hold only"},
      {{{"nan", std::nan("")}}, "\"nan\" is not a finite number"},
      {{{"inf", std::numeric_limits<double>::infinity()}}, "not a finite"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.says);
    absl::Status s = CheckMetrics(c.metrics);
    EXPECT_EQ(s.code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(s.message(), HasSubstr(c.says));
  }
}

}  // namespace
}  // namespace skerry
