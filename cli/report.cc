#include "cli/report.h"

#include <cstdio>
#include <fstream>
#include <set>
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "cli/handlers.h"
#include "server/http/report_data.h"
#include "server/http/report_page.h"

namespace skerry::cli {

std::vector<CommandSpec> ReportCommandSpecs() {
  return {
      {"report",
       {"RUN|SERIES", "[RUN|SERIES...]"},
       {{"out", "FILE", "write the page to FILE (-o FILE)", true},
        {"chart-library", "FILE",
         "Chart.js to inline (default: Debian's libjs-chart.js)"}},
       "write an HTML report of one or more runs",
       "Writes one self-contained HTML file that opens offline: best, mean "
       "and worst score per generation of every island, diversity, "
       "evaluations per second, held-out validation beside training score, "
       "the champion's line of descent with its improvement steps and the "
       "operators and islands that made them, the spec, state and digest. "
       "Several runs overlay on the same charts (at most 8). Every number is "
       "also in a table. Given a series name, it writes instead the "
       "comparison of `skerry compare` as a page: each group's median best "
       "score against evaluations with its quartiles, the numbers in a "
       "table, and the rank-sum tests. docs/report.md.",
       ReportHandler},
  };
}

int ReportCommand(const ParsedArgs& args,
                  skerry::v1::RunService::StubInterface& runs,
                  skerry::v1::LineageService::StubInterface& lineage, Io& io) {
  std::vector<uint64_t> ids;
  std::set<uint64_t> seen;
  for (const std::string& text : args.positionals) {
    absl::StatusOr<uint64_t> id = ParseRunId(text);
    if (!id.ok()) return UsageFailure(id.status(), "report", io);
    if (seen.insert(*id).second) ids.push_back(*id);
  }
  if (ids.size() > kMaxReportRuns) {
    return UsageFailure(absl::InvalidArgumentError(absl::StrCat(
                            "at most ", kMaxReportRuns,
                            " runs in one report, got ", ids.size())),
                        "report", io);
  }
  const std::string library_path = args.Has("chart-library")
                                       ? args.Get("chart-library")
                                       : http::kDefaultChartLibrary;
  absl::StatusOr<std::string> library = http::LoadChartLibrary(library_path);
  if (!library.ok()) return UsageFailure(library.status(), "report", io);

  std::vector<http::RunReportData> data;
  for (uint64_t id : ids) {
    absl::StatusOr<http::RunReportData> one =
        http::FetchReportData(runs, lineage, id, nullptr);
    if (!one.ok()) {
      return ReportError(
          absl::Status(one.status().code(),
                       absl::StrCat("run ", id, ": ", one.status().message())),
          io);
    }
    data.push_back(*std::move(one));
  }
  const std::string generated = absl::FormatTime(
      "%Y-%m-%d %H:%M:%S UTC", absl::Now(), absl::UTCTimeZone());
  absl::StatusOr<std::string> page =
      http::RenderReport(data, *library, generated);
  if (!page.ok()) return ReportError(page.status(), io);

  const std::string out = args.Get("out");
  const std::string partial = out + ".partial";
  {
    std::ofstream file(partial, std::ios::binary | std::ios::trunc);
    file << *page;
    file.close();
    if (!file) {
      std::remove(partial.c_str());
      return ReportError(
          absl::PermissionDeniedError(
              absl::StrCat("cannot write ", out,
                           " (does its folder exist, and may you write it?)")),
          io);
    }
  }
  if (std::rename(partial.c_str(), out.c_str()) != 0) {
    std::remove(partial.c_str());
    return ReportError(
        absl::PermissionDeniedError(absl::StrCat("cannot write ", out)), io);
  }
  *io.out << "wrote " << out << " (" << page->size() << " bytes, "
          << data.size() << (data.size() == 1 ? " run" : " runs") << ")\n";
  return kExitOk;
}

}  // namespace skerry::cli
