#include "common/strategy_spec.h"

#include <algorithm>
#include <cmath>

#include "absl/strings/str_cat.h"

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

const char* FieldOf(const RunSpec& spec) {
  return spec.strategy().kind_case() == StrategySpec::kSepCmaEs
             ? "strategy.sep_cma_es"
             : "strategy.cma_es";
}

}  // namespace

StrategyKind StrategyOf(const RunSpec& spec) {
  switch (spec.strategy().kind_case()) {
    case StrategySpec::kCmaEs:
      return StrategyKind::kCmaEs;
    case StrategySpec::kSepCmaEs:
      return StrategyKind::kSepCmaEs;
    default:
      return StrategyKind::kGa;
  }
}

const skerry::v1::CmaEsSpec& CmaSpecOf(const RunSpec& spec) {
  return spec.strategy().kind_case() == StrategySpec::kSepCmaEs
             ? spec.strategy().sep_cma_es()
             : spec.strategy().cma_es();
}

uint32_t DefaultCmaPopulation(uint32_t genome_length) {
  const double n = genome_length < 1 ? 1 : genome_length;
  return 4 + static_cast<uint32_t>(std::floor(3 * std::log(n)));
}

void NormalizeStrategy(RunSpec* spec) {
  StrategySpec* st = spec->mutable_strategy();
  if (st->kind_case() == StrategySpec::kGa && !spec->has_ga()) {
    *spec->mutable_ga() = st->ga();
    st->clear_kind();
  }
  if (st->kind_case() == StrategySpec::KIND_NOT_SET) {
    spec->clear_strategy();
    return;
  }
  if (st->kind_case() == StrategySpec::kGa) return;  // both set: refused later
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
  if (StrategyOf(spec) == StrategyKind::kGa) return absl::OkStatus();
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
  if (spec.evaluator().noisy()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "evaluator.noisy: ", field,
        " re-evaluates every sample anyway; noisy is for the GA's carried-over "
        "genomes"));
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
