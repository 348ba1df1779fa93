// Helpers shared by the benchmark programs: scratch database files and
// numeric flags.
#ifndef SKERRY_BENCH_BENCH_UTIL_H_
#define SKERRY_BENCH_BENCH_UTIL_H_

#include <unistd.h>

#include <cstdio>
#include <string>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"

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
