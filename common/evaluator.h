// The evaluator interface and the built-in benchmark functions.
//
// An Evaluator turns genes (and an evaluation seed, for stochastic evaluators)
// into a score. Workers create one Evaluator per evaluation thread, so an
// implementation need not be thread-safe; Evaluate may be called many times on
// one instance.
#ifndef SKERRY_COMMON_EVALUATOR_H_
#define SKERRY_COMMON_EVALUATOR_H_

#include <cstdint>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"
#include "skerry/v1/spec.pb.h"

namespace skerry {

class Evaluator {
 public:
  virtual ~Evaluator() = default;
  // A non-OK status is a failed attempt; its message is stored with the genome.
  virtual absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                          uint64_t seed) = 0;
  // The score of one held-out validation case (common/validation.h names
  // them). FailedPrecondition by default: most evaluators have none.
  virtual absl::StatusOr<double> EvaluateCase(absl::Span<const double> genes,
                                              const std::string& case_name,
                                              uint64_t seed);
  // The named side measurements of the last successful Evaluate (bounded by
  // common/metric_bounds.h), reported with its score and stored per genome.
  // Empty by default. Built-in functions: distance_to_optimum and
  // genes_outside_domain; pole balancers: steps_balanced,
  // max_pole_angle_deg, max_cart_travel_m (docs/spec-reference.md).
  virtual const std::map<std::string, double>& LastMetrics() const;
};

// A built-in benchmark function: its name as written in a spec, its usual
// domain (used as the default bounds), its known minimum, and the function
// itself.
struct BuiltinFunction {
  const char* name;
  double lower;
  double upper;
  double (*fn)(absl::Span<const double> x);
};

// nullptr when there is no such function.
const BuiltinFunction* FindBuiltin(absl::string_view name);
// All built-in names, in a stable order.
std::vector<std::string> BuiltinNames();

// Makes the evaluator an EvaluatorSpec describes. InvalidArgument names the
// field.
absl::StatusOr<std::unique_ptr<Evaluator>> MakeEvaluator(
    const skerry::v1::EvaluatorSpec& spec);

}  // namespace skerry

#endif  // SKERRY_COMMON_EVALUATOR_H_
