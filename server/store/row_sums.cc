#include "server/store/row_sums.h"

#include <cmath>
#include <cstdint>
#include <cstring>

#include "absl/strings/str_cat.h"
#include "common/sha256.h"

namespace skerry::store {
namespace {

// One tag byte per value, then its content, so that (1, NULL) and (NULL, 1)
// or "ab","c" and "a","bc" hash differently.
uint64_t SumOf(int argc, sqlite3_value** argv) {
  Sha256 h;
  for (int i = 0; i < argc; ++i) {
    sqlite3_value* v = argv[i];
    switch (sqlite3_value_type(v)) {
      case SQLITE_NULL:
        h.Update(absl::string_view("N", 1));
        break;
      case SQLITE_INTEGER:
      case SQLITE_FLOAT: {
        const double d = sqlite3_value_double(v);
        const bool integral =
            sqlite3_value_type(v) == SQLITE_INTEGER ||
            (std::isfinite(d) && d == std::floor(d) && std::fabs(d) < 9.0e15);
        if (integral) {
          h.Update(absl::string_view("I", 1));
          h.UpdateU64(static_cast<uint64_t>(sqlite3_value_int64(v)));
        } else {
          uint64_t bits = 0;
          std::memcpy(&bits, &d, sizeof(bits));
          h.Update(absl::string_view("F", 1));
          h.UpdateU64(bits);
        }
        break;
      }
      default: {  // TEXT and BLOB alike
        const void* p = sqlite3_value_blob(v);
        const int n = sqlite3_value_bytes(v);
        h.Update(absl::string_view("B", 1));
        h.UpdateU64(static_cast<uint64_t>(n));
        if (n > 0) h.Update(absl::string_view(static_cast<const char*>(p), n));
        break;
      }
    }
  }
  const std::array<uint8_t, 32> digest = h.Finish();
  uint64_t out = 0;
  for (int i = 0; i < 8; ++i) out = (out << 8) | digest[i];
  return out;
}

void RowSum(sqlite3_context* ctx, int argc, sqlite3_value** argv) {
  sqlite3_result_int64(ctx, static_cast<sqlite3_int64>(SumOf(argc, argv)));
}

// skerry_genome_checked(sum, <kGenomeSumColumns>): 1, or an SQLITE_CORRUPT
// error whose message is kDamagedRowMarker and DamagedGenome's message.
void GenomeChecked(sqlite3_context* ctx, int argc, sqlite3_value** argv) {
  if (argc == 15 && static_cast<uint64_t>(sqlite3_value_int64(argv[0])) ==
                        SumOf(argc - 1, argv + 1)) {
    sqlite3_result_int(ctx, 1);
    return;
  }
  // Arguments 1..5 are id, run_id, island, generation, slot.
  auto at = [&](int i) { return i < argc ? sqlite3_value_int64(argv[i]) : 0; };
  const absl::Status damaged = DamagedGenome(
      at(2), static_cast<uint32_t>(at(3)), static_cast<uint32_t>(at(4)),
      static_cast<uint32_t>(at(5)), at(1));
  const std::string message =
      absl::StrCat(kDamagedRowMarker, damaged.message());
  sqlite3_result_error(ctx, message.c_str(), static_cast<int>(message.size()));
  sqlite3_result_error_code(ctx, SQLITE_CORRUPT);
}

constexpr const char* kWhatToDo =
    ": its stored content does not match its checksum, so the database is "
    "damaged. The run's genomes are not served; `skerry-coordinator --check` "
    "lists the damage, and docs/operations.md says how to restore the run "
    "from a backup";

}  // namespace

absl::Status DamagedRun(int64_t run_id) {
  return DamagedRow(run_id, "its run record");
}

absl::Status DamagedGenome(int64_t run_id, uint32_t island, uint32_t generation,
                           uint32_t slot, int64_t genome_id) {
  return DamagedRow(run_id,
                    absl::StrCat("island ", island, " generation ", generation,
                                 " slot ", slot, " (genome ", genome_id, ")"));
}

absl::Status DamagedRow(int64_t run_id, const std::string& what) {
  return absl::DataLossError(
      absl::StrCat("run ", run_id, " ", what, kWhatToDo));
}

int RegisterRowSumFunction(sqlite3* db) {
  const int rc = sqlite3_create_function_v2(
      db, "skerry_row_sum", -1, SQLITE_UTF8 | SQLITE_DETERMINISTIC, nullptr,
      &RowSum, nullptr, nullptr, nullptr);
  if (rc != SQLITE_OK) return rc;
  return sqlite3_create_function_v2(db, "skerry_genome_checked", 15,
                                    SQLITE_UTF8 | SQLITE_DETERMINISTIC, nullptr,
                                    &GenomeChecked, nullptr, nullptr, nullptr);
}

std::string SumMatches(const char* columns) {
  return absl::StrCat("(sum IS skerry_row_sum(", columns, "))");
}

}  // namespace skerry::store
