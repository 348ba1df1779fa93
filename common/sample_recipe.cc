#include "common/sample_recipe.h"

#include <algorithm>
#include <cmath>

#include "absl/base/internal/endian.h"
#include "absl/strings/str_cat.h"
#include "common/float64_le.h"
#include "common/genes.h"
#include "common/random.h"
#include "common/status_macros.h"

namespace skerry {
namespace {

constexpr uint8_t kMinus = 1;
constexpr uint8_t kFloat32 = 2;

// What every recipe must be, read from the store or from a task.
absl::Status CheckRecipe(const SampleRecipe& r) {
  if (!(std::isfinite(r.sigma) && r.sigma >= 0)) {
    return absl::InvalidArgumentError(absl::StrCat(
        "sample recipe: sigma ", r.sigma, " is not finite and >= 0"));
  }
  if (!(std::isfinite(r.lower) && std::isfinite(r.upper) &&
        r.lower <= r.upper)) {
    return absl::InvalidArgumentError(
        absl::StrCat("sample recipe: bounds [", r.lower, ", ", r.upper,
                     "] are not finite and in order"));
  }
  return absl::OkStatus();
}

}  // namespace

bool SampleRecipe::operator==(const SampleRecipe& o) const {
  return PackRecipe(*this) == PackRecipe(o);  // bit for bit, doubles included
}

std::vector<double> SamplePerturbation(uint64_t seed, uint32_t island,
                                       uint32_t generation, uint32_t pair,
                                       uint32_t length) {
  StreamKey key;
  key.run_seed = seed;
  key.island = island;
  key.generation = generation;
  key.purpose = StreamPurpose::kPerturbation;
  key.slot = pair;
  RandomStream rng(key);
  std::vector<double> eps(length);
  for (double& x : eps) x = rng.Normal();
  return eps;
}

std::vector<double> BuildSampleFrom(const SampleRecipe& r,
                                    absl::Span<const double> centre,
                                    absl::Span<const double> eps) {
  const double sign = r.minus ? -1.0 : 1.0;
  std::vector<double> genes(r.length);
  if (r.sigma == 0) {
    // The centre itself (eps unused): not centre + 0 x eps, which would turn
    // a centre's -0.0 into +0.0 for a positive eps.
    for (size_t j = 0; j < genes.size(); ++j) {
      genes[j] = std::clamp(centre[j], r.lower, r.upper);
    }
  } else {
    for (size_t j = 0; j < genes.size(); ++j) {
      genes[j] =
          std::clamp(centre[j] + sign * r.sigma * eps[j], r.lower, r.upper);
    }
  }
  if (r.float32) RoundToFloat32(&genes, r.lower, r.upper);
  return genes;
}

absl::StatusOr<std::vector<double>> BuildSample(
    const SampleRecipe& r, absl::Span<const double> centre) {
  if (centre.size() != r.length) {
    return absl::InvalidArgumentError(absl::StrCat(
        "sample of island ", r.island, " generation ", r.generation, " pair ",
        r.pair, ": its recipe makes ", r.length,
        " genes but its distribution genome has ", centre.size()));
  }
  SKERRY_RETURN_IF_ERROR(CheckRecipe(r));
  if (r.sigma == 0) return BuildSampleFrom(r, centre, {});
  const std::vector<double> eps =
      SamplePerturbation(r.seed, r.island, r.generation, r.pair, r.length);
  return BuildSampleFrom(r, centre, eps);
}

std::string PackRecipe(const SampleRecipe& r) {
  std::string out(kRecipeBytes, '\0');
  out[0] = kRecipeTag;
  out[1] =
      static_cast<char>((r.minus ? kMinus : 0) | (r.float32 ? kFloat32 : 0));
  absl::little_endian::Store64(&out[2], r.seed);
  absl::little_endian::Store32(&out[10], r.island);
  absl::little_endian::Store32(&out[14], r.generation);
  absl::little_endian::Store32(&out[18], r.pair);
  absl::little_endian::Store32(&out[22], r.length);
  StoreFloat64Le(&out[26], r.sigma);
  StoreFloat64Le(&out[34], r.lower);
  StoreFloat64Le(&out[42], r.upper);
  return out;
}

bool IsRecipe(absl::string_view bytes) {
  return bytes.size() == kRecipeBytes && bytes[0] == kRecipeTag;
}

absl::StatusOr<SampleRecipe> UnpackRecipe(absl::string_view bytes) {
  if (!IsRecipe(bytes)) {
    return absl::InvalidArgumentError(
        absl::StrCat("sample recipe: ", bytes.size(), " bytes, not the ",
                     kRecipeBytes, " bytes of a recipe beginning with tag ",
                     static_cast<int>(kRecipeTag)));
  }
  const uint8_t flags = static_cast<uint8_t>(bytes[1]);
  if ((flags & ~(kMinus | kFloat32)) != 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("sample recipe: unknown flags ", static_cast<int>(flags),
                     " in byte 1"));
  }
  SampleRecipe r;
  r.minus = (flags & kMinus) != 0;
  r.float32 = (flags & kFloat32) != 0;
  r.seed = absl::little_endian::Load64(bytes.data() + 2);
  r.island = absl::little_endian::Load32(bytes.data() + 10);
  r.generation = absl::little_endian::Load32(bytes.data() + 14);
  r.pair = absl::little_endian::Load32(bytes.data() + 18);
  r.length = absl::little_endian::Load32(bytes.data() + 22);
  r.sigma = LoadFloat64Le(bytes.data() + 26);
  r.lower = LoadFloat64Le(bytes.data() + 34);
  r.upper = LoadFloat64Le(bytes.data() + 42);
  SKERRY_RETURN_IF_ERROR(CheckRecipe(r));
  return r;
}

}  // namespace skerry
