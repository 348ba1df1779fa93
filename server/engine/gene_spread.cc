// GeneSpread and the diversity of generations kept as recipes (gene_spread.h).
#include "server/engine/gene_spread.h"

#include <cmath>

#include "absl/strings/str_cat.h"
#include "common/sample_recipe.h"
#include "common/status_macros.h"

namespace skerry::engine {

using store::GenomeRecord;

void GeneSpread::Add(absl::Span<const double> genes) {
  count_ += 1.0;
  for (size_t j = 0; j < mean_.size(); ++j) {
    const double delta = genes[j] - mean_[j];
    mean_[j] += delta / count_;
    m2_[j] += delta * (genes[j] - mean_[j]);
  }
}

double GeneSpread::Diversity() const {
  if (mean_.empty() || count_ == 0) return 0.0;
  double total = 0.0;
  for (double m2 : m2_) total += std::sqrt(m2 / count_);
  return total / static_cast<double>(mean_.size());
}

bool HasRecipes(absl::Span<const GenomeRecord> generation) {
  for (const GenomeRecord& g : generation) {
    if (g.recipe.has_value()) return true;
  }
  return false;
}

void AddSamplePair(absl::Span<const GenomeRecord> pair,
                   absl::Span<const double> centre,
                   absl::Span<const double> eps, GeneSpread* spread) {
  for (const GenomeRecord& g : pair) {
    if (g.recipe.has_value()) {
      spread->Add(BuildSampleFrom(*g.recipe, centre, eps));
    } else {
      spread->Add(g.genes);
    }
  }
}

absl::Status CheckSamplePair(absl::Span<const GenomeRecord> pair,
                             uint32_t index, size_t length) {
  for (const GenomeRecord& g : pair) {
    if (!g.recipe.has_value()) continue;
    const SampleRecipe& r = *g.recipe;
    if (r.pair != index || r.length != length) {
      return absl::InvalidArgumentError(absl::StrCat(
          "island ", g.island, " generation ", g.generation, " slot ", g.slot,
          ": its recipe is of pair ", r.pair, " and ", r.length,
          " genes; the slot holds pair ", index, " of a centre of ", length));
    }
  }
  return absl::OkStatus();
}

absl::StatusOr<double> RecipeDiversity(
    absl::Span<const GenomeRecord> generation) {
  if (generation.empty()) return 0.0;
  const GenomeRecord& centre = generation.front();
  if (centre.origin != skerry::v1::DISTRIBUTION || centre.genes.empty()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "island ", centre.island, " generation ", centre.generation,
        ": its samples are kept as recipes but slot 0 is not their "
        "distribution genome with its genes"));
  }
  GeneSpread spread(centre.genes.size());
  spread.Add(centre.genes);
  const absl::Span<const GenomeRecord> samples = generation.subspan(1);
  for (size_t i = 0; 2 * i < samples.size(); ++i) {
    const absl::Span<const GenomeRecord> pair = samples.subspan(2 * i, 2);
    SKERRY_RETURN_IF_ERROR(
        CheckSamplePair(pair, static_cast<uint32_t>(i), centre.genes.size()));
    std::vector<double> eps;
    for (const GenomeRecord& g : pair) {
      if (!g.recipe.has_value()) continue;
      const SampleRecipe& r = *g.recipe;
      eps =
          SamplePerturbation(r.seed, r.island, r.generation, r.pair, r.length);
      break;
    }
    AddSamplePair(pair, centre.genes, eps, &spread);
  }
  return spread.Diversity();
}

}  // namespace skerry::engine
