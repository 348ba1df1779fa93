#include "common/evaluator.h"

#include <cmath>
#include <utility>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "common/pole.h"
#include "common/quote.h"

namespace skerry {
namespace {

// Definitions and domains: Jamil & Yang 2013, "A literature survey of benchmark
// functions for global optimisation problems".
constexpr double kPi = 3.14159265358979323846;
constexpr double kE = 2.71828182845904523536;

double Sphere(absl::Span<const double> x) {
  double sum = 0.0;
  for (double v : x) sum += v * v;
  return sum;
}

double Rastrigin(absl::Span<const double> x) {
  double sum = 10.0 * static_cast<double>(x.size());
  for (double v : x) sum += v * v - 10.0 * std::cos(2.0 * kPi * v);
  return sum;
}

double Rosenbrock(absl::Span<const double> x) {
  double sum = 0.0;
  for (size_t i = 0; i + 1 < x.size(); ++i) {
    const double a = x[i + 1] - x[i] * x[i];
    const double b = 1.0 - x[i];
    sum += 100.0 * a * a + b * b;
  }
  return sum;
}

double Ackley(absl::Span<const double> x) {
  const double d = static_cast<double>(x.size());
  double squares = 0.0;
  double cosines = 0.0;
  for (double v : x) {
    squares += v * v;
    cosines += std::cos(2.0 * kPi * v);
  }
  return -20.0 * std::exp(-0.2 * std::sqrt(squares / d)) -
         std::exp(cosines / d) + 20.0 + kE;
}

double Griewank(absl::Span<const double> x) {
  double sum = 0.0;
  double product = 1.0;
  for (size_t i = 0; i < x.size(); ++i) {
    sum += x[i] * x[i] / 4000.0;
    product *= std::cos(x[i] / std::sqrt(static_cast<double>(i + 1)));
  }
  return sum - product + 1.0;
}

// Schwefel 2.26, shifted so the minimum is (nearly) 0.
double Schwefel(absl::Span<const double> x) {
  double sum = 418.9829 * static_cast<double>(x.size());
  for (double v : x) sum -= v * std::sin(std::sqrt(std::fabs(v)));
  return sum;
}

double StyblinskiTang(absl::Span<const double> x) {
  double sum = 0.0;
  for (double v : x) {
    const double v2 = v * v;
    sum += v2 * v2 - 16.0 * v2 + 5.0 * v;
  }
  return 0.5 * sum;
}

// Always 0: lets benchmarks measure the system rather than the function.
double Zero(absl::Span<const double>) { return 0.0; }

constexpr BuiltinFunction kBuiltins[] = {
    {"sphere", -5.12, 5.12, &Sphere},
    {"rastrigin", -5.12, 5.12, &Rastrigin},
    {"rosenbrock", -5.0, 10.0, &Rosenbrock},
    {"ackley", -32.768, 32.768, &Ackley},
    {"griewank", -600.0, 600.0, &Griewank},
    {"schwefel", -500.0, 500.0, &Schwefel},
    {"styblinski_tang", -5.0, 5.0, &StyblinskiTang},
    {"zero", -1.0, 1.0, &Zero},
};

// The coordinate every gene of the function's global minimiser shares, or NaN
// when it has none (zero: every point is a minimiser).
// Sphere, Rastrigin, Ackley, Griewank: 0; Rosenbrock: 1 (Jamil & Yang 2013).
// Schwefel 2.26: 420.968746; Styblinski-Tang: -2.903534028 (REFERENCES.md,
// derived from the definitions: the root of the one-dimensional derivative).
double OptimumCoordinate(absl::string_view name) {
  if (name == "rosenbrock") return 1.0;
  if (name == "schwefel") return 420.968746;
  if (name == "styblinski_tang") return -2.903534028;
  if (name == "zero") return std::nan("");
  return 0.0;
}

class BuiltinEvaluator : public Evaluator {
 public:
  explicit BuiltinEvaluator(const BuiltinFunction* function)
      : function_(function), optimum_(OptimumCoordinate(function->name)) {}

  const std::map<std::string, double>& LastMetrics() const override {
    return metrics_;
  }

  absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                  uint64_t /*seed*/) override {
    if (genes.empty()) {
      return absl::InvalidArgumentError(
          absl::StrCat(function_->name, ": genome has no genes"));
    }
    for (size_t i = 0; i < genes.size(); ++i) {
      if (!std::isfinite(genes[i])) {
        return absl::InvalidArgumentError(
            absl::StrCat(function_->name, ": gene ", i, " is not finite (got ",
                         genes[i], ")"));
      }
    }
    // How far the genes are from the known minimiser (a good score far from
    // it is a local optimum), and how many left the usual domain (Schwefel's
    // function, for one, scores better than its minimum outside it).
    metrics_.clear();
    // `zero` measures the system, not a function: no metric rows to store.
    if (std::isnan(optimum_)) return function_->fn(genes);
    double squares = 0.0;
    double outside = 0.0;
    for (double g : genes) {
      squares += (g - optimum_) * (g - optimum_);
      if (g < function_->lower || g > function_->upper) outside += 1.0;
    }
    metrics_["distance_to_optimum"] = std::sqrt(squares);
    metrics_["genes_outside_domain"] = outside;
    return function_->fn(genes);
  }

 private:
  const BuiltinFunction* function_;
  const double optimum_;
  std::map<std::string, double> metrics_;
};

}  // namespace

const BuiltinFunction* FindBuiltin(absl::string_view name) {
  for (const BuiltinFunction& f : kBuiltins) {
    if (name == f.name) return &f;
  }
  return nullptr;
}

std::vector<std::string> BuiltinNames() {
  std::vector<std::string> names;
  for (const BuiltinFunction& f : kBuiltins) names.emplace_back(f.name);
  return names;
}

const std::map<std::string, double>& Evaluator::LastMetrics() const {
  static const auto* none = new std::map<std::string, double>();
  return *none;
}

absl::StatusOr<double> Evaluator::EvaluateCase(absl::Span<const double>,
                                               const std::string& case_name,
                                               uint64_t) {
  return absl::FailedPreconditionError(
      absl::StrCat("validation case \"", case_name,
                   "\": this evaluator has no held-out validation cases"));
}

absl::StatusOr<std::unique_ptr<Evaluator>> MakeEvaluator(
    const skerry::v1::EvaluatorSpec& spec) {
  if (pole::IsPoleEvaluator(spec)) return pole::MakePoleEvaluator(spec);
  if (spec.kind_case() == skerry::v1::EvaluatorSpec::kExternal) {
    return absl::FailedPreconditionError(
        "evaluator.external: external evaluators run in a child process of "
        "the worker, not in-process");
  }
  const std::string& name = spec.builtin().function();  // "" when unset
  const BuiltinFunction* function =
      spec.kind_case() == skerry::v1::EvaluatorSpec::kBuiltin
          ? FindBuiltin(name)
          : nullptr;
  if (function == nullptr && name.empty()) {
    return absl::InvalidArgumentError(absl::StrCat(
        spec.kind_case() == skerry::v1::EvaluatorSpec::kBuiltin
            ? "evaluator.builtin.function: not set"
            : "evaluator: missing",
        "; name a built-in function, for example evaluator { builtin { "
        "function: \"sphere\" } } (allowed: ",
        absl::StrJoin(BuiltinNames(), ", "), ")"));
  }
  if (function == nullptr) {
    return absl::InvalidArgumentError(absl::StrCat(
        "evaluator.builtin.function: unknown function ", QuotePrefix(name),
        " (allowed: ", absl::StrJoin(BuiltinNames(), ", "), ")"));
  }
  return std::unique_ptr<Evaluator>(new BuiltinEvaluator(function));
}

}  // namespace skerry
