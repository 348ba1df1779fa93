#include "common/strategy_spec.h"

#include <algorithm>
#include <cmath>
#include <string>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"

namespace skerry {
namespace {

using skerry::v1::RunSpec;
using skerry::v1::StrategySpec;

constexpr uint32_t kMinCmaPopulation = 4;
constexpr uint32_t kMaxCmaPopulation = 100000;
constexpr double kMaxSigma = 1e6;
constexpr uint64_t kMaxCovarianceEntries = uint64_t{1} << 26;
constexpr uint32_t kDefaultIpopFactor = 2;  // Auger & Hansen 2005
constexpr uint32_t kMaxIpopFactor = 10;
// BIPOP-CMA-ES (Hansen 2009, GECCO BBOB workshop) lets the population grow
// through nine doublings (from memory).
constexpr uint32_t kDefaultIpopIncreases = 9;
constexpr uint32_t kMaxIpopIncreases = 30;
constexpr uint32_t kMinNaturalEsPopulation = 2;

const char* FieldOf(const RunSpec& spec) {
  switch (spec.strategy().kind_case()) {
    case StrategySpec::kSepCmaEs:
      return "strategy.sep_cma_es";
    case StrategySpec::kNaturalEs:
      return "strategy.natural_es";
    default:
      return "strategy.cma_es";
  }
}

// Defaults scaled by the initial range's width, as CMA-ES's sigma is: with
// width 2 ([-1, 1], network weights) sigma 0.04 and learning rate 0.02, near
// Salimans et al. 2017's sigma 0.02 and Adam step 0.01 for networks (from
// memory). Adam's betas and epsilon: Kingma & Ba 2014, Algorithm 1.
void NormalizeNaturalEs(const RunSpec& spec, skerry::v1::NaturalEsSpec* es) {
  if (es->population_size() == 0) {
    es->set_population_size(DefaultNaturalEsPopulation(spec.genome_length()));
  }
  const double width = spec.init_upper() - spec.init_lower();
  const bool scaled = width > 0 && std::isfinite(width);
  if (!es->has_sigma() && scaled) es->set_sigma(0.02 * width);
  if (!es->has_learning_rate() && scaled) es->set_learning_rate(0.01 * width);
  if (!es->has_beta1()) es->set_beta1(0.9);
  if (!es->has_beta2()) es->set_beta2(0.999);
  if (!es->has_epsilon()) es->set_epsilon(1e-8);
}

// A value in (low, high], [low, high) or [low, high], by the flags.
absl::Status CheckEsRange(const std::string& field, double v, double low,
                          bool low_open, double high, bool high_open) {
  const bool ok = std::isfinite(v) && (low_open ? v > low : v >= low) &&
                  (high_open ? v < high : v <= high);
  if (ok) return absl::OkStatus();
  return absl::InvalidArgumentError(
      absl::StrCat("strategy.natural_es.", field,
                   ": out of range (allowed: ", low_open ? "(" : "[", low, ", ",
                   high, high_open ? ")" : "]", "; got ", v, ")"));
}

absl::Status ValidateNaturalEs(const RunSpec& spec) {
  const skerry::v1::NaturalEsSpec& es = spec.strategy().natural_es();
  if (es.population_size() < kMinNaturalEsPopulation ||
      es.population_size() > kMaxCmaPopulation) {
    return absl::InvalidArgumentError(absl::StrCat(
        "strategy.natural_es.population_size: out of range (allowed: [",
        kMinNaturalEsPopulation, ", ", kMaxCmaPopulation, "]; got ",
        es.population_size(), ")"));
  }
  if (es.population_size() % 2 != 0) {
    return absl::InvalidArgumentError(absl::StrCat(
        "strategy.natural_es.population_size: must be even (samples come in "
        "mirrored pairs); got ",
        es.population_size()));
  }
  SKERRY_RETURN_IF_ERROR(
      CheckEsRange("sigma", es.sigma(), 0, true, kMaxSigma, false));
  SKERRY_RETURN_IF_ERROR(CheckEsRange("learning_rate", es.learning_rate(), 0,
                                      true, kMaxSigma, false));
  SKERRY_RETURN_IF_ERROR(CheckEsRange("beta1", es.beta1(), 0, false, 1, true));
  SKERRY_RETURN_IF_ERROR(CheckEsRange("beta2", es.beta2(), 0, false, 1, true));
  SKERRY_RETURN_IF_ERROR(
      CheckEsRange("epsilon", es.epsilon(), 0, true, 1, false));
  SKERRY_RETURN_IF_ERROR(CheckEsRange("weight_decay", es.weight_decay(), 0,
                                      false, kMaxSigma, false));
  if (es.has_sigma_decay()) {
    SKERRY_RETURN_IF_ERROR(
        CheckEsRange("sigma_decay", es.sigma_decay(), 0, true, 1, false));
  }
  return CheckEsRange("sigma_min", es.sigma_min(), 0, false, es.sigma(), false);
}

}  // namespace

StrategyKind StrategyOf(const RunSpec& spec) {
  switch (spec.strategy().kind_case()) {
    case StrategySpec::kCmaEs:
      return StrategyKind::kCmaEs;
    case StrategySpec::kSepCmaEs:
      return StrategyKind::kSepCmaEs;
    case StrategySpec::kNaturalEs:
      return StrategyKind::kNaturalEs;
    default:
      return StrategyKind::kGa;
  }
}

const skerry::v1::CmaEsSpec& CmaSpecOf(const RunSpec& spec) {
  return spec.strategy().kind_case() == StrategySpec::kSepCmaEs
             ? spec.strategy().sep_cma_es()
             : spec.strategy().cma_es();
}

const skerry::v1::NaturalEsSpec& NaturalEsSpecOf(const RunSpec& spec) {
  return spec.strategy().natural_es();
}

uint32_t EsPopulation(const RunSpec& spec) {
  return StrategyOf(spec) == StrategyKind::kNaturalEs
             ? NaturalEsSpecOf(spec).population_size()
             : CmaSpecOf(spec).population_size();
}

uint32_t DefaultNaturalEsPopulation(uint32_t genome_length) {
  return 2 * DefaultCmaPopulation(genome_length);
}

uint32_t DefaultCmaPopulation(uint32_t genome_length) {
  const double n = genome_length < 1 ? 1 : genome_length;
  return 4 + static_cast<uint32_t>(std::floor(3 * std::log(n)));
}

bool HasDistributionGenomes(const RunSpec& spec) {
  return StrategyOf(spec) != StrategyKind::kGa &&
         spec.strategy().distribution_genomes();
}

void KeepGenomeLayout(const RunSpec& stored, RunSpec* spec) {
  if (StrategyOf(stored) != StrategyKind::kGa &&
      !stored.strategy().has_distribution_genomes() &&
      !spec->strategy().has_distribution_genomes()) {
    spec->mutable_strategy()->set_distribution_genomes(false);
  }
}

void NormalizeStrategy(RunSpec* spec) {
  StrategySpec* st = spec->mutable_strategy();
  if (st->kind_case() == StrategySpec::kGa && !spec->has_ga()) {
    *spec->mutable_ga() = st->ga();
    st->clear_kind();
  }
  if (st->kind_case() == StrategySpec::KIND_NOT_SET) {
    // distribution_genomes without a strategy is refused by ValidateStrategy.
    if (!st->has_distribution_genomes()) spec->clear_strategy();
    return;
  }
  if (st->kind_case() == StrategySpec::kGa) return;  // both set: refused later
  if (!st->has_distribution_genomes()) st->set_distribution_genomes(true);
  if (st->kind_case() == StrategySpec::kNaturalEs) {
    NormalizeNaturalEs(*spec, st->mutable_natural_es());
    return;
  }
  skerry::v1::CmaEsSpec* cma = st->kind_case() == StrategySpec::kSepCmaEs
                                   ? st->mutable_sep_cma_es()
                                   : st->mutable_cma_es();
  if (cma->population_size() == 0) {
    cma->set_population_size(DefaultCmaPopulation(spec->genome_length()));
  }
  if (cma->has_ipop()) {
    skerry::v1::IpopSpec* ipop = cma->mutable_ipop();
    if (ipop->increase_factor() == 0) {
      ipop->set_increase_factor(kDefaultIpopFactor);
    }
    if (!ipop->has_max_increases()) {
      ipop->set_max_increases(kDefaultIpopIncreases);
    }
  }
  if (!cma->has_sigma()) {
    // Tutorial (Hansen 2016), Appendix A: with the optimum presumed in
    // [a, b]^n, start uniformly in the box with sigma = 0.3 (b - a).
    const double width = spec->init_upper() - spec->init_lower();
    if (width > 0 && std::isfinite(width)) cma->set_sigma(0.3 * width);
  }
}

absl::Status ValidateStrategy(const RunSpec& spec) {
  if (spec.strategy().kind_case() == StrategySpec::kGa) {
    return absl::InvalidArgumentError(
        "strategy.ga: the GA is set twice, here and as the top-level ga; set "
        "one of them");
  }
  if (StrategyOf(spec) == StrategyKind::kGa) {
    if (spec.strategy().has_distribution_genomes()) {
      return absl::InvalidArgumentError(
          "strategy.distribution_genomes: for the evolution strategies "
          "(cma_es, sep_cma_es, natural_es); the GA has no search "
          "distribution, remove it");
    }
    return absl::OkStatus();
  }
  const std::string field = FieldOf(spec);
  if (spec.has_ga()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "ga: set beside ", field, "; a run has one strategy, remove ga"));
  }
  if (spec.islands().population_sizes_size() > 0) {
    return absl::InvalidArgumentError(absl::StrCat(
        "islands.population_sizes: per-island sizes are for the GA; set ",
        field, ".population_size"));
  }
  if (spec.evaluator().noisy()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "evaluator.noisy: ", field,
        " re-evaluates every sample anyway; noisy is for the GA's carried-over "
        "genomes"));
  }
  if (StrategyOf(spec) == StrategyKind::kNaturalEs) {
    return ValidateNaturalEs(spec);
  }
  const skerry::v1::CmaEsSpec& cma = CmaSpecOf(spec);
  if (cma.population_size() < kMinCmaPopulation ||
      cma.population_size() > kMaxCmaPopulation) {
    return absl::InvalidArgumentError(absl::StrCat(
        field, ".population_size: out of range (allowed: [", kMinCmaPopulation,
        ", ", kMaxCmaPopulation, "]; got ", cma.population_size(), ")"));
  }
  if (!(cma.sigma() > 0 && cma.sigma() <= kMaxSigma)) {
    return absl::InvalidArgumentError(
        absl::StrCat(field, ".sigma: out of range (allowed: (0, ", kMaxSigma,
                     "]; got ", cma.sigma(), ")"));
  }
  if (cma.has_ipop()) {
    const skerry::v1::IpopSpec& ipop = cma.ipop();
    if (ipop.increase_factor() < kDefaultIpopFactor ||
        ipop.increase_factor() > kMaxIpopFactor) {
      return absl::InvalidArgumentError(
          absl::StrCat(field, ".ipop.increase_factor: out of range (allowed: [",
                       kDefaultIpopFactor, ", ", kMaxIpopFactor, "]; got ",
                       ipop.increase_factor(), ")"));
    }
    if (ipop.max_increases() > kMaxIpopIncreases) {
      return absl::InvalidArgumentError(absl::StrCat(
          field, ".ipop.max_increases: out of range (allowed: [0, ",
          kMaxIpopIncreases, "]; got ", ipop.max_increases(), ")"));
    }
    uint64_t largest = cma.population_size();
    for (uint32_t k = 0; k < ipop.max_increases(); ++k) {
      largest *= ipop.increase_factor();
      if (largest > kMaxCmaPopulation) {
        return absl::InvalidArgumentError(absl::StrCat(
            field, ".ipop.max_increases: ", cma.population_size(), " x ",
            ipop.increase_factor(), "^", ipop.max_increases(),
            " samples per update is more than ", kMaxCmaPopulation,
            "; lower max_increases, increase_factor or population_size"));
      }
    }
  }
  if (StrategyOf(spec) == StrategyKind::kCmaEs) {
    // Two n x n matrices of doubles per island (covariance and eigenvectors):
    // at most 2^26 entries over all islands, 1 GiB.
    const uint64_t n = spec.genome_length();
    const uint64_t islands =
        spec.islands().count() > 0 ? spec.islands().count() : 1;
    if (n * n * islands > kMaxCovarianceEntries) {
      return absl::InvalidArgumentError(absl::StrCat(
          "strategy.cma_es: genome_length ", n, " on ", islands,
          " islands needs ", islands, " covariance matrices of ", n, " x ", n,
          " (allowed: n x n x islands up to ", kMaxCovarianceEntries,
          "); use strategy.sep_cma_es, whose cost grows with n"));
    }
  }
  return absl::OkStatus();
}

uint32_t CmaPopulationAfter(const skerry::v1::CmaEsSpec& cma,
                            uint32_t restarts) {
  uint32_t lambda = cma.population_size();
  if (!cma.has_ipop()) return lambda;
  const uint32_t k = std::min(restarts, cma.ipop().max_increases());
  for (uint32_t i = 0; i < k; ++i) lambda *= cma.ipop().increase_factor();
  return lambda;
}

}  // namespace skerry
