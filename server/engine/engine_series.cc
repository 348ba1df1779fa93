// Engine: seed series and run extension (engine.h, SubmitSeries and Extend).
#include <cmath>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "common/strategy_spec.h"
#include "server/engine/breeder.h"
#include "server/engine/engine.h"
#include "server/engine/strategy_replay.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;

// InvalidArgument unless `raised` is at least `stored` (0 stored: no limit,
// which nothing raises).
template <class T>
absl::Status CheckRaised(const char* field, T stored, T raised) {
  if (stored == 0) {
    return absl::InvalidArgumentError(
        absl::StrCat(field,
                     ": the run has no such limit, so setting one "
                     "would not raise it"));
  }
  if (raised < stored) {
    return absl::InvalidArgumentError(
        absl::StrCat(field, ": ", raised, " is below the run's ", stored,
                     "; an extension only raises the stop rule"));
  }
  return absl::OkStatus();
}

}  // namespace

absl::StatusOr<std::vector<store::RunRecord>> Engine::SubmitSeries(
    RunSpec spec, std::string spec_text, store::SeriesRecord* series,
    uint32_t priority) {
  if (priority == 0) priority = scheduler::kMinWeight;
  SKERRY_RETURN_IF_ERROR(CheckPriority(priority));
  std::vector<store::RunRecord> records;
  std::vector<std::vector<GenomeRecord>> genomes;
  std::vector<std::vector<std::unique_ptr<Strategy>>> strategies;
  std::vector<std::vector<std::string>> states;
  const int64_t now = clock_->WallMillis();
  for (const auto& [run_id, seed] : series->members) {
    spec.set_seed(seed);
    SKERRY_ASSIGN_OR_RETURN(RunSpec prepared, PrepareSpec(spec));
    // As in Submit: generation 0 before the lock is taken.
    std::vector<GenomeRecord> g0;
    std::vector<std::unique_ptr<Strategy>> run_strategies;
    std::vector<std::string> run_states;
    SKERRY_RETURN_IF_ERROR(
        SeedIslands(prepared, &g0, &run_strategies, &run_states));
    strategies.push_back(std::move(run_strategies));
    states.push_back(std::move(run_states));
    store::RunRecord rec;
    rec.name = prepared.name();
    rec.owner = series->owner;
    rec.priority = static_cast<int32_t>(priority);
    rec.spec = std::move(prepared);
    rec.spec_text = spec_text;
    rec.state = skerry::v1::RUNNING;
    rec.created_ms = rec.updated_ms = rec.started_ms = now;
    records.push_back(std::move(rec));
    genomes.push_back(std::move(g0));
  }
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  if (absl::Status s =
          store_->runs().CreateSeries(series, &records, &genomes, &states);
      !s.ok()) {
    if (!absl::IsAlreadyExists(s)) NoteWriteFailure(s);
    return s;
  }
  for (size_t i = 0; i < records.size(); ++i) {
    Activate(records[i], std::move(genomes[i]), std::move(strategies[i]));
  }
  return records;
}

absl::Status Engine::Extend(int64_t run_id, const skerry::v1::StopSpec& stop) {
  SKERRY_ASSIGN_OR_RETURN(store::RunRecord rec, store_->runs().GetRun(run_id));
  {
    absl::MutexLock l(&mu_);
    if (auto d = damaged_.find(run_id); d != damaged_.end()) {
      return d->second.why;
    }
    if (runs_.count(run_id) != 0 || (rec.state != skerry::v1::FINISHED &&
                                     rec.state != skerry::v1::STOPPED)) {
      return absl::FailedPreconditionError(absl::StrCat(
          "run ", run_id, " is ", skerry::v1::RunState_Name(rec.state),
          "; only a FINISHED or STOPPED run can be extended"));
    }
  }
  RunSpec spec = rec.spec;
  KeepGenomeLayout(rec.spec, &spec);
  skerry::v1::StopSpec* rule = spec.mutable_stop();
  if (stop.max_generations() != 0) {
    SKERRY_RETURN_IF_ERROR(CheckRaised(
        "max_generations", rule->max_generations(), stop.max_generations()));
    rule->set_max_generations(stop.max_generations());
  }
  if (stop.max_evaluations() != 0) {
    SKERRY_RETURN_IF_ERROR(CheckRaised(
        "max_evaluations", rule->max_evaluations(), stop.max_evaluations()));
    rule->set_max_evaluations(stop.max_evaluations());
  }
  if (stop.max_wall_seconds() != 0) {
    SKERRY_RETURN_IF_ERROR(CheckRaised(
        "max_wall_seconds", rule->max_wall_seconds(), stop.max_wall_seconds()));
    rule->set_max_wall_seconds(stop.max_wall_seconds());
  }
  if (stop.has_target_score()) {
    if (!rule->has_target_score()) {
      return absl::InvalidArgumentError(
          "target_score: the run has no target, so setting one would not "
          "raise its stop rule");
    }
    const bool maximize = spec.objective() == skerry::v1::MAXIMIZE;
    const double stored = rule->target_score();
    const double wanted = stop.target_score();
    if (!std::isfinite(wanted) ||
        (maximize ? wanted < stored : wanted > stored)) {
      return absl::InvalidArgumentError(absl::StrCat(
          "target_score: ", wanted, " is not past the run's ", stored, " (",
          maximize ? "maximising: it may only go up"
                   : "minimising: it may only go down",
          ")"));
    }
    rule->set_target_score(wanted);
  }
  SKERRY_ASSIGN_OR_RETURN(RunSpec prepared, PrepareSpec(std::move(spec)));
  // Each island goes on from the strategy state that produced the generation
  // it is at; rebuilding one by replay may take as long as breeding the run
  // again, so it is done without the engine's lock. An ended run's rows do
  // not change meanwhile, and the store refuses the extension if the run
  // was extended, deleted or archived since (its state is checked again in
  // the extension's transaction).
  absl::StatusOr<std::vector<std::string>> states = StatesToGoOn(*store_, rec);
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  if (auto d = damaged_.find(run_id); d != damaged_.end()) return d->second.why;
  if (!states.ok()) {
    if (absl::IsDataLoss(states.status())) {
      MarkDamaged(run_id, states.status(), &rec);
    }
    return states.status();
  }
  if (absl::Status s = store_->runs().ExtendRun(run_id, prepared,
                                                clock_->WallMillis(), *states);
      !s.ok()) {
    if (absl::IsDataLoss(s)) {
      MarkDamaged(run_id, s, &rec);
    } else if (!absl::IsNotFound(s) && !absl::IsFailedPrecondition(s)) {
      NoteWriteFailure(s);
    }
    return s;
  }
  SKERRY_ASSIGN_OR_RETURN(rec, store_->runs().GetRun(run_id));
  absl::Status loaded = LoadRun(rec);
  if (absl::IsDataLoss(loaded)) MarkDamaged(run_id, loaded, &rec);
  NotifyChange();
  return loaded;
}

}  // namespace skerry::engine
