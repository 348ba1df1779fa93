// The rows of a run's genomes and per-generation statistics, as plain
// structs: what the store writes and reads, and what the pure breeder
// (server/engine/breeder.h) computes. This header knows no SQLite, so the
// genetic algorithm can be built and tested without the store.
//
// Invariant: a GenomeRecord is keyed by (run_id, island, generation, slot);
// id is the store's row id (0 until stored).
// Thread safety: plain values; no shared state.
#ifndef SKERRY_SERVER_STORE_RECORDS_H_
#define SKERRY_SERVER_STORE_RECORDS_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "common/child_recipe.h"
#include "common/sample_recipe.h"
#include "skerry/v1/genome.pb.h"

namespace skerry::store {

struct GenomeRecord {
  int64_t id = 0;
  int64_t run_id = 0;
  uint32_t island = 0;
  uint32_t generation = 0;
  uint32_t slot = 0;
  skerry::v1::Origin origin = skerry::v1::SEEDED;
  int64_t parent_a = 0;
  int64_t parent_b = 0;
  // Set by a strategy for a link into the genome's own generation (a sample's
  // distribution genome, whose id the strategy cannot know): parent_a is the
  // genome of the same run, island and generation at this slot, inserted
  // before it in the same Store::InsertGenomes batch, which fills parent_a.
  // -1: parent_a is as given.
  int32_t parent_a_slot = -1;
  std::vector<double> genes;
  // A natural ES sample (common/sample_recipe.h): the store keeps this in
  // place of the genes, and rebuilds the genes from it and its distribution
  // genome (parent a) whenever it reads the genome. In the engine's memory
  // such a sample holds no genes (`genes` is empty): whatever needs them
  // builds them from the recipe and its generation's slot 0
  // (engine::SampleGenes, strategy.h); the store stores the recipe alone.
  std::optional<SampleRecipe> recipe;
  // A GA genome's recipe (common/child_recipe.h), set by the breeder when the
  // run keeps recipes (KeyframeInterval(spec) > 1, common/spec.h). The store
  // keeps the recipe, with the genes too when `keyframe`; reading the genome
  // gives both, the genes rebuilt from its ancestors when they were not
  // kept (store/replay.h). In the engine's memory such a genome has genes.
  std::optional<ChildRecipe> child_recipe;
  bool keyframe = false;
  double score = 0.0;
  skerry::v1::EvalState state = skerry::v1::PENDING;
  uint32_t attempts = 0;
  std::string error;
  double eval_seconds = 0.0;
};

struct StatsRecord {
  int64_t run_id = 0;
  uint32_t island = 0;
  uint32_t generation = 0;
  double best = 0.0;
  double mean = 0.0;
  double worst = 0.0;
  double diversity = 0.0;
  uint32_t evaluations = 0;
  uint32_t failed = 0;
  double eval_seconds = 0.0;
  int64_t completed_ms = 0;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_RECORDS_H_
