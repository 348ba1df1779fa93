#include "server/engine/strategy.h"

#include <algorithm>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/genes.h"
#include "common/sample_recipe.h"
#include "common/status_macros.h"
#include "common/strategy_spec.h"
#include "server/engine/breeder.h"
#include "server/engine/cma_strategy.h"
#include "server/engine/natural_es_strategy.h"

namespace skerry::engine {
namespace {

using store::GenomeRecord;

// The generational GA of breeder.h. Its state is its population, which is
// stored as genomes; Tell keeps a copy of the completed generation and the
// migrants until Ask breeds from them.
class GaStrategy : public Strategy {
 public:
  GaStrategy(const skerry::v1::RunSpec& spec, uint32_t island)
      : spec_(spec), island_(island) {}

  absl::StatusOr<std::vector<GenomeRecord>> Start() override {
    generation_ = 0;
    return Seed(spec_, island_);
  }

  absl::Status Tell(absl::Span<const GenomeRecord> completed,
                    absl::Span<const GenomeRecord* const> migrants) override {
    SKERRY_RETURN_IF_ERROR(CheckTold(completed));
    completed_.assign(completed.begin(), completed.end());
    migrants_.clear();
    for (const GenomeRecord* m : migrants) migrants_.push_back(*m);
    return absl::OkStatus();
  }

  absl::StatusOr<std::vector<GenomeRecord>> Ask() override {
    if (completed_.empty()) {
      return absl::FailedPreconditionError(
          absl::StrCat("island ", island_, ": asked before told"));
    }
    std::vector<const GenomeRecord*> migrants;
    for (const GenomeRecord& m : migrants_) migrants.push_back(&m);
    absl::StatusOr<std::vector<GenomeRecord>> next =
        BreedFrom(completed_, migrants);
    completed_.clear();
    migrants_.clear();
    return next;
  }

  absl::StatusOr<std::vector<GenomeRecord>> TellAndAsk(
      absl::Span<const GenomeRecord> completed,
      absl::Span<const GenomeRecord* const> migrants) override {
    SKERRY_RETURN_IF_ERROR(CheckTold(completed));
    completed_.clear();
    migrants_.clear();
    return BreedFrom(completed, migrants);
  }

  skerry::v1::StrategyState Save() const override {
    skerry::v1::StrategyState s;
    s.set_generation(generation_);
    s.mutable_ga();
    return s;
  }

  absl::Status Restore(const skerry::v1::StrategyState& state) override {
    // A state stored before strategies were saved has no kind: it is a GA's.
    if (state.kind_case() != skerry::v1::StrategyState::kGa &&
        state.kind_case() != skerry::v1::StrategyState::KIND_NOT_SET) {
      return absl::InvalidArgumentError(
          absl::StrCat("island ", island_, ": the saved state is not a GA's"));
    }
    generation_ = state.generation();
    completed_.clear();
    migrants_.clear();
    return absl::OkStatus();
  }

  bool StateIsPopulation() const override { return true; }

 private:
  absl::Status CheckTold(absl::Span<const GenomeRecord> completed) const {
    if (!completed.empty()) return absl::OkStatus();
    return absl::InvalidArgumentError(
        absl::StrCat("island ", island_, ": told an empty generation"));
  }

  // Generation g + 1 from g, `completed` (not empty).
  absl::StatusOr<std::vector<GenomeRecord>> BreedFrom(
      absl::Span<const GenomeRecord> completed,
      absl::Span<const GenomeRecord* const> migrants) {
    absl::StatusOr<std::vector<GenomeRecord>> next =
        Breed(spec_, island_, completed, migrants);
    if (next.ok()) generation_ = completed.front().generation + 1;
    return next;
  }

  const skerry::v1::RunSpec spec_;
  const uint32_t island_;
  uint32_t generation_ = 0;
  std::vector<GenomeRecord> completed_;
  std::vector<GenomeRecord> migrants_;
};

// gene_precision FLOAT32: the strategy's genomes rounded to float32 inside
// the bounds (common/genes.h) before the engine keeps or stores them. Every
// generation is told back rounded, so what a strategy breeds from is what
// the store holds: a restarted coordinator breeds the same genomes.
class Float32Strategy : public Strategy {
 public:
  Float32Strategy(std::unique_ptr<Strategy> inner, double lower, double upper)
      : inner_(std::move(inner)), lower_(lower), upper_(upper) {}

  absl::StatusOr<std::vector<GenomeRecord>> Start() override {
    return Rounded(inner_->Start());
  }
  absl::Status Tell(absl::Span<const GenomeRecord> completed,
                    absl::Span<const GenomeRecord* const> migrants) override {
    return inner_->Tell(completed, migrants);
  }
  absl::StatusOr<std::vector<GenomeRecord>> Ask() override {
    return Rounded(inner_->Ask());
  }
  absl::StatusOr<std::vector<GenomeRecord>> TellAndAsk(
      absl::Span<const GenomeRecord> completed,
      absl::Span<const GenomeRecord* const> migrants) override {
    return Rounded(inner_->TellAndAsk(completed, migrants));
  }
  skerry::v1::StrategyState Save() const override { return inner_->Save(); }
  absl::Status Restore(const skerry::v1::StrategyState& state) override {
    return inner_->Restore(state);
  }
  bool StateIsPopulation() const override {
    return inner_->StateIsPopulation();
  }
  std::optional<double> ToldDiversity() const override {
    return inner_->ToldDiversity();
  }

 private:
  absl::StatusOr<std::vector<GenomeRecord>> Rounded(
      absl::StatusOr<std::vector<GenomeRecord>> made) const {
    if (!made.ok()) return made;
    for (GenomeRecord& g : *made) RoundToFloat32(&g.genes, lower_, upper_);
    return made;
  }

  std::unique_ptr<Strategy> inner_;
  const double lower_;
  const double upper_;
};

absl::StatusOr<std::unique_ptr<Strategy>> MakeUnrounded(
    const skerry::v1::RunSpec& spec, uint32_t island) {
  switch (StrategyOf(spec)) {
    case StrategyKind::kCmaEs:
    case StrategyKind::kSepCmaEs:
      return MakeCmaStrategy(spec, island);
    case StrategyKind::kNaturalEs:
      return MakeNaturalEsStrategy(spec, island);
    case StrategyKind::kGa:
      break;
  }
  return std::make_unique<GaStrategy>(spec, island);
}

}  // namespace

DistributionGenomes::DistributionGenomes(const skerry::v1::RunSpec& spec)
    : on_(HasDistributionGenomes(spec)) {}

absl::Span<const GenomeRecord> DistributionGenomes::Samples(
    absl::Span<const GenomeRecord> completed) const {
  if (!on_ || completed.empty()) return completed;
  return completed.subspan(1);
}

void DistributionGenomes::Told(absl::Span<const GenomeRecord> completed,
                               const GenomeRecord* adopted, bool restarted) {
  if (!on_) return;
  parent_ = restarted || completed.empty() ? 0 : completed.front().id;
  migrant_ = adopted != nullptr && !restarted ? adopted->id : 0;
}

void DistributionGenomes::Add(uint32_t island, uint32_t generation,
                              absl::Span<const double> centre, double lower,
                              double upper,
                              std::vector<GenomeRecord>* samples) const {
  if (!on_) return;
  GenomeRecord d;
  d.island = island;
  d.generation = generation;
  d.slot = 0;
  d.origin = skerry::v1::DISTRIBUTION;
  d.state = skerry::v1::PENDING;
  d.parent_a = parent_;
  d.parent_b = migrant_;
  d.genes.reserve(centre.size());
  for (double x : centre) d.genes.push_back(std::clamp(x, lower, upper));
  for (GenomeRecord& g : *samples) {
    ++g.slot;
    g.parent_a_slot = 0;
  }
  samples->insert(samples->begin(), std::move(d));
}

void DistributionGenomes::Save(skerry::v1::StrategyState* state) const {
  state->set_distribution_parent(static_cast<uint64_t>(parent_));
  state->set_distribution_migrant(static_cast<uint64_t>(migrant_));
}

void DistributionGenomes::Restore(const skerry::v1::StrategyState& state) {
  parent_ = static_cast<int64_t>(state.distribution_parent());
  migrant_ = static_cast<int64_t>(state.distribution_migrant());
}

absl::StatusOr<std::unique_ptr<Strategy>> MakeStrategy(
    const skerry::v1::RunSpec& spec, uint32_t island) {
  absl::StatusOr<std::unique_ptr<Strategy>> made = MakeUnrounded(spec, island);
  if (!made.ok() || spec.gene_precision() != skerry::v1::FLOAT32) return made;
  return std::make_unique<Float32Strategy>(std::move(*made), spec.lower_bound(),
                                           spec.upper_bound());
}

absl::StatusOr<std::vector<double>> SampleGenes(
    absl::Span<const GenomeRecord> generation, const GenomeRecord& genome) {
  if (!genome.recipe.has_value() || !genome.genes.empty()) return genome.genes;
  const GenomeRecord* centre =
      generation.empty() ? nullptr : &generation.front();
  if (centre == nullptr || centre->origin != skerry::v1::DISTRIBUTION ||
      (genome.parent_a != 0 && centre->id != genome.parent_a)) {
    return absl::InvalidArgumentError(absl::StrCat(
        "genome ", genome.id, " (island ", genome.island, " generation ",
        genome.generation, " slot ", genome.slot,
        "): a sample kept as its recipe, whose distribution genome is not "
        "slot 0 of its generation"));
  }
  absl::StatusOr<std::vector<double>> genes =
      BuildSample(*genome.recipe, centre->genes);
  if (!genes.ok()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "genome ", genome.id, " (island ", genome.island, " generation ",
        genome.generation, " slot ", genome.slot,
        "): its recipe does not rebuild from its distribution genome: ",
        genes.status().message()));
  }
  return genes;
}

}  // namespace skerry::engine
