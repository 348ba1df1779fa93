#include "common/validation.h"

#include <cmath>
#include <set>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/episodes.h"
#include "common/pole.h"
#include "common/random.h"

namespace skerry {
namespace {

using skerry::v1::EvaluatorSpec;

absl::Status Bad(absl::string_view field, absl::string_view what) {
  return absl::InvalidArgumentError(
      absl::StrCat("evaluator.validation", field, ": ", what));
}

absl::Status CheckName(const std::string& name, int index) {
  const std::string field = absl::StrCat(".cases[", index, "]");
  if (name.empty()) return Bad(field, "a case name must not be empty");
  if (name.size() > kMaxCaseNameBytes) {
    return Bad(field, absl::StrCat("a case name is at most ", kMaxCaseNameBytes,
                                   " bytes (got ", name.size(), ")"));
  }
  for (unsigned char c : name) {
    if (c < 0x20 || c == 0x7f) {
      return Bad(field, "a case name must not hold control characters");
    }
  }
  if (name.rfind("seed-", 0) == 0) {
    return Bad(field, absl::StrCat("\"", name,
                                   "\": names starting with \"seed-\" are kept "
                                   "for seeded cases (use `seeds`)"));
  }
  return absl::OkStatus();
}

}  // namespace

bool HasValidation(const EvaluatorSpec& spec) { return spec.has_validation(); }

void NormalizeValidation(EvaluatorSpec* spec) {
  if (!spec->has_validation()) return;
  auto* v = spec->mutable_validation();
  if (v->champions() == skerry::v1::CHAMPION_VALIDATION_UNSPECIFIED) {
    v->set_champions(skerry::v1::EVERY_GENERATION);
  }
  if (v->aggregate() == skerry::v1::AGGREGATE_UNSPECIFIED) {
    v->set_aggregate(skerry::v1::AGGREGATE_MEAN);
  }
}

absl::Status CheckValidation(const EvaluatorSpec& spec) {
  if (!spec.has_validation()) return absl::OkStatus();
  const auto& v = spec.validation();
  if (!skerry::v1::ChampionValidation_IsValid(v.champions()) ||
      v.champions() == skerry::v1::CHAMPION_VALIDATION_UNSPECIFIED) {
    return Bad(".champions",
               absl::StrCat("unknown value ", static_cast<int>(v.champions()),
                            " (allowed: EVERY_GENERATION, NEW_BEST, "
                            "ON_REQUEST)"));
  }
  if (!skerry::v1::EpisodeAggregate_IsValid(v.aggregate()) ||
      v.aggregate() == skerry::v1::AGGREGATE_UNSPECIFIED) {
    return Bad(".aggregate",
               absl::StrCat("unknown value ", static_cast<int>(v.aggregate()),
                            " (allowed: AGGREGATE_MEAN, AGGREGATE_MIN, "
                            "AGGREGATE_MEDIAN)"));
  }
  if (pole::IsPoleEvaluator(spec)) {
    if (!v.cases().empty() || !v.seeds().empty()) {
      return Bad(v.cases().empty() ? ".seeds" : ".cases",
                 "pole evaluators validate on the generalisation starts only "
                 "(set generalisation: true, no cases or seeds)");
    }
    if (!v.generalisation()) {
      return Bad(".generalisation",
                 "a pole evaluator's held-out cases are the generalisation "
                 "starts: set generalisation: true");
    }
    return absl::OkStatus();
  }
  if (spec.kind_case() != EvaluatorSpec::kExternal) {
    return Bad("",
               "built-in functions have no held-out cases (validation "
               "needs a pole evaluator or an external program)");
  }
  if (v.generalisation()) {
    return Bad(".generalisation",
               "the generalisation starts belong to the pole evaluators; an "
               "external program names its cases in `cases` or `seeds`");
  }
  const size_t total = static_cast<size_t>(v.cases_size() + v.seeds_size());
  if (total == 0) {
    return Bad("",
               "no cases: give `cases` (names) or `seeds`, or leave "
               "validation out");
  }
  if (total > kMaxValidationCases) {
    return Bad("", absl::StrCat("at most ", kMaxValidationCases, " cases (got ",
                                total, ")"));
  }
  std::set<std::string> seen;
  for (int i = 0; i < v.cases_size(); ++i) {
    if (absl::Status s = CheckName(v.cases(i), i); !s.ok()) return s;
    if (!seen.insert(v.cases(i)).second) {
      return Bad(absl::StrCat(".cases[", i, "]"),
                 absl::StrCat("\"", v.cases(i), "\" is listed twice"));
    }
  }
  std::set<uint64_t> seeds;
  for (int i = 0; i < v.seeds_size(); ++i) {
    if (!seeds.insert(v.seeds(i)).second) {
      return Bad(absl::StrCat(".seeds[", i, "]"),
                 absl::StrCat(v.seeds(i), " is listed twice"));
    }
  }
  return absl::OkStatus();
}

uint32_t ValidationCaseCount(const EvaluatorSpec& spec) {
  if (!spec.has_validation()) return 0;
  if (pole::IsPoleEvaluator(spec)) return pole::kGeneralisationStarts;
  return static_cast<uint32_t>(spec.validation().cases_size() +
                               spec.validation().seeds_size());
}

std::vector<ValidationCase> ValidationCases(const EvaluatorSpec& spec,
                                            uint64_t run_seed) {
  std::vector<ValidationCase> out;
  if (!spec.has_validation()) return out;
  const auto& v = spec.validation();
  if (pole::IsPoleEvaluator(spec)) {
    for (uint32_t i = 0; i < pole::kGeneralisationStarts; ++i) {
      out.push_back({absl::StrCat("start-", i), 0});
    }
    return out;
  }
  for (int i = 0; i < v.cases_size(); ++i) {
    RandomStream stream(
        {run_seed, 0, 0, StreamPurpose::kValidation, static_cast<uint32_t>(i)});
    out.push_back({v.cases(i), stream.NextU64()});
  }
  for (uint64_t seed : v.seeds()) {
    out.push_back({absl::StrCat("seed-", seed), seed});
  }
  return out;
}

absl::StatusOr<double> ValidateGenes(Evaluator& evaluator,
                                     const EvaluatorSpec& spec,
                                     absl::Span<const double> genes,
                                     uint64_t run_seed) {
  if (!spec.has_validation()) {
    return absl::FailedPreconditionError(
        "the run declares no validation cases (evaluator.validation)");
  }
  const std::vector<ValidationCase> cases = ValidationCases(spec, run_seed);
  std::vector<double> scores;
  scores.reserve(cases.size());
  for (const ValidationCase& c : cases) {
    absl::StatusOr<double> score =
        evaluator.EvaluateCase(genes, c.name, c.seed);
    if (!score.ok()) {
      return absl::Status(score.status().code(),
                          absl::StrCat("validation case \"", c.name,
                                       "\": ", score.status().message()));
    }
    if (!std::isfinite(*score)) {
      return absl::InvalidArgumentError(
          absl::StrCat("validation case \"", c.name,
                       "\": the score is not a finite number (", *score, ")"));
    }
    scores.push_back(*score);
  }
  if (scores.empty()) return absl::InternalError("no validation cases");
  if (pole::IsPoleEvaluator(spec)) {
    double sum = 0;
    for (double s : scores) sum += s;
    return sum;
  }
  return AggregateEpisodes(spec.validation().aggregate(), std::move(scores));
}

}  // namespace skerry
