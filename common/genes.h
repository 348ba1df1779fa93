// The genome codec: the form the store keeps genes in (its BLOB column).
//
// Two encodings, told apart by length:
//   8n bytes      n little-endian IEEE-754 float64 values;
//   1 + 4n bytes  the tag byte kFloat32Tag, then n little-endian IEEE-754
//                 float32 values.
// PackGenes writes the second whenever it is lossless: every gene is exactly
// a float32 value (as every gene of a `gene_precision: FLOAT32` run is, by
// construction) and there is at least one. UnpackGenes reads both and gives
// the same doubles either way, so nothing that reads genes can tell them
// apart; the run digest hashes the float64 form (Float64Bytes), so a
// digest does not depend on the encoding either.
#ifndef SKERRY_COMMON_GENES_H_
#define SKERRY_COMMON_GENES_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"

namespace skerry {

inline constexpr char kFloat32Tag = '\x01';

std::string PackGenes(absl::Span<const double> genes);
// InvalidArgument when the bytes are neither encoding (a length that is not
// 8n nor 1 + 4n, or a 1 + 4n blob whose first byte is not the tag).
absl::StatusOr<std::vector<double>> UnpackGenes(absl::string_view bytes);
// The float64 encoding of packed genes, whichever encoding they are in
// (what the run digest hashes). Errors as UnpackGenes.
absl::StatusOr<std::string> Float64Bytes(absl::string_view bytes);

// True when every gene is exactly a float32 value (a double that survives
// the round trip double -> float -> double, bit for bit).
bool FitsFloat32(absl::Span<const double> genes);

// Each gene rounded to the nearest float32 value (ties to even), kept in
// [lower, upper]: a value the rounding took past a bound is moved one float32
// step back inside. lower <= upper, both finite.
void RoundToFloat32(std::vector<double>* genes, double lower, double upper);

}  // namespace skerry

#endif  // SKERRY_COMMON_GENES_H_
