// `skerry report RUN [RUN...] --out FILE.html`: one self-contained HTML page
// (server/http/report_page.h) with the charts and tables of one or more runs;
// several runs overlay on the same charts. The page opens offline: the
// charting library (Debian's libjs-chart.js) is inlined into it.
//
// Invariant: as for every command (cli/commands.h), failures are one line on
// io.err starting "skerry: " and an exit code; the output file is written
// whole (to a temporary name, then renamed) or not at all.
// Thread safety: one command at a time per Io.
#ifndef SKERRY_CLI_REPORT_H_
#define SKERRY_CLI_REPORT_H_

#include <vector>

#include "cli/args.h"
#include "cli/commands.h"
#include "skerry/v1/lineage.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"

namespace skerry::cli {

// At most this many runs in one report: one colour each from the palette.
inline constexpr size_t kMaxReportRuns = 8;

std::vector<CommandSpec> ReportCommandSpecs();

int ReportCommand(const ParsedArgs& args,
                  skerry::v1::RunService::StubInterface& runs,
                  skerry::v1::LineageService::StubInterface& lineage, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_REPORT_H_
