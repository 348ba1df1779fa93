#include "common/genes.h"

#include <cstdint>
#include <cstring>

#include "absl/base/internal/endian.h"
#include "absl/strings/str_cat.h"

namespace skerry {

std::string PackGenes(absl::Span<const double> genes) {
  std::string out(genes.size() * 8, '\0');
  for (size_t i = 0; i < genes.size(); ++i) {
    uint64_t bits;
    std::memcpy(&bits, &genes[i], 8);
    absl::little_endian::Store64(&out[i * 8], bits);
  }
  return out;
}

absl::StatusOr<std::vector<double>> UnpackGenes(absl::string_view bytes) {
  if (bytes.size() % 8 != 0) {
    return absl::InvalidArgumentError(absl::StrCat(
        "packed genes: ", bytes.size(), " bytes is not a multiple of 8"));
  }
  std::vector<double> genes(bytes.size() / 8);
  for (size_t i = 0; i < genes.size(); ++i) {
    const uint64_t bits = absl::little_endian::Load64(bytes.data() + i * 8);
    std::memcpy(&genes[i], &bits, 8);
  }
  return genes;
}

}  // namespace skerry
