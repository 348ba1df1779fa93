// skerry-hash-bench: SHA-256 throughput of common/sha256.h (OpenSSL EVP)
// against the portable implementation it replaced (bench/sha256_portable.h),
// in the three shapes the code uses: one long message (bulk), a run digest
// (GenomeStore::RunDigest: many small fields into one hash) and row checksums
// (server/store/row_sums.cc: one short hash per row). Checks first that both
// give the same digests. Figures in docs/performance.md.
//
//   skerry-hash-bench [--megabytes N] [--rows N] [--repeat N]
#include <array>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "bench/sha256_portable.h"
#include "common/sha256.h"

namespace skerry::bench {
namespace {

struct Options {
  uint32_t megabytes = 256;
  uint32_t rows = 500000;
  uint32_t repeat = 5;
};

// Bulk: `total` bytes in 1 MiB updates.
template <typename H>
std::string Bulk(const std::string& mib, uint32_t megabytes) {
  H h;
  for (uint32_t i = 0; i < megabytes; ++i) h.Update(mib);
  return h.FinishHex();
}

// A digest: per genome 12 u32 fields, 10 genes (80 bytes) and a u64 score,
// as GenomeStore::RunDigest feeds them.
template <typename H>
std::string Digest(uint32_t rows) {
  H h;
  double genes[10];
  for (uint32_t r = 0; r < rows; ++r) {
    for (uint32_t c = 0; c < 10; ++c) h.UpdateU32(r + c);
    for (int g = 0; g < 10; ++g) genes[g] = r * 0.001 + g;
    h.UpdateU32(10);
    h.Update(std::string(reinterpret_cast<const char*>(genes), sizeof(genes)));
    h.UpdateU32(2);
    h.UpdateU64(0x3ff0000000000000ull + r);
  }
  return h.FinishHex();
}

// Row checksums: one hash per row of 8 tagged values, as row_sums.cc does.
template <typename H>
std::string RowSums(uint32_t rows) {
  uint64_t fold = 0;
  for (uint32_t r = 0; r < rows; ++r) {
    H h;
    for (uint32_t c = 0; c < 8; ++c) {
      h.Update("I");
      h.UpdateU64(uint64_t{r} * 8 + c);
    }
    const std::array<uint8_t, 32> d = h.Finish();
    uint64_t word;
    std::memcpy(&word, d.data(), sizeof(word));
    fold ^= word;
  }
  return std::to_string(fold);
}

template <typename F>
double BestSeconds(uint32_t repeat, F f, std::string* result) {
  double best = 1e30;
  for (uint32_t i = 0; i < repeat; ++i) {
    const auto start = std::chrono::steady_clock::now();
    *result = f();
    const std::chrono::duration<double> took =
        std::chrono::steady_clock::now() - start;
    if (took.count() < best) best = took.count();
  }
  return best;
}

bool ParseFlag(const char* arg, const char* name, uint32_t* out) {
  const size_t n = std::strlen(name);
  if (std::strncmp(arg, name, n) != 0 || arg[n] != '=') return false;
  return absl::SimpleAtoi(arg + n + 1, out) && *out > 0;
}

int Main(int argc, char** argv) {
  Options o;
  for (int i = 1; i < argc; ++i) {
    if (!ParseFlag(argv[i], "--megabytes", &o.megabytes) &&
        !ParseFlag(argv[i], "--rows", &o.rows) &&
        !ParseFlag(argv[i], "--repeat", &o.repeat)) {
      std::fprintf(stderr,
                   "skerry-hash-bench: unknown or bad argument \"%s\" (only "
                   "--megabytes=N, --rows=N, --repeat=N, each > 0)\n",
                   argv[i]);
      return 2;
    }
  }
  const std::string mib(1 << 20, '\x5a');
  struct Case {
    const char* name;
    double units;  // MB for bulk, rows otherwise
    const char* unit;
    std::string (*old_fn)(const Options&, const std::string&);
    std::string (*new_fn)(const Options&, const std::string&);
  };
  const Case cases[] = {
      {"bulk (1 MiB updates)", o.megabytes * 1.048576, "MB/s",
       [](const Options& op, const std::string& m) {
         return Bulk<PortableSha256>(m, op.megabytes);
       },
       [](const Options& op, const std::string& m) {
         return Bulk<Sha256>(m, op.megabytes);
       }},
      {"run digest (136 B/genome)", static_cast<double>(o.rows), "genomes/s",
       [](const Options& op, const std::string&) {
         return Digest<PortableSha256>(op.rows);
       },
       [](const Options& op, const std::string&) {
         return Digest<Sha256>(op.rows);
       }},
      {"row checksums (72 B/row)", static_cast<double>(o.rows), "rows/s",
       [](const Options& op, const std::string&) {
         return RowSums<PortableSha256>(op.rows);
       },
       [](const Options& op, const std::string&) {
         return RowSums<Sha256>(op.rows);
       }},
  };
  std::printf("%-28s %16s %16s %8s\n", "shape", "portable", "OpenSSL EVP",
              "ratio");
  for (const Case& c : cases) {
    std::string old_result, new_result;
    const double old_s = BestSeconds(
        o.repeat, [&] { return c.old_fn(o, mib); }, &old_result);
    const double new_s = BestSeconds(
        o.repeat, [&] { return c.new_fn(o, mib); }, &new_result);
    if (old_result != new_result) {
      std::fprintf(stderr, "skerry-hash-bench: %s: the digests differ\n",
                   c.name);
      return 1;
    }
    std::printf("%-28s %12.0f %-3s %12.0f %-3s %7.2fx\n", c.name,
                c.units / old_s, "", c.units / new_s, "", old_s / new_s);
    std::printf("%-28s (%s, best of %u)\n", "", c.unit, o.repeat);
  }
  return 0;
}

}  // namespace
}  // namespace skerry::bench

int main(int argc, char** argv) { return skerry::bench::Main(argc, argv); }
