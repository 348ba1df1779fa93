// The genomes of every run: their rows, their evaluation results, their
// evaluator metrics, the rebuilding of genomes kept as recipes, and the run
// digest (tables genomes and genome_metrics; schema in store.h).
//
// ## Commit points
// Each is one transaction on the database's writer; a change is acknowledged
// only after it.
//   CommitResults      a batch of results (group commit of many Report
//                      calls), the runs' evaluation counters, and the
//                      validation outcomes reported with them
// Insert writes a generation's rows inside another store's transaction
// (RunStore's CreateRun, CommitGeneration, CreateFork...).
//
// ## Genes as stored
// `genes` is packed little-endian float64 or float32 (common/genes.h), a
// natural ES sample's recipe (common/sample_recipe.h), or a GA genome's recipe
// with or without its genes (common/child_recipe.h). Every read gives the
// genes whatever the form, rebuilt when they were not kept (RebuildSamples,
// RebuildChildren), unless the caller asks for less (Genes).
//
// ## Reads
// Every read runs on a connection of the read pool (read_pool.h) in one
// snapshot of the newest commit: a long digest does not delay a commit.
// Every row read is checked against its checksum (row_sums.h): DATA_LOSS
// names run, island, generation and slot.
//
// Invariant: a genome's parents have smaller ids than it (the replay of
// recipes relies on it); ids are never given twice (Database::LargestId).
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_STORE_GENOME_STORE_H_
#define SKERRY_SERVER_STORE_GENOME_STORE_H_

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"
#include "server/store/database.h"
#include "server/store/records.h"
#include "server/store/replay.h"
#include "server/store/sqlite.h"

namespace skerry::store {

class GenomeStore {
 public:
  explicit GenomeStore(Database* db) : db_(db) {}

  // ---- Commit points ----
  // Results and validation outcomes reported together commit together.
  absl::Status CommitResults(
      absl::Span<const ResultUpdate> results,
      absl::Span<const ValidationUpdate> validations = {});

  // Keeps `genome` whole from now on, a keyframe (its recipe and then its
  // genes, common/child_recipe.h), when it is a GA genome stored as its
  // recipe alone and `genome.genes` holds its genes: what is exported,
  // validated or asked for is then read without a replay. The row changes
  // only while it holds the recipe alone; anything else (a genome stored
  // whole, one without its genes at hand) writes nothing. One transaction;
  // nothing is written to a read-only database.
  absl::Status KeepWhole(const GenomeRecord& genome);
  // The same in the writer's open transaction.
  static absl::Status KeepWhole(Database::Writer& w,
                                const GenomeRecord& genome);

  // Inserts `genomes` in the writer's open transaction and fills in their
  // ids (above every id ever given) and the parent links into their own
  // generation (GenomeRecord::parent_a_slot).
  static absl::Status Insert(Database::Writer& w,
                             std::vector<GenomeRecord>* genomes);

  // ---- Reads ----
  // Which genes a generation is read with.
  enum class Genes {
    kAll,  // every genome's
    // Natural ES samples come as their recipes alone, with no genes
    // (records.h), as the engine holds them: rebuilding them costs a draw
    // per gene. GA genomes kept as recipes are rebuilt (replay.h).
    kNotSamples,
    // Only what is stored whole (the scores and links are wanted, not the
    // genes): nothing is rebuilt.
    kStored,
  };
  // A generation in slot order.
  absl::StatusOr<std::vector<GenomeRecord>> GetGeneration(
      int64_t run_id, uint32_t island, uint32_t generation,
      Genes genes = Genes::kAll);
  // NotFound names the genome. Genes::kStored: its genes only when stored
  // whole (nothing rebuilt), for a caller that wants its key or score.
  absl::StatusOr<GenomeRecord> GetGenome(int64_t genome_id,
                                         Genes genes = Genes::kAll);
  // The best evaluated genome of a run; ties go to the earliest generation,
  // then the lowest island, then the lowest slot.
  absl::StatusOr<std::optional<GenomeRecord>> BestGenome(int64_t run_id);
  // FAILED genomes of a run, newest first, at most `limit`; and how many.
  // Their genes only when stored whole (Genes::kStored): nothing is rebuilt
  // for a run's summary.
  absl::StatusOr<std::vector<GenomeRecord>> FailedGenomes(int64_t run_id,
                                                          int limit);
  absl::StatusOr<uint64_t> CountFailed(int64_t run_id);
  // A genome's evaluator metrics (metrics.cc); empty when it has none.
  absl::StatusOr<std::map<std::string, double>> GetGenomeMetrics(
      int64_t genome_id);
  // Each metric's mean per (island, generation) over the run's genomes.
  absl::StatusOr<
      std::map<std::pair<uint32_t, uint32_t>, std::map<std::string, double>>>
  MetricMeans(int64_t run_id);
  // Migrants per (island, generation) that received them, by the island of
  // each migrant's parent (migrations.cc).
  absl::StatusOr<
      std::map<std::pair<uint32_t, uint32_t>, std::map<uint32_t, uint32_t>>>
  MigrationCounts(int64_t run_id);
  // The run digest documented with DigestResponse in runs.proto.
  struct Digest {
    std::string sha256;
    uint64_t genomes = 0;
  };
  absl::StatusOr<Digest> RunDigest(int64_t run_id);

  // ---- On a connection the caller holds ----
  // `conn`: the writer (Database::Writer::conn) or a reader's lease.
  //
  // The best evaluated genome of a run, as BestGenome.
  static absl::StatusOr<std::optional<GenomeRecord>> BestGenomeOn(
      Connection* conn, int64_t run_id);
  // The genomes `stmt` selects (kGenomeColumns... see GenomeColumns), with
  // the genes `genes` says: natural ES samples rebuilt from their
  // distribution genomes (RebuildSamples), GA genomes kept as recipes from
  // their ancestry (RebuildChildren).
  static absl::StatusOr<std::vector<GenomeRecord>> QueryGenomes(
      Connection* conn, Statement* stmt, Genes genes = Genes::kAll);
  // The columns QueryGenomes reads, in its order, for "SELECT <them> FROM
  // genomes ...".
  static const std::string& GenomeColumns();
  // Gives every genome stored as a recipe (common/sample_recipe.h) its
  // genes, from its distribution genome: one of `genomes`, else read on
  // `conn`. DataLoss when that genome is missing or not a distribution's.
  static absl::Status RebuildSamples(Connection* conn,
                                     std::vector<GenomeRecord>* genomes);
  // Gives every GA genome kept as its recipe its genes, replayed from its
  // ancestry read on `conn` (replay.h); `known`: genes already at hand.
  static absl::Status RebuildChildren(Connection* conn,
                                      std::vector<GenomeRecord>* genomes,
                                      const GeneCache* known = nullptr);
  // Rebuilds up to `sample` of the run's keyframes (GA genomes kept whole
  // with their recipe) from their recipes and ancestry, as if their genes
  // were not kept, and describes each one whose rebuilt genes differ from the
  // stored ones or that cannot be rebuilt (what `--check` reports). The
  // first keyframes in (generation, island, slot) order: their ancestry is
  // the shortest.
  static absl::StatusOr<std::vector<std::string>> CheckKeyframes(
      Connection* conn, int64_t run_id, int sample);
  // The genes of genome `id` whose stored blob is `blob`: unpacked, or
  // rebuilt when the blob is a recipe, as every genome read is. DataLoss
  // names the genome.
  static absl::StatusOr<std::vector<double>> GenesOf(Connection* conn,
                                                     int64_t id,
                                                     const std::string& blob,
                                                     int64_t parent_a,
                                                     int64_t parent_b);

 private:
  static absl::Status InsertMetrics(Database::Writer& w, const ResultUpdate& r);
  absl::StatusOr<Digest> RunDigestUnnamed(int64_t run_id);

  Database* const db_;
};

// SQL: `column` holds a GA genome's recipe (common/child_recipe.h), alone or
// with its genes (a keyframe): its first byte kChildRecipeTag, at least
// kChildRecipeBytes long.
std::string IsChildRecipeSql(absl::string_view column);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_GENOME_STORE_H_
