// Seed series in the database (schema version 9): the migration that adds
// them and what `--check` verifies of them. The RunStore methods that write
// and read them (run_store.h: CreateSeries, SeriesOfRuns, ExtendRun...) live in
// series_store.cc too.
//
// Invariant: every row of `series` and `series_runs` carries `sum`, the
// checksum of its other columns (row_sums.h) kept by triggers in the same
// statement as the row; every member names a run that exists.
//
// Thread safety: functions only.
#ifndef SKERRY_SERVER_STORE_SERIES_STORE_H_
#define SKERRY_SERVER_STORE_SERIES_STORE_H_

#include <string>
#include <vector>

#include "absl/status/status.h"
#include "server/store/sqlite.h"

namespace skerry::store {

// Column lists hashed per table, in order; never reorder (row_sums.h).
inline constexpr const char* kSeriesSumColumns =
    "id, name, owner, created_ms, request_id";
inline constexpr const char* kSeriesRunSumColumns =
    "run_id, series_id, position, seed";

// The migration from version 8 to 9, whole: the tables, their index and their
// checksum triggers. Self-contained so that it can move to another version
// number without touching anything else.
std::string SchemaSeries();

// `--check`: appends a line per series row that does not match its checksum
// and per member whose run is missing. Nothing when the database has no
// series tables (before version 9).
absl::Status CheckSeriesRows(Connection* conn,
                             std::vector<std::string>* problems);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_SERIES_STORE_H_
