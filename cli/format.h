// Text the `skerry` client prints: number formats, tables, the run summary, the
// progress line of `watch`, the champion in text and JSON.
//
// Invariant: every function is a pure function of its arguments (time zones are
// passed in), so tests hold the output to fixed strings. Lines end in "\n"
// except the progress line, which the caller redraws in place.
//
// Thread safety: pure functions, callable from any thread.
#ifndef SKERRY_CLI_FORMAT_H_
#define SKERRY_CLI_FORMAT_H_

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "skerry/v1/genome.pb.h"
#include "skerry/v1/runs.pb.h"
#include "skerry/v1/validation.pb.h"

namespace skerry::cli {

// Rows `show` prints without --all: the last ones.
inline constexpr size_t kDefaultHistoryRows = 20;

// "queued", "running", "paused", "finished", "stopped", "failed".
std::string RunStateName(skerry::v1::RunState state);
// True for finished, stopped and failed: the run will not change again.
bool IsTerminal(skerry::v1::RunState state);
// "seeded", "elite", "crossover", "mutation", "immigrant", "migrant".
std::string OriginName(skerry::v1::Origin origin);

// A score in 6 significant digits ("3.98", "1.5e-07"); "nan", "inf", "-inf".
std::string FormatScore(double score);
// Thousands separated by commas: 1234567 -> "1,234,567".
std::string FormatCount(uint64_t count);
// "2024-05-01 12:34:56" in `zone`; "-" for 0.
std::string FormatTimestamp(int64_t unix_ms, absl::TimeZone zone);

// Columns separated by two spaces, padded to the widest cell; the columns whose
// index is in `right_aligned` are right-aligned (numbers). No trailing blanks.
std::string FormatTable(const std::vector<std::string>& header,
                        const std::vector<std::vector<std::string>>& rows,
                        const std::vector<size_t>& right_aligned);

// `skerry list`: one row per run.
std::string FormatRunList(const std::vector<skerry::v1::RunSummary>& runs,
                          absl::TimeZone zone);

// A validation's outcome in words: "score 612 on 625 held-out cases",
// "pending", "failed after 3 attempts: ...".
std::string FormatValidationState(const skerry::v1::Validation& validation);

// The summary block of `skerry show`.
std::string FormatRunDetails(const skerry::v1::GetRunResponse& run);
// The failed genomes of a run, and why ("" when none failed).
std::string FormatFailedGenomes(const skerry::v1::GetRunResponse& run);

// Per generation over all islands: the best score (by `objective`), the
// validation score of that champion (a column shown only when some generation
// has one), the mean of the islands' means, and the islands that reported it.
// Only the last `max_rows` generations (0: all), with a line saying how many
// were left out.
std::string FormatGenerationTable(
    const std::vector<skerry::v1::GenerationStats>& history,
    skerry::v1::Objective objective, size_t max_rows);

// `skerry history`: one row per (island, generation), as stored; a VALIDATION
// column when some champion has a validation score.
std::string FormatHistory(
    const std::vector<skerry::v1::GenerationStats>& history);

// One line of `watch`, without a newline. `max_generations` 0: unknown.
std::string FormatProgressLine(const skerry::v1::RunSummary& run,
                               uint32_t max_generations);

// What `watch` prints when the run has ended.
std::string FormatFinalState(const skerry::v1::RunSummary& run);

// `skerry champion`: id, natural key, origin, score and genes.
std::string FormatChampion(const skerry::v1::Genome& genome,
                           absl::string_view spec_name);

// `skerry champion --json`: {"runId": "...", "specName": "...", "genome":
// {...}} with the genome in protobuf's JSON mapping (64-bit integers as
// strings).
absl::StatusOr<std::string> ChampionJson(const skerry::v1::Genome& genome,
                                         uint64_t run_id,
                                         absl::string_view spec_name);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_FORMAT_H_
