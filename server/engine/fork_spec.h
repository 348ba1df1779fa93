// The spec of a fork (ForkRun in proto/skerry/v1/runs.proto): the parent's
// stored spec with the caller's changes merged over it, and the rule of which
// fields a fork may change.
//
// A fork starts from copies of the parent's genomes at one generation, so
// whatever gives those genomes their shape and meaning stays: genome_length,
// objective, islands.count, each island's population (ga.population_size,
// strategy.cma_es.population_size..., islands.population_sizes) and the
// strategy (each island goes on from the parent's strategy state at the fork
// generation, strategy_replay.h). Everything else may change: operators, rates,
// migration, stop rules, the evaluator, the seed. The copies keep their
// scores only while the evaluator (its held-out validation aside) and the
// seed are unchanged; otherwise the fork evaluates them again.
//
// Thread safety: pure functions.
#ifndef SKERRY_SERVER_ENGINE_FORK_SPEC_H_
#define SKERRY_SERVER_ENGINE_FORK_SPEC_H_

#include <cstdint>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::engine {

// `changes` (protobuf text format) merged over `parent`: a field named there
// takes the value given, even a zero; a message field is merged field by
// field; a repeated field is appended to. InvalidArgument
// "changes:LINE:COLUMN: ..." for a syntax error. Not normalised or checked.
absl::StatusOr<skerry::v1::RunSpec> MergeForkChanges(
    const skerry::v1::RunSpec& parent, absl::string_view changes);

// OK when `fork` (normalised) may start from `parent`'s (normalised)
// populations at `generation`; else InvalidArgument naming the field that may
// not change, with both values.
absl::Status CheckForkChanges(const skerry::v1::RunSpec& parent,
                              const skerry::v1::RunSpec& fork,
                              uint32_t generation);

// Whether the fork keeps the copied genomes' scores (see above).
bool ForkKeepsScores(const skerry::v1::RunSpec& parent,
                     const skerry::v1::RunSpec& fork);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_FORK_SPEC_H_
