// The rows the stores write and read, as plain structs: runs, islands,
// genomes and per-generation statistics (what the pure breeder,
// server/engine/breeder.h, computes), results, validations, a generation's
// commit and workers. This header knows no SQLite, so the genetic algorithm
// can be built and tested without the store.
//
// Invariant: a GenomeRecord is keyed by (run_id, island, generation, slot);
// id is the store's row id (0 until stored).
// Thread safety: plain values; no shared state.
#ifndef SKERRY_SERVER_STORE_RECORDS_H_
#define SKERRY_SERVER_STORE_RECORDS_H_

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "common/child_recipe.h"
#include "common/sample_recipe.h"
#include "skerry/v1/genome.pb.h"
#include "skerry/v1/runs.pb.h"
#include "skerry/v1/spec.pb.h"
#include "skerry/v1/validation.pb.h"

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
  // before it in the same GenomeStore::Insert batch, which fills parent_a.
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

struct RunRecord {
  int64_t id = 0;
  std::string name;
  std::string owner;
  skerry::v1::RunSpec spec;
  std::string spec_text;
  skerry::v1::RunState state = skerry::v1::QUEUED;
  int32_t priority = 1;
  std::string message;
  int64_t created_ms = 0;
  int64_t updated_ms = 0;
  int64_t started_ms = 0;
  int64_t evaluations = 0;
  int64_t champion_id = 0;
  std::optional<double> best_score;
  std::optional<uint32_t> stop_generation;
  // The client's id of the SubmitRun that made it; empty when none was given.
  std::string request_id;
  // A fork's parent run and the generation it started from (fork_store.cc);
  // 0 for a run submitted anew.
  int64_t parent_run = 0;
  uint32_t parent_generation = 0;
  // Set by ListRuns when the stored row does not match its checksum or its
  // spec does not parse (DATA_LOSS naming the run); the fields may be wrong.
  absl::Status damage;
};

struct IslandRecord {
  int64_t run_id = 0;
  uint32_t index = 0;
  uint32_t generation = 0;
  bool done = false;
};

// One genome's evaluation outcome, or one failed attempt (state stays PENDING).
struct ResultUpdate {
  int64_t genome_id = 0;
  int64_t run_id = 0;
  skerry::v1::EvalState state = skerry::v1::EVALUATED;
  double score = 0.0;
  uint32_t attempts = 0;
  std::string error;
  double eval_seconds = 0.0;
  // The evaluator's named side measurements (EVALUATED only), already
  // bounded (common/metric_bounds.h); stored in genome_metrics.
  std::map<std::string, double> metrics;
};

// A held-out validation of one genome (validation.proto Validation).
struct ValidationRecord {
  int64_t id = 0;
  int64_t run_id = 0;
  int64_t genome_id = 0;
  uint32_t island = 0;  // the genome's natural key, read from genomes
  uint32_t generation = 0;
  uint32_t slot = 0;
  skerry::v1::ValidationReason reason = skerry::v1::REQUESTED;
  skerry::v1::ValidationState state = skerry::v1::VALIDATION_PENDING;
  double score = 0.0;
  uint32_t cases = 0;
  uint32_t attempts = 0;
  std::string error;
  std::string requested_by;
  int64_t requested_ms = 0;
  int64_t completed_ms = 0;
  int64_t copied_from = 0;
  // The genome's training outcome, read from genomes.
  skerry::v1::EvalState training_state = skerry::v1::PENDING;
  double training_score = 0.0;
  // The genome's genes: filled by PendingValidations only.
  std::vector<double> genes;
};

struct ValidationRequest {
  int64_t genome_id = 0;
  uint32_t cases = 0;
  skerry::v1::ValidationReason reason = skerry::v1::REQUESTED;
  std::string requested_by;
  int64_t now_ms = 0;
  // The genome with its genes, when the caller has them: a genome validated
  // is kept whole in the same transaction (GenomeStore::KeepWhole).
  const GenomeRecord* genome = nullptr;
};

// One validation's outcome, or one failed attempt (state stays PENDING).
struct ValidationUpdate {
  int64_t id = 0;
  skerry::v1::ValidationState state = skerry::v1::VALIDATION_DONE;
  double score = 0.0;
  uint32_t attempts = 0;
  std::string error;
  int64_t now_ms = 0;
};

struct GenerationCommit {
  int64_t run_id = 0;
  uint32_t island = 0;
  StatsRecord completed;  // statistics of the generation just completed
  bool island_done = false;
  // The next generation (empty when the island is done). Ids are filled in.
  std::vector<GenomeRecord>* next = nullptr;
  // The run's best so far, when it changed.
  std::optional<std::pair<int64_t, double>> champion;
  // The new champion, with its genes: kept whole from this commit on (a
  // keyframe, GenomeStore::KeepWhole) when it is a GA genome kept as its
  // recipe alone. (The genome to validate is kept whole by `validate`.)
  const GenomeRecord* champion_genome = nullptr;
  // Set when this generation reached the target score: the run's stop
  // generation becomes the smaller of this and any stored one.
  std::optional<uint32_t> stop_generation;
  // Validate this genome (the completed generation's champion).
  std::optional<ValidationRequest> validate;
  // The island's strategy state after producing `next` (a serialised
  // StrategyState); unset: unchanged.
  std::optional<std::string> strategy_state;
};

struct WorkerRecord {
  int64_t id = 0;
  std::string name;
  std::string host;
  uint32_t threads = 0;
  std::string evaluators;  // comma-separated
  std::string version;
  int64_t joined_ms = 0;
  int64_t last_seen_ms = 0;
  std::string sandbox;  // JoinRequest.sandbox: "bwrap", "none: <reason>"
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_RECORDS_H_
