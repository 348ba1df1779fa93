// The search strategy of one island, as the engine drives it.
//
// The engine knows no strategy: for every island it asks a Strategy for
// generation 0, and whenever a generation is complete it tells the strategy
// the scores (with the migrants that arrive at an epoch) and asks for the next
// generation. Each genome the strategy returns carries its origin and parent
// links; ids and run ids are left 0 for the store to fill in.
//
// State: whatever a strategy keeps between generations is saved as a
// StrategyState (proto/skerry/v1/strategy.proto) and stored in the same
// transaction as the generation it produced, so a coordinator killed at any
// instant restores it with Restore() and continues bit for bit. Every random
// number comes from the counter-based streams of common/random.h, keyed by
// (seed, island, generation, purpose, slot), never from the strategy's state.
//
// Protocol, per island: Start() once (generation 0); then, for each completed
// generation g in order, Tell(g's genomes, migrants) followed by Ask() for
// generation g + 1. Save() may be called at any time; after Restore(s) the
// strategy is as it was when s was saved. A Tell that the engine could not
// commit is undone by Restore()ing the state saved before it.
//
// Thread safety: an instance belongs to one island; the engine calls it under
// its mutex. Distinct instances are independent.
#ifndef SKERRY_SERVER_ENGINE_STRATEGY_H_
#define SKERRY_SERVER_ENGINE_STRATEGY_H_

#include <cstdint>
#include <memory>
#include <optional>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/store/store.h"
#include "skerry/v1/spec.pb.h"
#include "skerry/v1/strategy.pb.h"

namespace skerry::engine {

class Strategy {
 public:
  virtual ~Strategy() = default;

  // Generation 0 of the island.
  virtual absl::StatusOr<std::vector<store::GenomeRecord>> Start() = 0;

  // The completed generation (sorted by slot, every genome EVALUATED or
  // FAILED) and the migrants chosen for the next one (empty outside epochs).
  // InvalidArgument when the scores cannot be used (the message names the
  // generation); the engine then fails the run.
  virtual absl::Status Tell(
      absl::Span<const store::GenomeRecord> completed,
      absl::Span<const store::GenomeRecord* const> migrants) = 0;

  // The next generation, from what the last Tell said.
  virtual absl::StatusOr<std::vector<store::GenomeRecord>> Ask() = 0;

  // Tell, then Ask: what the engine calls. The default is those two calls; a
  // strategy that would copy the completed generation in Tell only to breed
  // from it in Ask (the GA) breeds from `completed` directly instead, so
  // that a generation's genes are not held twice while the next is bred.
  virtual absl::StatusOr<std::vector<store::GenomeRecord>> TellAndAsk(
      absl::Span<const store::GenomeRecord> completed,
      absl::Span<const store::GenomeRecord* const> migrants) {
    if (absl::Status told = Tell(completed, migrants); !told.ok()) {
      return told;
    }
    return Ask();
  }

  virtual skerry::v1::StrategyState Save() const = 0;
  // InvalidArgument (DataLoss-worthy; the caller says where it came from) when
  // the state is not one this strategy saved.
  virtual absl::Status Restore(const skerry::v1::StrategyState& state) = 0;

  // True when the strategy keeps nothing between generations that is not in
  // the genomes themselves: its state at generation g is the kind and g. A
  // fork (strategy_replay.h) then needs no replay of the generations before.
  // The default, false, is always correct, only slower to fork.
  virtual bool StateIsPopulation() const { return false; }

  // The diversity of the generation last told (StatsRecord.diversity), when
  // Tell measured it: a generation whose samples the engine keeps as recipes
  // without their genes (gene_spread.h), which Tell rebuilds one pair at a
  // time anyway. Empty otherwise, or when the last call was not a Tell.
  virtual std::optional<double> ToldDiversity() const { return std::nullopt; }
};

// What an evolution strategy with distribution genomes
// (strategy.distribution_genomes, HasDistributionGenomes) adds to each
// generation: slot 0 holds the search distribution's centre as a genome of
// its own (origin DISTRIBUTION), evaluated like the samples, whose parent a
// is the previous generation's distribution genome (none at the start and
// after a restart from a new start) and parent b the migrant that became the
// centre (none if no migrant did); the samples, at slots 1.., name it as
// their parent a. Off (old runs), a generation is the samples alone, at
// slots 0.., without parents. The strategies keep one and save its ids in
// their state (StrategyState.distribution_parent and _migrant).
class DistributionGenomes {
 public:
  explicit DistributionGenomes(const skerry::v1::RunSpec& spec);

  bool on() const { return on_; }

  // The samples of a completed generation: all but its distribution genome.
  absl::Span<const store::GenomeRecord> Samples(
      absl::Span<const store::GenomeRecord> completed) const;
  // The slot count of a generation of `samples` samples.
  size_t GenerationSize(size_t samples) const {
    return samples + (on_ ? 1 : 0);
  }

  // After a Tell of `completed`: the next distribution genome's parents are
  // its distribution genome and `adopted` (nullptr: none). `restarted`: the
  // search began again from a new start, so the next one has no parent a.
  void Told(absl::Span<const store::GenomeRecord> completed,
            const store::GenomeRecord* adopted, bool restarted);

  // Puts the distribution genome of `generation` (genes `centre`, clamped to
  // [lower, upper]) first, renumbers the samples' slots after it and links
  // them to it. Nothing when off.
  void Add(uint32_t island, uint32_t generation,
           absl::Span<const double> centre, double lower, double upper,
           std::vector<store::GenomeRecord>* samples) const;

  void Save(skerry::v1::StrategyState* state) const;
  void Restore(const skerry::v1::StrategyState& state);
  void Clear() { parent_ = migrant_ = 0; }

 private:
  const bool on_;
  int64_t parent_ = 0;
  int64_t migrant_ = 0;
};

// The strategy the spec names, for `island`.
absl::StatusOr<std::unique_ptr<Strategy>> MakeStrategy(
    const skerry::v1::RunSpec& spec, uint32_t island);

// A genome's genes as the engine needs them (a migrant, a validation, a task
// for a worker that takes no recipes): its own, or for a sample the engine
// keeps as its recipe alone (records.h) those BuildSample makes from the
// recipe and its distribution genome, slot 0 of `generation`, the generation
// the sample belongs to. InvalidArgument naming the genome when slot 0 is not
// its distribution genome or the recipe does not fit it.
absl::StatusOr<std::vector<double>> SampleGenes(
    absl::Span<const store::GenomeRecord> generation,
    const store::GenomeRecord& genome);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_STRATEGY_H_
