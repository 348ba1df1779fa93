// An IEEE-754 float64 as 8 little-endian bytes, bit for bit (NaN payloads and
// the sign of zero kept): the field encoding of the recipes of
// common/sample_recipe.h and common/child_recipe.h.
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_FLOAT64_LE_H_
#define SKERRY_COMMON_FLOAT64_LE_H_

#include <cstdint>
#include <cstring>

#include "absl/base/internal/endian.h"

namespace skerry {

inline void StoreFloat64Le(char* at, double v) {
  uint64_t bits;
  std::memcpy(&bits, &v, 8);
  absl::little_endian::Store64(at, bits);
}

inline double LoadFloat64Le(const char* at) {
  const uint64_t bits = absl::little_endian::Load64(at);
  double v;
  std::memcpy(&v, &bits, 8);
  return v;
}

}  // namespace skerry

#endif  // SKERRY_COMMON_FLOAT64_LE_H_
