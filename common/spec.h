// Run specs: parsing from protobuf text format, default filling and validation.
//
// NormalizeSpec fills every default (documented in spec.proto) so that the
// stored spec means the same forever; ValidateSpec then checks every field and
// names the first bad one with its allowed range. The coordinator runs both on
// every submitted spec; the CLI runs them too, to answer faster.
#ifndef SKERRY_COMMON_SPEC_H_
#define SKERRY_COMMON_SPEC_H_

#include <cstdint>
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

// The genomes of one generation of island i after normalisation: the GA's
// population; an evolution strategy's samples, plus its distribution genome
// when the spec has them (HasDistributionGenomes).
uint32_t IslandPopulation(const skerry::v1::RunSpec& spec, uint32_t island);

// A GA run's keyframe interval: ga.keyframe_interval when set, else 1 below
// kRecipeGenomeLength genes and kDefaultKeyframeInterval from there up. Above
// 1, the store keeps the run's genomes as their recipes between keyframes
// (common/child_recipe.h). 1 for the other strategies.
inline constexpr uint32_t kRecipeGenomeLength = 1000;
inline constexpr uint32_t kDefaultKeyframeInterval = 100;
uint32_t KeyframeInterval(const skerry::v1::RunSpec& spec);

// Both, then returns the normalised spec.
absl::StatusOr<skerry::v1::RunSpec> PrepareSpec(skerry::v1::RunSpec spec);

// What a coordinator is willing to take on for one run: its flags, checked
// on every submitted spec before anything is allocated for it. 0: no budget.
struct SpecBudgets {
  // Genes of one generation, all islands: sum of island populations times
  // genome_length (--max-generation-genes).
  uint64_t max_generation_genes = 0;
  // Genomes of one generation, all islands: one generation is written in one
  // transaction, which other writes wait for (--max-generation-genomes).
  uint64_t max_generation_genomes = 0;
  // The serialised EvaluatorSpec, which every task carries
  // (--max-evaluator-bytes).
  uint64_t max_evaluator_bytes = 0;
  // The run's name, which every RunSummary carries (--max-name-bytes).
  uint64_t max_name_bytes = 0;
  // One task as a worker receives it: genes, evaluator and ids
  // (--max-task-bytes).
  uint64_t max_task_bytes = 0;
};

// Defaults for a machine with `physical_memory_bytes` of memory: a generation
// of at most physical memory / 1024 genes (the coordinator holds a few copies
// of each gene) and 10^6 genomes (a transaction of seconds), and fixed byte
// budgets that fit in one gRPC message.
SpecBudgets DefaultSpecBudgets(uint64_t physical_memory_bytes);

// PrepareSpec, with the budgets: the sizes sent (name, evaluator) are checked
// before normalisation, the generation and task sizes after validation.
// InvalidArgument "budget ...: VALUE exceeds the coordinator's budget of
// LIMIT (--FLAG)".
absl::StatusOr<skerry::v1::RunSpec> PrepareSpec(skerry::v1::RunSpec spec,
                                                const SpecBudgets& budgets);

}  // namespace skerry

#endif  // SKERRY_COMMON_SPEC_H_
