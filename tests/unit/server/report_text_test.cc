// The report page's HTML and JSON, and the Prometheus text of /metrics.
#include <cstdlib>
#include <string>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"
#include "gtest/gtest.h"
#include "server/http/fleet_metrics.h"
#include "server/http/report_page.h"

namespace skerry::http {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

RunReportData SmallRun(const std::string& name) {
  RunReportData r;
  skerry::v1::RunSummary* s = r.run.mutable_run();
  s->set_id(3);
  s->set_name(name);
  s->set_state(skerry::v1::FINISHED);
  s->set_evaluations(40);
  s->set_has_best(true);
  s->set_best_score(0.125);
  for (uint32_t g = 0; g < 2; ++g) {
    skerry::v1::GenerationStats stats;
    stats.set_island(0);
    stats.set_generation(g);
    stats.set_best(1.5 - g);
    stats.set_mean(2.25);
    stats.set_worst(4);
    stats.set_diversity(0.75);
    stats.set_evaluations(20);
    r.history.push_back(stats);
  }
  return r;
}

TEST(ReportTextTest, HtmlEscapeEscapesMarkupAndQuotes) {
  EXPECT_EQ(HtmlEscape("<a href=\"x\">&'</a>"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;&lt;/a&gt;");
}

TEST(ReportTextTest, JsonCannotEndItsScriptElementAndReadsBack) {
  absl::StatusOr<std::string> json =
      ReportJson({SmallRun("</script><script>alert(1)</script>")});
  ASSERT_TRUE(json.ok()) << json.status();
  EXPECT_THAT(*json, Not(HasSubstr("</script")));
  google::protobuf::ListValue list;
  ASSERT_TRUE(google::protobuf::util::JsonStringToMessage(*json, &list).ok());
  ASSERT_EQ(list.values_size(), 1);
  const auto& run = list.values(0).struct_value().fields().at("run");
  EXPECT_EQ(run.struct_value()
                .fields()
                .at("run")
                .struct_value()
                .fields()
                .at("name")
                .string_value(),
            "</script><script>alert(1)</script>");
}

TEST(ReportTextTest, ReportHasEveryNumberInTablesAndFetchesNothing) {
  absl::StatusOr<std::string> page =
      RenderReport({SmallRun("a <b> run")}, "window.Chart = function(){};",
                   "2026-01-01 00:00:00 UTC");
  ASSERT_TRUE(page.ok()) << page.status();
  EXPECT_THAT(*page, HasSubstr("a &lt;b&gt; run"));
  EXPECT_THAT(*page, Not(HasSubstr("a <b> run")));
  EXPECT_THAT(*page, HasSubstr("data-island=\"0\" data-generation=\"1\"><td>0"
                               "</td><td>1</td><td>0.5</td><td>2.25</td><td>4"
                               "</td><td>0.75</td><td>20</td>"));
  EXPECT_THAT(*page, HasSubstr("<td>0.125</td>"));
  for (const char* fetch :
       {"src=\"http", "href=\"http", "src=\"//", "@import", "url(http"}) {
    EXPECT_THAT(*page, Not(HasSubstr(fetch))) << fetch;
  }
  // Every chart has axis titles with units, given to Chart.js.
  EXPECT_THAT(*page, HasSubstr("\"generation (count)\""));
  EXPECT_THAT(*page, HasSubstr("\"evaluations per second (1/s)\""));
}

TEST(ReportTextTest, ChartLibraryThatWouldEndTheScriptIsRefused) {
  const std::string path = absl::StrCat(::testing::TempDir(), "/bad-chart.js");
  FILE* f = std::fopen(path.c_str(), "w");
  ASSERT_NE(f, nullptr);
  std::fputs("var Chart = '</script>';", f);
  std::fclose(f);
  absl::StatusOr<std::string> lib = LoadChartLibrary(path);
  EXPECT_EQ(lib.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(LoadChartLibrary(path + ".missing").status().code(),
            absl::StatusCode::kNotFound);
}

TEST(MetricsTextTest, HistogramBucketsAreCumulativeWithCountAndSum) {
  FleetMetrics m;
  const absl::Time t = absl::FromUnixSeconds(1000);
  std::vector<skerry::v1::TaskResult> results(3);
  results[2].set_error("crashed");
  skerry::v1::RejectedResult dup;
  dup.set_code(5);  // NOT_FOUND
  m.NoteReport(7, results, 2, {dup}, absl::Milliseconds(3), t);
  m.NoteReport(7, results, 2, {}, absl::Seconds(20), t + absl::Seconds(4));
  const std::string text = MetricsText(m.Get(), {});
  EXPECT_THAT(text, HasSubstr("skerry_results_total{attempt=\"scored\"} 4\n"));
  EXPECT_THAT(text, HasSubstr("skerry_results_total{attempt=\"failed\"} 2\n"));
  EXPECT_THAT(text, HasSubstr("skerry_results_applied_total 4\n"));
  EXPECT_THAT(
      text, HasSubstr("skerry_results_ignored_total{code=\"NOT_FOUND\"} 1\n"));
  // 3 ms falls in le=0.005 and every larger bucket; 20 s only in +Inf.
  EXPECT_THAT(text, HasSubstr("bucket{le=\"0.0025\"} 0\n"));
  EXPECT_THAT(text, HasSubstr("bucket{le=\"0.005\"} 1\n"));
  EXPECT_THAT(text, HasSubstr("bucket{le=\"10\"} 1\n"));
  EXPECT_THAT(text, HasSubstr("bucket{le=\"+Inf\"} 2\n"));
  EXPECT_THAT(text, HasSubstr("skerry_report_commit_seconds_count 2\n"));
  EXPECT_THAT(text, HasSubstr("skerry_report_commit_seconds_sum 20.003"));
  // 4 results applied over the 4 s between the two reports.
  EXPECT_DOUBLE_EQ(EvaluationsPerSecond(m.Get().workers.at(7)), 1.0);
}

TEST(MetricsTextTest, GaugesAreWrittenPerRunWithEscapedLabels) {
  CoordinatorGauges g;
  g.evaluations_by_run[2] = 99;
  g.state_by_run[2] = "odd \"state\"\\";
  g.queued_by_run[2] = 5;
  g.leases_outstanding = 3;
  g.workers_connected = 2;
  g.database_bytes = 4096;
  g.storage_problem = "disk full";
  const std::string text = MetricsText({}, g);
  EXPECT_THAT(text, HasSubstr("skerry_run_evaluations{run=\"2\",state=\"odd "
                              "\\\"state\\\"\\\\\"} 99\n"));
  EXPECT_THAT(text, HasSubstr("skerry_queue_tasks{run=\"2\"} 5\n"));
  EXPECT_THAT(text, HasSubstr("skerry_leases_outstanding 3\n"));
  EXPECT_THAT(text, HasSubstr("skerry_workers_connected 2\n"));
  EXPECT_THAT(text, HasSubstr("skerry_database_bytes 4096\n"));
  EXPECT_THAT(text, HasSubstr("skerry_storage_held 1\n"));
  EXPECT_THAT(text, Not(HasSubstr("skerry_storage_free_bytes")));
}

}  // namespace
}  // namespace skerry::http
