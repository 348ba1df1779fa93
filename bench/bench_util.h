// Helpers shared by the benchmark programs: scratch database files, a
// coordinator on loopback, and numeric flags.
#ifndef SKERRY_BENCH_BENCH_UTIL_H_
#define SKERRY_BENCH_BENCH_UTIL_H_

#include <unistd.h>

#include <cstdio>
#include <memory>
#include <optional>
#include <string>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "server/coordinator.h"

namespace skerry::bench {

// Deletes a SQLite database and its WAL and shared-memory files.
inline void RemoveDb(const std::string& path) {
  for (const char* suffix : {"", "-wal", "-shm"}) {
    unlink((path + suffix).c_str());
  }
}

// A fresh path for a scratch database in `dir`, unique to this process.
inline std::string TempDb(const std::string& dir, const char* name) {
  const std::string path =
      absl::StrCat(dir, "/skerry-bench-", getpid(), "-", name, ".db");
  RemoveDb(path);
  return path;
}

// A real coordinator on a free loopback port with the database at `db_path`.
struct Loopback {
  std::unique_ptr<server::Coordinator> coordinator;
  std::string address;  // 127.0.0.1:PORT
};
// Prints why on stderr and returns nothing when it cannot start.
inline std::optional<Loopback> StartLoopback(const std::string& db_path) {
  server::CoordinatorOptions co;
  co.db_path = db_path;
  co.listen_address = "127.0.0.1:0";
  absl::StatusOr<std::unique_ptr<server::Coordinator>> c =
      server::Coordinator::Start(co);
  if (!c.ok()) {
    std::fprintf(stderr, "coordinator: %s\n", c.status().ToString().c_str());
    return std::nullopt;
  }
  Loopback out;
  out.address = absl::StrCat("127.0.0.1:", (*c)->port());
  out.coordinator = *std::move(c);
  return out;
}

// Parses a whole number in [lo, hi]; prints what is wrong and returns false.
inline bool ParseInt(const char* flag, const char* text, int lo, int hi,
                     int* out) {
  if (!absl::SimpleAtoi(text, out) || *out < lo || *out > hi) {
    std::fprintf(stderr,
                 "%s: expected a whole number from %d to %d, got \"%s\"\n",
                 flag, lo, hi, text);
    return false;
  }
  return true;
}

}  // namespace skerry::bench

#endif  // SKERRY_BENCH_BENCH_UTIL_H_
