// A generation's diversity (StatsRecord.diversity: the mean over genes of the
// population standard deviation of the gene across the generation) without
// holding the generation's genes: GeneSpread takes one genome at a time
// (Welford's one-pass mean and sum of squared deviations, Welford 1962, the
// usual streaming form; common practice), so a natural ES generation whose
// samples are kept as recipes (common/sample_recipe.h) is measured by
// rebuilding its samples one pair at a time.
//
// RecipeDiversity and NaturalEsStrategy::Tell measure such a generation the
// same way (AddSamplePair, in slot order, after the distribution genome), so
// the value is the same whichever computes it: the engine takes Tell's, which
// draws each pair's normals once for both the update and this, and computes it
// itself only when no Tell follows (the island's last generation).
//
// Thread safety: a GeneSpread is a value; the functions are pure.
#ifndef SKERRY_SERVER_ENGINE_GENE_SPREAD_H_
#define SKERRY_SERVER_ENGINE_GENE_SPREAD_H_

#include <cstddef>
#include <cstdint>
#include <optional>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/store/records.h"

namespace skerry::engine {

class GeneSpread {
 public:
  explicit GeneSpread(size_t length) : mean_(length, 0.0), m2_(length, 0.0) {}
  // REQUIRES: genes.size() == length.
  void Add(absl::Span<const double> genes);
  // Mean over genes of sqrt(m2 / count); 0 with no gene or no genome.
  double Diversity() const;

 private:
  std::vector<double> mean_;
  std::vector<double> m2_;
  double count_ = 0;
};

// True when some genome of the generation is a sample kept as its recipe.
bool HasRecipes(absl::Span<const store::GenomeRecord> generation);

// Adds two consecutive samples of one mirrored pair (or one, at the end) whose
// pair's normals are `eps`: each as its recipe rebuilds it from `centre`, or
// its own genes when it has no recipe (a fork's copied generation).
void AddSamplePair(absl::Span<const store::GenomeRecord> pair,
                   absl::Span<const double> centre,
                   absl::Span<const double> eps, GeneSpread* spread);

// OK when every recipe of `pair` (the samples at slots 2i + 1 and 2i + 2 of a
// generation with distribution genomes) is of pair `index` and rebuilds
// `length` genes; else InvalidArgument naming the slot.
absl::Status CheckSamplePair(absl::Span<const store::GenomeRecord> pair,
                             uint32_t index, size_t length);

// The diversity of a generation with recipes: its distribution genome (slot
// 0), then its samples pair by pair. InvalidArgument naming the slot when a
// sample's recipe does not fit the generation (not its pair's, not the
// centre's length).
absl::StatusOr<double> RecipeDiversity(
    absl::Span<const store::GenomeRecord> generation);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_GENE_SPREAD_H_
