// The run report page: one self-contained HTML document (styles, data, the
// charting library and the script that draws the charts all inlined), written
// by `skerry report` and served live by the coordinator's HTTP port
// (server/http/http_server.h). The charts are drawn by Chart.js, read from
// Debian's libjs-chart.js; this file only lays out data and tables.
//
// Invariant: the document fetches nothing from the network. Every number the
// charts show is also in a table (static reports), so the page says the same
// with scripts off. Text from the database (names, spec, errors) is escaped
// for HTML, and embedded JSON cannot end its <script> element.
//
// Thread safety: every function is pure and may be called from any thread.
#ifndef SKERRY_SERVER_HTTP_REPORT_PAGE_H_
#define SKERRY_SERVER_HTTP_REPORT_PAGE_H_

#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "skerry/v1/lineage.pb.h"
#include "skerry/v1/runs.pb.h"

namespace skerry::http {

// Where Debian's libjs-chart.js puts the UMD build (it defines window.Chart).
inline constexpr char kDefaultChartLibrary[] =
    "/usr/share/javascript/chart.js/chart.min.js";

// Everything a report shows about one run.
struct RunReportData {
  skerry::v1::GetRunResponse run;
  std::vector<skerry::v1::GenerationStats> history;  // every island
  std::optional<skerry::v1::DigestResponse> digest;
  // The champion's line of descent; absent before the run has a champion.
  std::optional<skerry::v1::AttributionResponse> attribution;
};

// Reads the charting library; NotFound names the file and the package that
// provides it, InvalidArgument when it could not be inlined safely.
absl::StatusOr<std::string> LoadChartLibrary(const std::string& path);

// The data of several runs as one JSON array (protobuf's JSON mapping of each
// message, every field printed), safe to place inside a <script> element.
absl::StatusOr<std::string> ReportJson(const std::vector<RunReportData>& runs);

// A static report of one or more runs (several overlay on the same charts).
// `generated` is shown in the header ("2026-12-02 13:00:00 UTC").
absl::StatusOr<std::string> RenderReport(const std::vector<RunReportData>& runs,
                                         absl::string_view chart_library,
                                         absl::string_view generated);

// The live page's shell: the same charts, filled and refreshed by the script
// from the coordinator's /api/ endpoints with the token the page was given.
std::string RenderLivePage(absl::string_view chart_library);

// The script both pages run (report_script.cc).
absl::string_view ReportScript();

// `text` escaped for HTML text and attribute values.
std::string HtmlEscape(absl::string_view text);

}  // namespace skerry::http

#endif  // SKERRY_SERVER_HTTP_REPORT_PAGE_H_
