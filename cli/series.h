// `skerry submit --seeds`, `skerry series` and `skerry extend`: seed series
// (one run of a spec per seed, under one name) and the extension of ended
// runs (study.proto). A series is steered by name: `series pause|resume|stop
// NAME` acts on each of its runs through RunService, so each run's change is
// checked and audited as if made alone.
//
// Thread safety: as cli/commands.h (one command at a time per Io).
#ifndef SKERRY_CLI_SERIES_H_
#define SKERRY_CLI_SERIES_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "cli/args.h"
#include "cli/client.h"
#include "cli/commands.h"
#include "skerry/v1/study.grpc.pb.h"

namespace skerry::cli {

// The most seeds `--seeds` may name (server/api/study_service.h's bound).
inline constexpr size_t kMaxSeeds = 100;

// "1-20", "1,3,5-7": distinct seeds in the order written. InvalidArgument
// names `--seeds`, the bad item and why.
absl::StatusOr<std::vector<uint64_t>> ParseSeedList(absl::string_view text);

// The `series` and `extend` commands' table rows.
std::vector<CommandSpec> SeriesCommandSpecs();

// `skerry submit SPEC --seeds LIST [--series NAME] [--priority N]`.
int SubmitSeriesCommand(const ParsedArgs& args,
                        skerry::v1::StudyService::StubInterface& study, Io& io);
// `skerry extend RUN --generations N ...`.
int ExtendCommand(const ParsedArgs& args,
                  skerry::v1::StudyService::StubInterface& study, Io& io);
// `skerry series [list | show NAME | pause NAME | resume NAME | stop NAME]`.
int SeriesCommand(const ParsedArgs& args, RunClient& client, Io& io);

// `skerry list`: runs alone first, then each series under its name.
std::string FormatGroupedRunList(
    const std::vector<skerry::v1::RunSummary>& runs, absl::TimeZone zone);

// The runs of series `name` from `runs`, in id order.
std::vector<skerry::v1::RunSummary> SeriesRuns(
    const std::vector<skerry::v1::RunSummary>& runs, absl::string_view name);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_SERIES_H_
