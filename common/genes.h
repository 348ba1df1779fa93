// The genome codec: genes as packed little-endian IEEE-754 float64, the form
// the store keeps in its BLOB column and the digest hashes.
#ifndef SKERRY_COMMON_GENES_H_
#define SKERRY_COMMON_GENES_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"

namespace skerry {

std::string PackGenes(absl::Span<const double> genes);
// InvalidArgument when the size is not a multiple of 8.
absl::StatusOr<std::vector<double>> UnpackGenes(absl::string_view bytes);

}  // namespace skerry

#endif  // SKERRY_COMMON_GENES_H_
