// ChildRecipe (child_recipe.h).
#include "common/child_recipe.h"

#include <cmath>

#include "absl/base/internal/endian.h"
#include "absl/strings/str_cat.h"
#include "common/float64_le.h"
#include "common/genes.h"
#include "common/random.h"
#include "common/status_macros.h"
#include "common/variation.h"
#include "skerry/v1/spec.pb.h"

namespace skerry {
namespace {

constexpr uint8_t kFloat32Flag = 1;
// The longest genome a recipe may name (common/spec.cc's range).
constexpr uint32_t kMaxLength = 1000000;

absl::Status Bad(absl::string_view what) {
  return absl::InvalidArgumentError(absl::StrCat("genome recipe: ", what));
}

bool InUnit(double p) { return std::isfinite(p) && p >= 0.0 && p <= 1.0; }

bool Ordered(double lo, double hi) {
  return std::isfinite(lo) && std::isfinite(hi) && lo <= hi;
}

// What every recipe must be, read from the store or from a task.
absl::Status CheckChild(const ChildRecipe& r) {
  if (static_cast<uint8_t>(r.kind) < static_cast<uint8_t>(ChildKind::kSeed) ||
      static_cast<uint8_t>(r.kind) > static_cast<uint8_t>(ChildKind::kCopy)) {
    return Bad(absl::StrCat("unknown kind ", static_cast<int>(r.kind)));
  }
  if (!skerry::v1::CrossoverMethod_IsValid(r.crossover_method)) {
    return Bad(absl::StrCat("unknown crossover method ", r.crossover_method));
  }
  if (r.length < 1 || r.length > kMaxLength) {
    return Bad(
        absl::StrCat("length ", r.length, " is outside [1, ", kMaxLength, "]"));
  }
  if (!InUnit(r.crossover_rate) || !InUnit(r.mutation_rate) ||
      !InUnit(r.blend_alpha)) {
    return Bad(absl::StrCat("a rate (crossover ", r.crossover_rate,
                            ", mutation ", r.mutation_rate, ", blend alpha ",
                            r.blend_alpha, ") is outside [0, 1]"));
  }
  if (!(std::isfinite(r.mutation_step) && r.mutation_step >= 0)) {
    return Bad(absl::StrCat("mutation step ", r.mutation_step,
                            " is not finite and >= 0"));
  }
  if (!Ordered(r.lower, r.upper) || !Ordered(r.init_lower, r.init_upper)) {
    return Bad(absl::StrCat("bounds [", r.lower, ", ", r.upper,
                            "] or initial range [", r.init_lower, ", ",
                            r.init_upper, "] are not finite and in order"));
  }
  return absl::OkStatus();
}

RandomStream StreamOf(const ChildRecipe& r, StreamPurpose purpose) {
  StreamKey key;
  key.run_seed = r.seed;
  key.island = r.island;
  key.generation = r.generation;
  key.purpose = purpose;
  key.slot = r.slot;
  return RandomStream(key);
}

absl::Status CheckParent(const ChildRecipe& r, absl::Span<const double> p,
                         const char* which) {
  if (p.size() == r.length) return absl::OkStatus();
  return Bad(absl::StrCat("parent ", which, " has ", p.size(),
                          " genes where the recipe builds ", r.length));
}

}  // namespace

bool ChildRecipe::operator==(const ChildRecipe& o) const {
  return PackChildRecipe(*this) == PackChildRecipe(o);  // bit for bit
}

int ParentsOf(ChildKind kind) {
  switch (kind) {
    case ChildKind::kSeed:
    case ChildKind::kImmigrant:
      return 0;
    case ChildKind::kCrossover:
      return 2;
    case ChildKind::kMutation:
    case ChildKind::kCopy:
      break;
  }
  return 1;
}

absl::StatusOr<std::vector<double>> BuildChild(const ChildRecipe& r,
                                               absl::Span<const double> a,
                                               absl::Span<const double> b) {
  SKERRY_RETURN_IF_ERROR(CheckChild(r));
  std::vector<double> genes;
  switch (r.kind) {
    case ChildKind::kCopy:
      SKERRY_RETURN_IF_ERROR(CheckParent(r, a, "a"));
      return std::vector<double>(a.begin(), a.end());
    case ChildKind::kSeed:
    case ChildKind::kImmigrant: {
      RandomStream rng =
          StreamOf(r, r.kind == ChildKind::kSeed ? StreamPurpose::kSeedGenes
                                                 : StreamPurpose::kImmigrant);
      genes.resize(r.length);
      for (double& g : genes) g = rng.Uniform(r.init_lower, r.init_upper);
      break;
    }
    case ChildKind::kMutation:
    case ChildKind::kCrossover: {
      SKERRY_RETURN_IF_ERROR(CheckParent(r, a, "a"));
      RandomStream rng = StreamOf(r, StreamPurpose::kBreed);
      const bool crossed = rng.Bernoulli(r.crossover_rate);
      if (crossed != (r.kind == ChildKind::kCrossover)) {
        return Bad(absl::StrCat(
            "its stream draws ", crossed ? "a crossover" : "no crossover",
            " where its kind says ", crossed ? "mutation" : "crossover"));
      }
      if (crossed) {
        SKERRY_RETURN_IF_ERROR(CheckParent(r, b, "b"));
        skerry::v1::CrossoverSpec always;
        always.set_method(
            static_cast<skerry::v1::CrossoverMethod>(r.crossover_method));
        always.set_rate(1.0);
        always.set_blend_alpha(r.blend_alpha);
        genes = Crossover(always, a, b, r.lower, r.upper, rng);
      } else {
        genes.assign(a.begin(), a.end());
      }
      Mutate(r.mutation_rate, r.mutation_step, r.lower, r.upper, &genes, rng);
      break;
    }
  }
  if (r.float32) RoundToFloat32(&genes, r.lower, r.upper);
  return genes;
}

std::string PackChildRecipe(const ChildRecipe& r) {
  std::string out(kChildRecipeBytes, '\0');
  char* p = out.data();
  p[0] = kChildRecipeTag;
  p[1] = static_cast<char>(r.kind);
  p[2] = static_cast<char>(r.float32 ? kFloat32Flag : 0);
  p[3] = static_cast<char>(static_cast<uint8_t>(r.crossover_method));
  absl::little_endian::Store64(p + 4, r.seed);
  absl::little_endian::Store32(p + 12, r.island);
  absl::little_endian::Store32(p + 16, r.generation);
  absl::little_endian::Store32(p + 20, r.slot);
  absl::little_endian::Store32(p + 24, r.length);
  const double values[8] = {r.crossover_rate, r.blend_alpha, r.mutation_rate,
                            r.mutation_step,  r.lower,       r.upper,
                            r.init_lower,     r.init_upper};
  for (int i = 0; i < 8; ++i) StoreFloat64Le(p + 28 + 8 * i, values[i]);
  return out;
}

std::string PackChildRecipe(const ChildRecipe& r,
                            absl::Span<const double> genes) {
  return absl::StrCat(PackChildRecipe(r), PackGenes(genes));
}

bool IsChildRecipe(absl::string_view bytes) {
  if (bytes.size() < kChildRecipeBytes || bytes[0] != kChildRecipeTag) {
    return false;
  }
  const size_t rest = bytes.size() - kChildRecipeBytes;
  // Gene lengths are 8n or 1 + 4n, so 98 + 8n or 99 + 4n: never a gene blob.
  return rest == 0 || rest % 8 == 0 || rest % 4 == 1;
}

absl::StatusOr<UnpackedChild> UnpackChildRecipe(absl::string_view bytes) {
  if (!IsChildRecipe(bytes)) {
    return Bad(absl::StrCat("a blob of ", bytes.size(),
                            " bytes is not a genome recipe"));
  }
  const char* p = bytes.data();
  UnpackedChild out;
  ChildRecipe& r = out.recipe;
  r.kind = static_cast<ChildKind>(static_cast<uint8_t>(p[1]));
  const auto flags = static_cast<uint8_t>(p[2]);
  if ((flags & ~kFloat32Flag) != 0) {
    return Bad(absl::StrCat("unknown flags ", static_cast<int>(flags)));
  }
  r.float32 = (flags & kFloat32Flag) != 0;
  r.crossover_method = static_cast<uint8_t>(p[3]);
  r.seed = absl::little_endian::Load64(p + 4);
  r.island = absl::little_endian::Load32(p + 12);
  r.generation = absl::little_endian::Load32(p + 16);
  r.slot = absl::little_endian::Load32(p + 20);
  r.length = absl::little_endian::Load32(p + 24);
  double* values[8] = {&r.crossover_rate, &r.blend_alpha, &r.mutation_rate,
                       &r.mutation_step,  &r.lower,       &r.upper,
                       &r.init_lower,     &r.init_upper};
  for (int i = 0; i < 8; ++i) *values[i] = LoadFloat64Le(p + 28 + 8 * i);
  for (size_t i = 92; i < kChildRecipeBytes; ++i) {
    if (p[i] != 0) return Bad(absl::StrCat("byte ", i, " is not zero"));
  }
  SKERRY_RETURN_IF_ERROR(CheckChild(r));
  if (bytes.size() > kChildRecipeBytes) {
    absl::StatusOr<std::vector<double>> genes =
        UnpackGenes(bytes.substr(kChildRecipeBytes));
    if (!genes.ok()) return Bad(genes.status().message());
    if (genes->size() != r.length) {
      return Bad(absl::StrCat("its keyframe holds ", genes->size(),
                              " genes where the recipe builds ", r.length));
    }
    out.genes = *std::move(genes);
  }
  return out;
}

}  // namespace skerry
