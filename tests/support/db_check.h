// Test support: read a coordinator's SQLite file directly (read-only) to check
// what was really stored, independently of the coordinator's own answers.
#ifndef SKERRY_TESTS_SUPPORT_DB_CHECK_H_
#define SKERRY_TESTS_SUPPORT_DB_CHECK_H_

#include <cstdint>
#include <string>
#include <vector>

namespace skerry::testing {

struct StoredGenome {
  int64_t id = 0;
  int64_t run_id = 0;
  int island = 0;
  int generation = 0;
  int slot = 0;
  int origin = 0;
  int64_t parent_a = 0;
  int64_t parent_b = 0;
  std::string genes;  // packed
  double score = 0;
  bool has_score = false;
  int eval_state = 0;
  int attempts = 0;
};

// Every genome of the run in natural-key order (island, generation, slot).
std::vector<StoredGenome> ReadGenomes(const std::string& db, int64_t run_id);
// The first column of the first row of `sql` as text ("" when none).
std::string QueryText(const std::string& db, const std::string& sql);

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_SUPPORT_DB_CHECK_H_
