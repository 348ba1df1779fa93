// The generational GA step for one island, as pure functions.
//
// Seed() makes generation 0; Breed() makes generation g+1 from the completed
// generation g (and, at a migration epoch, the migrants chosen from the source
// islands' generation g). Both depend only on the spec, the seed and their
// inputs, and draw every random number from streams named by (seed, island,
// generation, purpose, slot) (common/random.h), so a generation is the same
// however and wherever it is computed: this is the reproducibility contract.
//
// Layout of a bred generation of size N (slots in order):
//   [0, E)            elites: copies of the E best of generation g
//   [E, E+M)          migrants (epoch generations only), copies from other
//   islands [E+M, N-I)        offspring: crossover (with probability rate) then
//   mutation [N-I, N)          immigrants: fresh uniform genomes
// Elites and migrants keep their score (no re-evaluation) unless the evaluator
// is declared noisy. Migrants that would leave no offspring slot are dropped,
// in source order (only possible with a RANDOM topology).
//
// Thread safety: pure functions; call from any thread.
#ifndef SKERRY_SERVER_ENGINE_BREEDER_H_
#define SKERRY_SERVER_ENGINE_BREEDER_H_

#include <cstdint>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/store/records.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::engine {

using store::GenomeRecord;

// Generation 0 of `island` (ids left 0, run_id left 0). Every genome Seed
// and Breed make is built by BuildChild (common/child_recipe.h) and, when the
// run keeps recipes (KeyframeInterval > 1), carries its recipe.
// InvalidArgument only for a spec that PrepareSpec would refuse.
absl::StatusOr<std::vector<GenomeRecord>> Seed(const skerry::v1::RunSpec& spec,
                                               uint32_t island);

// Chooses `count` emigrants from a completed generation per the spec's emigrant
// choice (best, random, tournament of 2). Streams: (island of the source,
// generation, kMigration, destination).
std::vector<const GenomeRecord*> ChooseEmigrants(
    const skerry::v1::RunSpec& spec, absl::Span<const GenomeRecord> source,
    uint32_t destination, uint32_t count);

// Generation g+1 of `island` from its completed generation g (`current`, sorted
// by slot, every genome EVALUATED or FAILED) and `migrants` (empty outside
// epochs). InvalidArgument when selection cannot proceed (e.g. RAW scaling with
// a negative score); the message names the generation.
absl::StatusOr<std::vector<GenomeRecord>> Breed(
    const skerry::v1::RunSpec& spec, uint32_t island,
    absl::Span<const GenomeRecord> current,
    absl::Span<const GenomeRecord* const> migrants);

// Statistics of a completed generation: best, mean and worst over evaluated
// genomes; diversity = mean over genes of the population standard deviation of
// that gene; evaluations = genomes evaluated in this generation (attempts > 0).
// REQUIRES: every genome holds its genes (a store read does; see
// gene_spread.h for a generation whose samples the engine keeps as recipes).
store::StatsRecord ComputeStats(const skerry::v1::RunSpec& spec,
                                absl::Span<const GenomeRecord> generation);
// The diversity alone, two-pass (same REQUIRES as ComputeStats).
double Diversity(absl::Span<const GenomeRecord> generation);
// The statistics without the diversity (left 0): no gene is read.
store::StatsRecord ComputeScoreStats(const skerry::v1::RunSpec& spec,
                                     absl::Span<const GenomeRecord> generation);

// True when a is strictly better than b under the spec's objective.
bool Better(const skerry::v1::RunSpec& spec, double a, double b);

// The evaluation seed of a genome: stream (seed, island, generation, kEvalSeed,
// slot). The same on every attempt and every worker.
uint64_t EvalSeed(const skerry::v1::RunSpec& spec, uint32_t island,
                  uint32_t generation, uint32_t slot);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_BREEDER_H_
