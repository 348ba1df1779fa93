// A natural ES sample as its recipe: what the store keeps in place of the
// sample's genes (the genome's BLOB column), and what rebuilds them from the
// genes of the sample's distribution genome (its parent a; strategies.md,
// "Distribution genomes").
//
//   genes[j] = clamp(centre[j] + s sigma eps[j], lower, upper)
//
// with s = +1 or -1 (the mirrored pair's sign), eps the `length` standard
// normals of the counter-based stream (seed, island, generation,
// kPerturbation, pair) of common/random.h, and, for a FLOAT32 run, each gene
// then rounded as RoundToFloat32 rounds (common/genes.h). A recipe of sigma 0
// is the centre itself: genes[j] = clamp(centre[j], lower, upper), rounded
// the same way, with no eps drawn. No sample has sigma 0 (the spec refuses
// it); the distribution genome goes to a worker so, as a task that names its
// own genes as the centre (the engine's QueueIsland), so that a worker gets
// those genes once per generation, not twice. The strategy makes
// its samples with BuildSample itself, so a rebuilt sample equals the one
// that was evaluated bit for bit.
//
// The encoding, beside the two gene encodings of common/genes.h (8n bytes;
// 1 + 4n bytes), told apart by its length of 50 bytes (neither 8n nor
// 1 + 4n) and its first byte kRecipeTag:
//   byte 0       kRecipeTag
//   byte 1       flags: bit 0 the minus sample of its pair, bit 1 FLOAT32
//   bytes 2-9    seed        (uint64, little-endian)
//   bytes 10-13  island      (uint32)
//   bytes 14-17  generation  (uint32)
//   bytes 18-21  pair        (uint32)
//   bytes 22-25  length      (uint32, the genes it rebuilds)
//   bytes 26-33  sigma       (IEEE-754 float64)
//   bytes 34-41  lower bound (float64)
//   bytes 42-49  upper bound (float64)
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_SAMPLE_RECIPE_H_
#define SKERRY_COMMON_SAMPLE_RECIPE_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"

namespace skerry {

inline constexpr char kRecipeTag = '\x02';
inline constexpr size_t kRecipeBytes = 50;

struct SampleRecipe {
  uint64_t seed = 0;
  uint32_t island = 0;
  uint32_t generation = 0;
  uint32_t pair = 0;
  bool minus = false;  // the centre minus sigma eps
  bool float32 = false;
  uint32_t length = 0;
  double sigma = 0.0;
  double lower = 0.0;
  double upper = 0.0;

  bool operator==(const SampleRecipe& o) const;
};

// The eps of a pair: `length` standard normals from stream (seed, island,
// generation, kPerturbation, pair).
std::vector<double> SamplePerturbation(uint64_t seed, uint32_t island,
                                       uint32_t generation, uint32_t pair,
                                       uint32_t length);

// The sample's genes from its distribution genome's. InvalidArgument when
// `centre` is not `length` genes long, or the recipe is out of range (as
// UnpackRecipe says).
absl::StatusOr<std::vector<double>> BuildSample(
    const SampleRecipe& recipe, absl::Span<const double> centre);
// The same from its pair's eps (SamplePerturbation), already drawn: what the
// strategy uses, drawing each pair's eps once for its two samples.
// REQUIRES: centre of recipe.length genes; eps too, unless sigma is 0.
std::vector<double> BuildSampleFrom(const SampleRecipe& recipe,
                                    absl::Span<const double> centre,
                                    absl::Span<const double> eps);

std::string PackRecipe(const SampleRecipe& recipe);
// True when the stored bytes are a recipe rather than genes.
bool IsRecipe(absl::string_view bytes);
// InvalidArgument naming what is wrong: not a recipe, an unknown flag, a
// non-finite or negative sigma, bounds out of order.
absl::StatusOr<SampleRecipe> UnpackRecipe(absl::string_view bytes);

}  // namespace skerry

#endif  // SKERRY_COMMON_SAMPLE_RECIPE_H_
