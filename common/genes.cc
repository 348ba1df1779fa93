#include "common/genes.h"

#include <cmath>
#include <cstdint>
#include <cstring>

#include "absl/base/internal/endian.h"
#include "absl/strings/str_cat.h"

namespace skerry {
namespace {

std::string PackFloat64(absl::Span<const double> genes) {
  std::string out(genes.size() * 8, '\0');
  for (size_t i = 0; i < genes.size(); ++i) {
    uint64_t bits;
    std::memcpy(&bits, &genes[i], 8);
    absl::little_endian::Store64(&out[i * 8], bits);
  }
  return out;
}

}  // namespace

bool FitsFloat32(absl::Span<const double> genes) {
  for (double g : genes) {
    const double back = static_cast<double>(static_cast<float>(g));
    if (std::memcmp(&back, &g, sizeof g) != 0) return false;
  }
  return true;
}

std::string PackGenes(absl::Span<const double> genes) {
  if (genes.empty() || !FitsFloat32(genes)) return PackFloat64(genes);
  std::string out(1 + genes.size() * 4, '\0');
  out[0] = kFloat32Tag;
  for (size_t i = 0; i < genes.size(); ++i) {
    const float f = static_cast<float>(genes[i]);
    uint32_t bits;
    std::memcpy(&bits, &f, 4);
    absl::little_endian::Store32(&out[1 + i * 4], bits);
  }
  return out;
}

absl::StatusOr<std::vector<double>> UnpackGenes(absl::string_view bytes) {
  if (bytes.size() % 8 == 0) {
    std::vector<double> genes(bytes.size() / 8);
    for (size_t i = 0; i < genes.size(); ++i) {
      const uint64_t bits = absl::little_endian::Load64(bytes.data() + i * 8);
      std::memcpy(&genes[i], &bits, 8);
    }
    return genes;
  }
  if (bytes.size() % 4 != 1) {
    return absl::InvalidArgumentError(absl::StrCat(
        "packed genes: ", bytes.size(),
        " bytes is neither 8n (float64) nor 1 + 4n (tagged float32)"));
  }
  if (bytes[0] != kFloat32Tag) {
    return absl::InvalidArgumentError(
        absl::StrCat("packed genes: ", bytes.size(), " bytes begin with byte ",
                     static_cast<int>(static_cast<unsigned char>(bytes[0])),
                     " where the float32 tag 1 belongs"));
  }
  std::vector<double> genes(bytes.size() / 4);
  for (size_t i = 0; i < genes.size(); ++i) {
    const uint32_t bits = absl::little_endian::Load32(bytes.data() + 1 + i * 4);
    float f;
    std::memcpy(&f, &bits, 4);
    genes[i] = f;
  }
  return genes;
}

absl::StatusOr<std::string> Float64Bytes(absl::string_view bytes) {
  if (bytes.size() % 8 == 0) return std::string(bytes);
  absl::StatusOr<std::vector<double>> genes = UnpackGenes(bytes);
  if (!genes.ok()) return genes.status();
  return PackFloat64(*genes);
}

void RoundToFloat32(std::vector<double>* genes, double lower, double upper) {
  for (double& g : *genes) {
    float f = static_cast<float>(g);
    if (static_cast<double>(f) > upper) f = std::nextafter(f, -INFINITY);
    if (static_cast<double>(f) < lower) f = std::nextafter(f, INFINITY);
    g = f;
  }
}

}  // namespace skerry
