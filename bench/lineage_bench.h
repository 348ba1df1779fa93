// Internal to skerry-lineage-bench (bench/lineage_bench.cc): its flags, the
// 10M-genome store it builds (lineage_bench_store.cc) and the bare recursive
// queries it compares the service with.
//
// Thread safety: none; one thread.
#ifndef SKERRY_BENCH_LINEAGE_BENCH_H_
#define SKERRY_BENCH_LINEAGE_BENCH_H_

#include <chrono>
#include <cstdint>
#include <string>

#include "absl/status/status.h"
#include "server/store/sqlite.h"

namespace skerry::lineage_bench {

struct Flags {
  std::string db = "/tmp/skerry-lineage-bench.db";
  uint32_t generations = 1000, islands = 10, population = 1000, repeat = 5;
  bool reuse = false, keep = false;
  std::string coordinator;
};

// Seconds since `since`.
double Seconds(std::chrono::steady_clock::time_point since);
// Prints what failed and exits with status 1.
[[noreturn]] void Die(const absl::Status& s, const char* what);

// Breeds the whole run with the engine's operators and writes it to f.db in
// the real schema, replacing the file.
void BuildStore(const Flags& f);

// The bare query: the smallest recursive CTE that finds the ancestors of `id`
// no older than `oldest` (ids only); returns their number.
uint64_t BareAncestors(store::Connection* conn, int64_t id, uint32_t oldest);
// The same recursive CTE with every column of the service's answer.
uint64_t BareWideAncestors(store::Connection* conn, int64_t id,
                           uint32_t oldest);

}  // namespace skerry::lineage_bench

#endif  // SKERRY_BENCH_LINEAGE_BENCH_H_
