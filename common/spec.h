// Run specs: parsing from protobuf text format, default filling and validation.
//
// NormalizeSpec fills every default (documented in spec.proto) so that the
// stored spec means the same forever; ValidateSpec then checks every field and
// names the first bad one with its allowed range. The coordinator runs both on
// every submitted spec; the CLI runs them too, to answer faster.
#ifndef SKERRY_COMMON_SPEC_H_
#define SKERRY_COMMON_SPEC_H_

#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "skerry/v1/spec.pb.h"

namespace skerry {

// Parses text format (common/spec_text.cc). A syntax error is
// InvalidArgument "FILE:LINE:COLUMN: message": 1-based line and column, the
// column in characters, at the token the problem is about. A string field
// that is not UTF-8 is InvalidArgument naming the field.
absl::StatusOr<skerry::v1::RunSpec> ParseSpecText(absl::string_view text,
                                                  absl::string_view filename);

// Fills defaults in place. Never fails; validation comes after.
void NormalizeSpec(skerry::v1::RunSpec* spec);

// InvalidArgument "FIELD.PATH: what is wrong (allowed: RANGE; got VALUE)".
absl::Status ValidateSpec(const skerry::v1::RunSpec& spec);

// Population size of island i after normalisation.
uint32_t IslandPopulation(const skerry::v1::RunSpec& spec, uint32_t island);

// Both, then returns the normalised spec.
absl::StatusOr<skerry::v1::RunSpec> PrepareSpec(skerry::v1::RunSpec spec);

}  // namespace skerry

#endif  // SKERRY_COMMON_SPEC_H_
