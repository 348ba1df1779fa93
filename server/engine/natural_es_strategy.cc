// The natural-gradient ES (natural_es.h) behind the strategy interface.
//
// Generation g of an island is P = population_size / 2 mirrored pairs: slot
// 2i holds theta + sigma eps_i and slot 2i + 1 holds theta - sigma eps_i, with
// eps_i = Perturbation(spec, island, g, i), each clamped to [lower_bound,
// upper_bound] before it is evaluated. Tell ranks the 2P scores (a failed
// evaluation ranks last), estimates the gradient from the eps_i (rebuilt from
// their keys, not from the clamped genes), takes one Adam step and clamps
// the centre to the bounds. The start is uniform in [init_lower, init_upper]
// from stream (seed, island, 0, kStart, 0), as CMA-ES's first start.
//
// Migration: a migrant better than every sample of the completed generation
// becomes the centre (Adam's moments and step count are kept, as CMA-ES keeps
// its covariance); other migrants are ignored. Without such a migrant the
// islands are independent searches from their own starts.
//
// With distribution genomes (the default; strategy.h DistributionGenomes)
// slot 0 holds theta itself and pair i's samples are at 2i + 1 and 2i + 2,
// each naming it as its parent; theta's score takes no part in the update
// (the gradient is the samples'), but a migrant must beat it too to become
// the centre. Without them (runs stored before), a sample has no parents.
#include "server/engine/natural_es_strategy.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>

#include "absl/strings/str_cat.h"
#include "common/genes.h"
#include "common/random.h"
#include "common/sample_recipe.h"
#include "common/status_macros.h"
#include "common/strategy_spec.h"
#include "server/engine/gene_spread.h"
#include "server/engine/natural_es.h"

namespace skerry::engine {
namespace {

using skerry::v1::NaturalEsState;
using skerry::v1::RunSpec;
using store::GenomeRecord;

class NaturalEsStrategy : public Strategy {
 public:
  NaturalEsStrategy(const RunSpec& spec, uint32_t island)
      : spec_(spec),
        island_(island),
        es_(NaturalEsSpecOf(spec_)),
        distribution_(spec_) {}

  absl::StatusOr<std::vector<GenomeRecord>> Start() override {
    StreamKey key;
    key.run_seed = spec_.seed();
    key.island = island_;
    key.purpose = StreamPurpose::kStart;
    RandomStream rng(key);
    state_.Clear();
    for (uint32_t i = 0; i < spec_.genome_length(); ++i) {
      state_.add_centre(rng.Uniform(spec_.init_lower(), spec_.init_upper()));
      state_.add_adam_m(0.0);
      state_.add_adam_v(0.0);
    }
    generation_ = 0;
    started_ = true;
    distribution_.Clear();
    return Samples();
  }

  absl::Status Tell(absl::Span<const GenomeRecord> completed,
                    absl::Span<const GenomeRecord* const> migrants) override {
    if (!started_) {
      return absl::FailedPreconditionError(
          absl::StrCat("island ", island_, ": told before started"));
    }
    const uint32_t pairs = es_.population_size() / 2;
    const size_t expected = distribution_.GenerationSize(2 * size_t{pairs});
    if (completed.size() != expected) {
      return absl::InvalidArgumentError(
          absl::StrCat("island ", island_, " generation ", generation_, ": ",
                       completed.size(), " genomes, expected ", expected));
    }
    const absl::Span<const GenomeRecord> samples =
        distribution_.Samples(completed);
    const bool maximize = spec_.objective() == skerry::v1::MAXIMIZE;
    auto utility = [maximize](const GenomeRecord& g) {
      if (g.state != skerry::v1::EVALUATED) {
        return -std::numeric_limits<double>::infinity();
      }
      return maximize ? g.score : -g.score;
    };
    std::vector<double> utilities;
    double best = -std::numeric_limits<double>::infinity();
    for (const GenomeRecord& g : samples) utilities.push_back(utility(g));
    for (const GenomeRecord& g : completed) best = std::max(best, utility(g));
    const uint32_t generation = completed.front().generation;
    // Samples kept as recipes have no genes here: the generation's diversity
    // is measured from the same draws as the gradient (gene_spread.h).
    told_diversity_.reset();
    std::optional<GeneSpread> spread;
    const size_t n = spec_.genome_length();
    if (distribution_.on() && HasRecipes(completed)) {
      if (completed.front().genes.size() != n) {
        return absl::InvalidArgumentError(absl::StrCat(
            "island ", island_, " generation ", generation,
            ": its distribution genome has ", completed.front().genes.size(),
            " genes, expected ", n));
      }
      for (uint32_t i = 0; i < pairs; ++i) {
        SKERRY_RETURN_IF_ERROR(
            CheckSamplePair(samples.subspan(2 * i, 2), i, n));
      }
      spread.emplace(n);
      spread->Add(completed.front().genes);
    }
    NaturalEsUpdateStreaming(
        es_, generation, utilities,
        [&](uint32_t pair) {
          std::vector<double> eps =
              Perturbation(spec_, island_, generation, pair);
          if (spread.has_value()) {
            AddSamplePair(samples.subspan(2 * pair, 2), completed.front().genes,
                          eps, &*spread);
          }
          return eps;
        },
        &state_);
    if (spread.has_value()) told_diversity_ = spread->Diversity();
    for (int j = 0; j < state_.centre_size(); ++j) {
      state_.set_centre(j, std::clamp(state_.centre(j), spec_.lower_bound(),
                                      spec_.upper_bound()));
    }
    // A better migrant becomes the centre; the first of the best wins ties.
    const GenomeRecord* better = nullptr;
    for (const GenomeRecord* m : migrants) {
      if (utility(*m) > best) {
        best = utility(*m);
        better = m;
      }
    }
    if (better != nullptr && better->genes.size() == spec_.genome_length()) {
      for (size_t j = 0; j < better->genes.size(); ++j) {
        state_.set_centre(static_cast<int>(j), better->genes[j]);
      }
    } else {
      better = nullptr;
    }
    distribution_.Told(completed, better, /*restarted=*/false);
    generation_ = generation + 1;
    return absl::OkStatus();
  }

  std::optional<double> ToldDiversity() const override {
    return told_diversity_;
  }

  absl::StatusOr<std::vector<GenomeRecord>> Ask() override {
    if (!started_) {
      return absl::FailedPreconditionError(
          absl::StrCat("island ", island_, ": asked before started"));
    }
    return Samples();
  }

  skerry::v1::StrategyState Save() const override {
    skerry::v1::StrategyState s;
    s.set_generation(generation_);
    if (started_) *s.mutable_natural_es() = state_;
    distribution_.Save(&s);
    return s;
  }

  absl::Status Restore(const skerry::v1::StrategyState& state) override {
    if (state.kind_case() != skerry::v1::StrategyState::kNaturalEs) {
      return absl::InvalidArgumentError(absl::StrCat(
          "island ", island_, ": the saved state is not a natural ES state"));
    }
    const NaturalEsState& s = state.natural_es();
    const int n = static_cast<int>(spec_.genome_length());
    if (s.centre_size() != n || s.adam_m_size() != n || s.adam_v_size() != n) {
      return absl::InvalidArgumentError(absl::StrCat(
          "island ", island_, ": the saved natural ES state has vectors of ",
          s.centre_size(), ", ", s.adam_m_size(), " and ", s.adam_v_size(),
          " values; the spec's genome_length is ", n));
    }
    for (int j = 0; j < n; ++j) {
      if (!std::isfinite(s.centre(j)) || !std::isfinite(s.adam_m(j)) ||
          !(s.adam_v(j) >= 0) || !std::isfinite(s.adam_v(j))) {
        return absl::InvalidArgumentError(
            absl::StrCat("island ", island_,
                         ": the saved natural ES state has a value out of "
                         "range at gene ",
                         j));
      }
    }
    state_ = s;
    told_diversity_.reset();
    generation_ = state.generation();
    started_ = true;
    distribution_.Restore(state);
    return absl::OkStatus();
  }

 private:
  std::vector<GenomeRecord> Samples() const {
    const uint32_t pairs = es_.population_size() / 2;
    const size_t n = spec_.genome_length();
    const double sigma = NaturalEsSigma(es_, generation_);
    std::vector<GenomeRecord> out;
    out.reserve(2 * pairs + 1);
    if (distribution_.on()) {
      // Each sample is its recipe alone: drawn around the centre as its
      // distribution genome holds it (clamped, and rounded in a FLOAT32 run),
      // by BuildSample where its genes are needed (the worker evaluating it,
      // a store read, a migrant, a validation; records.h). The coordinator
      // neither draws nor holds them here.
      std::vector<double> centre(state_.centre().begin(),
                                 state_.centre().end());
      for (double& x : centre) {
        x = std::clamp(x, spec_.lower_bound(), spec_.upper_bound());
      }
      const bool float32 = spec_.gene_precision() == skerry::v1::FLOAT32;
      if (float32) {
        RoundToFloat32(&centre, spec_.lower_bound(), spec_.upper_bound());
      }
      for (uint32_t i = 0; i < pairs; ++i) {
        for (const bool minus : {false, true}) {
          SampleRecipe r;
          r.seed = spec_.seed();
          r.island = island_;
          r.generation = generation_;
          r.pair = i;
          r.minus = minus;
          r.float32 = float32;
          r.length = static_cast<uint32_t>(n);
          r.sigma = sigma;
          r.lower = spec_.lower_bound();
          r.upper = spec_.upper_bound();
          GenomeRecord g = Sample(static_cast<uint32_t>(out.size()));
          g.recipe = r;
          out.push_back(std::move(g));
        }
      }
      distribution_.Add(island_, generation_, centre, spec_.lower_bound(),
                        spec_.upper_bound(), &out);
      return out;
    }
    for (uint32_t i = 0; i < pairs; ++i) {
      const std::vector<double> eps =
          Perturbation(spec_, island_, generation_, i);
      for (const double sign : {1.0, -1.0}) {
        GenomeRecord g = Sample(static_cast<uint32_t>(out.size()));
        g.genes.resize(n);
        for (size_t j = 0; j < n; ++j) {
          const double x =
              state_.centre(static_cast<int>(j)) + sign * sigma * eps[j];
          g.genes[j] = std::clamp(x, spec_.lower_bound(), spec_.upper_bound());
        }
        out.push_back(std::move(g));
      }
    }
    return out;
  }

  GenomeRecord Sample(uint32_t slot) const {
    GenomeRecord g;
    g.island = island_;
    g.generation = generation_;
    g.slot = slot;
    g.origin = skerry::v1::SAMPLED;
    g.state = skerry::v1::PENDING;
    return g;
  }

  const RunSpec spec_;
  const uint32_t island_;
  const skerry::v1::NaturalEsSpec es_;
  NaturalEsState state_;
  DistributionGenomes distribution_;
  uint32_t generation_ = 0;
  bool started_ = false;
  std::optional<double> told_diversity_;  // of the last Tell, if it measured
};

}  // namespace

std::unique_ptr<Strategy> MakeNaturalEsStrategy(const RunSpec& spec,
                                                uint32_t island) {
  return std::make_unique<NaturalEsStrategy>(spec, island);
}

}  // namespace skerry::engine
