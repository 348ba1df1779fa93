// `skerry local --http HOST:PORT` (issue 15): while a local run goes on, the
// live page and its JSON are served on a loopback port, and they follow the
// run. The real `skerry` binary; plain HTTP GETs (tests/support/http_get.h).

#include <csignal>
#include <string>
#include <utility>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/http_get.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

// A run far longer than the test: the test ends it.
constexpr char kLongSpec[] = R"(
name: "local-live-page"
seed: 5
genome_length: 8
evaluator { builtin { function: "sphere" } }
ga {
  population_size: 16
  selection { method: TOURNAMENT tournament_size: 2 }
  crossover { method: UNIFORM rate: 0.9 }
  mutation { rate: 0.2 step: 0.3 }
  elites: 1
}
stop { max_generations: 1000000 }
)";

using testing::HttpGet;

// The number after `"key":` (proto3 JSON writes 64-bit integers as strings).
uint64_t JsonNumber(const std::string& json, const std::string& key) {
  const size_t at = json.find(absl::StrCat("\"", key, "\":"));
  if (at == std::string::npos) return 0;
  size_t i = at + key.size() + 3;
  while (i < json.size() && (json[i] == '"' || json[i] == ' ')) ++i;
  size_t end = i;
  while (end < json.size() && isdigit(static_cast<unsigned char>(json[end])))
    ++end;
  uint64_t n = 0;
  (void)absl::SimpleAtoi(json.substr(i, end - i), &n);
  return n;
}

TEST(LocalHttpTest, LivePageFollowsALocalRunWhileItGoesOn) {
  testing::TempDir dir;
  const std::string spec = dir.File("long.spec");
  ASSERT_TRUE(testing::WriteTextFile(spec, kLongSpec));
  absl::StatusOr<testing::Process> local = testing::Process::Start(
      {SKERRY_CLI_BIN, "local", spec, "--db", dir.File("local.db"), "--workers",
       "1", "--http", "127.0.0.1:0"},
      dir.File("local.log"));
  ASSERT_TRUE(local.ok()) << local.status();

  const std::string marker = "live page   http://127.0.0.1:";
  int port = 0;
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        const std::string log = local->Log();
        const size_t at = log.find(marker);
        if (at == std::string::npos) return false;
        const size_t end = log.find('/', at + marker.size());
        return end != std::string::npos &&
               absl::SimpleAtoi(
                   log.substr(at + marker.size(), end - at - marker.size()),
                   &port) &&
               port > 0;
      },
      absl::Seconds(60)))
      << local->Log();

  auto [page_code, page] = HttpGet(port, "/");
  EXPECT_EQ(page_code, 200) << page;
  EXPECT_THAT(page, HasSubstr("<html"));

  // The run is listed, and its evaluations grow between two looks.
  uint64_t first = 0;
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        auto [code, runs] = HttpGet(port, "/api/runs");
        first = JsonNumber(runs, "evaluations");
        return code == 200 &&
               runs.find("local-live-page") != std::string::npos && first > 0;
      },
      absl::Seconds(120)))
      << local->Log();
  uint64_t later = first;
  EXPECT_TRUE(testing::WaitFor(
      [&] {
        later = JsonNumber(HttpGet(port, "/api/runs").second, "evaluations");
        return later > first;
      },
      absl::Seconds(120)))
      << "evaluations stayed at " << first;
  auto [report_code, report] = HttpGet(port, "/api/report?run=1");
  EXPECT_EQ(report_code, 200) << report;

  local->Kill();
}

}  // namespace
}  // namespace skerry
