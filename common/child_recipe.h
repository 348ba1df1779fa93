// A genetic-algorithm genome as its recipe: what the store keeps in place of
// its genes (the genome's BLOB column) between keyframes, and what rebuilds
// them from its parents' genes (docs/strategies.md, "Genomes kept as
// recipes").
//
// A GA genome is a pure function of its kind, its parents' genes and one
// counter-based stream of common/random.h, keyed (seed, island, generation,
// purpose, slot):
//   kSeed       generation 0: `length` uniforms in [init_lower, init_upper]
//               (purpose kSeedGenes); no parent;
//   kImmigrant  the same from purpose kImmigrant; no parent;
//   kMutation   parent a's genes, mutated (purpose kBreed);
//   kCrossover  a crossover of parents a and b, mutated (purpose kBreed);
//   kCopy       parent a's genes unchanged (an elite or a migrant).
// A bred child first draws whether it is crossed (Bernoulli(crossover_rate)),
// then crosses with rate 1 by `crossover_method` and `blend_alpha`, then
// mutates each gene (Bernoulli(mutation_rate), N(0, mutation_step^2), clamped
// to [lower, upper]) with common/variation.h. A FLOAT32 run rounds each gene
// last, as RoundToFloat32 rounds. The breeder makes every genome with
// BuildChild itself, so a rebuilt genome equals the bred one bit for bit.
//
// The encoding, beside the gene encodings of common/genes.h (8n bytes;
// 1 + 4n bytes) and the natural ES sample recipe (50 bytes), told apart by
// its first byte kChildRecipeTag and its length of 98 bytes, or 98 bytes and
// then the genes (a keyframe: 98 + 8n or 99 + 4n bytes; neither 8n nor
// 1 + 4n, nor 50):
//   byte 0       kChildRecipeTag
//   byte 1       kind (ChildKind)
//   byte 2       flags: bit 0 FLOAT32
//   byte 3       crossover method (skerry.v1.CrossoverMethod)
//   bytes 4-11   seed (uint64, little-endian)
//   bytes 12-27  island, generation, slot, length (uint32 each)
//   bytes 28-91  crossover rate, blend alpha, mutation rate, mutation step,
//                lower, upper, init lower, init upper (IEEE-754 float64 each)
//   bytes 92-97  zero
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_CHILD_RECIPE_H_
#define SKERRY_COMMON_CHILD_RECIPE_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"

namespace skerry {

inline constexpr char kChildRecipeTag = '\x03';
inline constexpr size_t kChildRecipeBytes = 98;

enum class ChildKind : uint8_t {
  kSeed = 1,
  kImmigrant = 2,
  kMutation = 3,
  kCrossover = 4,
  kCopy = 5,
};

struct ChildRecipe {
  ChildKind kind = ChildKind::kSeed;
  bool float32 = false;
  int crossover_method = 0;  // skerry.v1.CrossoverMethod
  uint64_t seed = 0;
  uint32_t island = 0;
  uint32_t generation = 0;
  uint32_t slot = 0;
  uint32_t length = 0;
  double crossover_rate = 0.0;
  double blend_alpha = 0.0;
  double mutation_rate = 0.0;
  double mutation_step = 0.0;
  double lower = 0.0;
  double upper = 0.0;
  double init_lower = 0.0;
  double init_upper = 0.0;

  bool operator==(const ChildRecipe& o) const;
};

// How many parents a genome of `kind` is built from: 0, 1 (parent a) or 2.
int ParentsOf(ChildKind kind);

// The genome's genes. InvalidArgument when a parent is missing or not
// `length` genes long, or the recipe's stream draws a crossover where its
// kind says mutation (or the other way), which only a damaged recipe does.
absl::StatusOr<std::vector<double>> BuildChild(const ChildRecipe& recipe,
                                               absl::Span<const double> a,
                                               absl::Span<const double> b);

// The recipe alone (98 bytes), or the recipe and then PackGenes(genes).
std::string PackChildRecipe(const ChildRecipe& recipe);
std::string PackChildRecipe(const ChildRecipe& recipe,
                            absl::Span<const double> genes);
// True when the stored bytes are a child recipe (with or without genes).
bool IsChildRecipe(absl::string_view bytes);

struct UnpackedChild {
  ChildRecipe recipe;
  std::optional<std::vector<double>> genes;  // a keyframe's
};
// InvalidArgument naming what is wrong: not a child recipe, an unknown kind,
// flag or method, a rate outside [0, 1], a non-finite or negative step,
// bounds out of order, a length out of range, genes that do not decode or
// are not `length` long.
absl::StatusOr<UnpackedChild> UnpackChildRecipe(absl::string_view bytes);

}  // namespace skerry

#endif  // SKERRY_COMMON_CHILD_RECIPE_H_
