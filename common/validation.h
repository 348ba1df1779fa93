// Held-out validation: the cases a run declares in EvaluatorSpec.validation,
// their seeds, how their scores combine, and the check of the spec.
//
// Cases:
//   pole evaluators   "start-0" ... "start-624", the generalisation starts of
//                     common/pole.h; a case scores 1 when the controller
//                     balances for 1000 steps from that start, else 0; the
//                     validation score is their sum (starts balanced).
//   external          each name of `cases`, with the seed of stream
//                     (run seed, island 0, generation 0, kValidation, slot i)
//                     for the i-th case; then each `seeds` entry n as case
//                     "seed-<n>" with seed n. The score is `aggregate` (mean
//                     by default) of the cases' scores.
// Built-in functions have no held-out cases: they are deterministic and have
// no situations to generalise over.
//
// A case's seed depends on the run's seed alone, never on the genome, so a
// validation is a pure function of (genes, run): copies of the same genes get
// the same validation score.
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_VALIDATION_H_
#define SKERRY_COMMON_VALIDATION_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "common/evaluator.h"
#include "skerry/v1/spec.pb.h"

namespace skerry {

constexpr size_t kMaxValidationCases = 10000;
constexpr size_t kMaxCaseNameBytes = 200;

struct ValidationCase {
  std::string name;
  uint64_t seed = 0;
};

bool HasValidation(const skerry::v1::EvaluatorSpec& spec);
// Fills champions (EVERY_GENERATION) and aggregate (MEAN) when unset.
void NormalizeValidation(skerry::v1::EvaluatorSpec* spec);
// InvalidArgument naming the field (evaluator.validation....): cases for an
// evaluator that cannot run them, none at all, empty, duplicate or overlong
// names, too many cases, unknown enum values.
absl::Status CheckValidation(const skerry::v1::EvaluatorSpec& spec);

// How many cases ValidationCases returns, without making them.
uint32_t ValidationCaseCount(const skerry::v1::EvaluatorSpec& spec);
// The run's cases in the order above. REQUIRES: CheckValidation passed.
std::vector<ValidationCase> ValidationCases(
    const skerry::v1::EvaluatorSpec& spec, uint64_t run_seed);

// Runs every case on `evaluator` and combines the scores. A failing case fails
// the validation, naming the case.
absl::StatusOr<double> ValidateGenes(Evaluator& evaluator,
                                     const skerry::v1::EvaluatorSpec& spec,
                                     absl::Span<const double> genes,
                                     uint64_t run_seed);

}  // namespace skerry

#endif  // SKERRY_COMMON_VALIDATION_H_
