#include "server/engine/engine.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <deque>
#include <iterator>
#include <optional>

#include "absl/container/flat_hash_set.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/metric_bounds.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "server/engine/breeder.h"
#include "server/engine/gene_spread.h"
#include "server/engine/island_step.h"
#include "server/engine/topology.h"
#include "server/store/row_sums.h"

namespace skerry::engine {

namespace {

// A completed generation kept for migration holds no genes (the coordinator's
// memory is the generation being evaluated, not the ones before it): a
// migrant chosen from it reads its genes back (Engine::AdvanceIsland). A
// distribution genome keeps its genes, from which its samples are built.
void DropGenes(std::vector<store::GenomeRecord>* generation,
               const absl::flat_hash_set<int64_t>& keep = {}) {
  for (store::GenomeRecord& g : *generation) {
    if (g.origin != skerry::v1::DISTRIBUTION && !keep.contains(g.id))
      std::vector<double>().swap(g.genes);
  }
}

// The genomes of a completed generation that will emigrate, when the run
// keeps GA genomes as recipes: reading a migrant's genes back would replay
// its ancestry (store/replay.h), so the engine keeps those few. Emigrants
// are chosen from the generation and the destination alone (breeder.h), so
// they are known now: for each island taking migrants from this one at the
// next epoch, or, in asynchronous mode, for every other island.
absl::flat_hash_set<int64_t> EmigrantsToKeep(
    const skerry::v1::RunSpec& spec, uint32_t island,
    const std::vector<store::GenomeRecord>& generation) {
  absl::flat_hash_set<int64_t> keep;
  if (KeyframeInterval(spec) <= 1 || generation.empty()) return keep;
  const uint32_t g = generation.front().generation;
  const bool asynchronous = spec.islands().asynchronous();
  if (!asynchronous && !IsMigrationEpoch(spec, g + 1)) return keep;
  const uint32_t count = std::max<uint32_t>(1, spec.islands().count());
  for (uint32_t d = 0; d < count; ++d) {
    if (d == island) continue;
    if (!asynchronous) {
      const std::vector<uint32_t> sources = Sources(spec, d, g + 1);
      if (std::find(sources.begin(), sources.end(), island) == sources.end()) {
        continue;
      }
    }
    for (const store::GenomeRecord* m :
         ChooseEmigrants(spec, generation, d, spec.islands().migrants())) {
      keep.insert(m->id);
    }
  }
  return keep;
}

using skerry::v1::RunSpec;
using store::GenomeRecord;

// Completed generations kept in memory per island for migration; older ones are
// read back from the store when a lagging neighbour asks for them.
constexpr size_t kCompletedKept = 3;

// The most of an evaluation's error text that is stored.
constexpr size_t kMaxErrorBytes = 64 << 10;

bool IsActive(skerry::v1::RunState s) {
  return s == skerry::v1::QUEUED || s == skerry::v1::RUNNING ||
         s == skerry::v1::PAUSED;
}

bool MeetsTarget(const RunSpec& spec, double best) {
  if (!spec.stop().has_target_score()) return false;
  return spec.objective() == skerry::v1::MAXIMIZE
             ? best >= spec.stop().target_score()
             : best <= spec.stop().target_score();
}

// The island's share of the evaluation budget: proportional to its population.
uint64_t EvaluationShare(const RunSpec& spec, uint32_t island) {
  uint64_t total = 0;
  for (uint32_t i = 0; i < spec.islands().count(); ++i) {
    total += IslandPopulation(spec, i);
  }
  const uint64_t budget = spec.stop().max_evaluations();
  const uint64_t pop = IslandPopulation(spec, island);
  return (budget * pop + total - 1) / total;  // ceiling
}

}  // namespace

absl::StatusOr<std::unique_ptr<Engine>> Engine::Open(
    store::Store* store, scheduler::TaskQueue* queue, Clock* clock) {
  std::unique_ptr<Engine> engine(new Engine(store, queue, clock));
  {
    absl::MutexLock l(&engine->mu_);
    SKERRY_RETURN_IF_ERROR(engine->Load());
    SKERRY_RETURN_IF_ERROR(engine->LoadValidations());
  }
  Engine* e = engine.get();
  GroupCommit::Callbacks callbacks;
  callbacks.apply = [e](absl::Span<ReportJob* const> jobs,
                        const std::function<void()>& answer) {
    e->ApplyReports(jobs, answer);
  };
  callbacks.idle = [e] { e->Idle(); };
  // A commit still running at shutdown's deadline is interrupted: its
  // transaction rolls back, its results were not acknowledged.
  callbacks.interrupt = [store] { store->db().Interrupt(); };
  engine->committer_ = std::make_unique<GroupCommit>(std::move(callbacks),
                                                     clock, absl::Seconds(1));
  engine->committer_->Start();
  return engine;
}

absl::StatusOr<std::unique_ptr<Engine>> Engine::OpenReadOnly(
    store::Store* store, scheduler::TaskQueue* queue, Clock* clock) {
  std::unique_ptr<Engine> engine(new Engine(store, queue, clock, true));
  {
    absl::MutexLock l(&engine->mu_);
    SKERRY_RETURN_IF_ERROR(engine->Load());
  }
  return engine;  // no committer thread: nothing is ever written
}

Engine::~Engine() { Shutdown(); }

void Engine::Shutdown() {
  if (committer_ != nullptr) committer_->Shutdown();
}

absl::Status Engine::Load() {
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::RunRecord> runs,
                          store_->runs().ListRuns());
  for (const store::RunRecord& r : runs) {
    if (!r.damage.ok()) {
      MarkDamaged(r.id, r.damage, &r);
      continue;
    }
    if (!IsActive(r.state)) continue;
    absl::Status s = LoadRun(r);
    if (absl::IsDataLoss(s)) {
      MarkDamaged(r.id, s, &r);
      continue;
    }
    SKERRY_RETURN_IF_ERROR(s);
  }
  return absl::OkStatus();
}

void Engine::MarkDamaged(int64_t run_id, const absl::Status& why,
                         const store::RunRecord* record) {
  if (damaged_.count(run_id) != 0) return;
  Damaged d;
  auto it = runs_.find(run_id);
  if (it != runs_.end()) {
    d.record = it->second->record;
  } else if (record != nullptr) {
    d.record = *record;
  } else {
    d.record.id = run_id;
  }
  // SQLite's own findings do not say whose rows they are in.
  const std::string prefix = absl::StrCat("run ", run_id, " ");
  d.why = absl::StartsWith(why.message(), prefix)
              ? why
              : absl::Status(why.code(),
                             absl::StrCat("run ", run_id,
                                          " is damaged: ", why.message()));
  std::fprintf(stderr,
               "skerry-coordinator: run %lld is damaged and stops: %s; the "
               "other runs go on\n",
               static_cast<long long>(run_id), why.ToString().c_str());
  queue_->RemoveRun(run_id);
  runs_.erase(run_id);
  damaged_[run_id] = std::move(d);
  NotifyChange();
}

void Engine::NoteRunWriteFailure(int64_t run_id, const absl::Status& s) {
  if (absl::IsDataLoss(s)) {
    MarkDamaged(run_id, s);
  } else if (IsStorageTrouble(s)) {
    NoteWriteFailure(s);
  } else if (auto it = runs_.find(run_id); it != runs_.end()) {
    // A bug, not the disk: the same write would fail every tick.
    FailRun(*it->second, absl::InternalError(absl::StrCat(
                             "the coordinator could not go on with this run: ",
                             s.ToString())));
  }
}

void Engine::NoteStorageTrouble(const absl::Status& s) {
  absl::MutexLock l(&mu_);
  NoteWriteFailure(s);
}

absl::Status Engine::LoadRun(const store::RunRecord& record) {
  auto run = std::make_unique<Run>();
  run->record = record;
  run->evaluator =
      std::make_shared<skerry::v1::EvaluatorSpec>(record.spec.evaluator());
  run->stop_generation = record.stop_generation;
  if (record.champion_id != 0) {
    // Its key alone: nothing rebuilt, whatever form its genes are kept in.
    SKERRY_ASSIGN_OR_RETURN(
        GenomeRecord champion,
        store_->genomes().GetGenome(record.champion_id,
                                    store::GenomeStore::Genes::kStored));
    run->champion_key =
        std::make_tuple(champion.generation, champion.island, champion.slot);
  }
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::IslandRecord> islands,
                          store_->runs().GetIslands(record.id));
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::StatsRecord> stats,
                          store_->runs().GetStats(record.id, std::nullopt));
  SKERRY_ASSIGN_OR_RETURN(auto states,
                          store_->runs().GetStrategyStates(record.id));
  for (const store::IslandRecord& ir : islands) {
    Island island;
    island.index = ir.index;
    SKERRY_ASSIGN_OR_RETURN(island.strategy,
                            MakeStrategy(record.spec, ir.index));
    skerry::v1::StrategyState state;
    auto stored = states.find(ir.index);
    // A run stored before strategy states were kept has none: its GA needs
    // none.
    if (stored != states.end() && !state.ParseFromString(stored->second)) {
      return absl::DataLossError(
          absl::StrCat("run ", record.id, " island ", ir.index,
                       ": the stored strategy state does not parse"));
    }
    if (absl::Status s = island.strategy->Restore(state); !s.ok()) {
      return absl::DataLossError(
          absl::StrCat("run ", record.id, ": ", s.message()));
    }
    island.generation = ir.generation;
    island.done = ir.done;
    for (const store::StatsRecord& s : stats) {
      if (s.island != ir.index) continue;
      island.evaluations += s.evaluations;
      island.last_stats = s;
    }
    // Samples kept as recipes come without genes, as when bred (records.h):
    // nothing here needs them, and rebuilding them would cost a draw a gene.
    // A GA generation being evaluated comes with its genes (replayed when
    // kept as recipes); a done island's needs none.
    SKERRY_ASSIGN_OR_RETURN(
        island.current, store_->genomes().GetGeneration(
                            record.id, ir.index, ir.generation,
                            ir.done ? store::GenomeStore::Genes::kStored
                                    : store::GenomeStore::Genes::kNotSamples));
    // A generation is written whole (invariant 3): a short one is damage (a
    // lost index entry, say), not a generation to finish with fewer genomes.
    const uint32_t pop = IslandPopulation(record.spec, ir.index);
    bool whole = island.current.size() == pop;
    for (size_t i = 0; whole && i < island.current.size(); ++i) {
      whole = island.current[i].slot == i;
    }
    if (!whole) {
      return store::DamagedRow(
          record.id, absl::StrCat("island ", ir.index, " generation ",
                                  ir.generation, " (", island.current.size(),
                                  " genomes read, ", pop, " expected)"));
    }
    if (island.done) {
      DropGenes(&island.current);
      island.completed[island.generation] = std::move(island.current);
      island.current.clear();
    } else {
      for (const GenomeRecord& g : island.current) {
        if (g.state == skerry::v1::PENDING) island.pending[g.id] = g.slot;
      }
    }
    run->islands.push_back(std::move(island));
  }
  Run& r = *run;
  runs_[record.id] = std::move(run);
  if (read_only_) return absl::OkStatus();  // no task, no breeding
  queue_->SetPaused(record.id, record.state == skerry::v1::PAUSED);
  // A hand-edited priority below 1 counts as 1; above the bound, as the bound.
  queue_->SetWeight(
      record.id, static_cast<uint32_t>(std::max<int32_t>(record.priority, 1)));
  for (const Island& island : r.islands) {
    if (!island.done) QueueIsland(r, island);
  }
  return Advance(r);
}

void Engine::QueueIsland(const Run& run, const Island& island) {
  std::vector<scheduler::TaskInfo> tasks;
  // A natural ES generation's samples may go as recipes: with them, their
  // centre (the distribution genome at slot 0), shared by every task.
  std::shared_ptr<const std::vector<double>> centre;
  if (!island.current.empty() &&
      island.current.front().origin == skerry::v1::DISTRIBUTION) {
    centre = std::make_shared<const std::vector<double>>(
        island.current.front().genes);
  }
  for (const GenomeRecord& g : island.current) {
    if (g.state != skerry::v1::PENDING) continue;
    scheduler::TaskInfo t;
    t.genome_id = g.id;
    t.run_id = run.record.id;
    t.island = island.index;
    t.generation = island.generation;
    t.slot = g.slot;
    t.genes = g.genes;
    t.float32 = run.record.spec.gene_precision() == skerry::v1::FLOAT32;
    t.eval_seed =
        EvalSeed(run.record.spec, island.index, island.generation, g.slot);
    t.evaluator = run.evaluator;
    t.attempts = g.attempts;
    if (g.origin == skerry::v1::DISTRIBUTION && centre != nullptr &&
        g.slot == 0 && island.current.size() > 1 &&
        island.current[1].recipe.has_value() &&
        island.current[1].recipe->length == centre->size()) {
      // The centre itself, as a recipe of sigma 0 naming its own genes
      // (common/sample_recipe.h): a worker that gets the samples' centre
      // anyway does not get the same genes a second time.
      SampleRecipe r = *island.current[1].recipe;
      r.pair = 0;
      r.minus = false;
      r.sigma = 0;
      t.recipe = r;
      t.genes.clear();  // the queue builds them for an older worker
      t.centre_id = g.id;
      t.centre = centre;
    } else if (g.recipe.has_value() && centre != nullptr &&
               g.parent_a == island.current.front().id &&
               g.recipe->length == centre->size()) {
      // The queue builds the genes for a worker that takes no recipes.
      t.recipe = g.recipe;
      t.centre_id = g.parent_a;
      t.centre = centre;
    } else if (t.genes.empty() && g.recipe.has_value()) {
      // Not a sample of this generation's centre (never so when bred here):
      // its genes, built now, or the error in place of a silent empty task.
      absl::StatusOr<std::vector<double>> genes =
          SampleGenes(island.current, g);
      if (!genes.ok()) {
        std::fprintf(stderr, "run %lld: not queued: %s\n",
                     static_cast<long long>(run.record.id),
                     genes.status().ToString().c_str());
        continue;
      }
      t.genes = *std::move(genes);
    }
    tasks.push_back(std::move(t));
  }
  queue_->Add(std::move(tasks));
}

absl::Status Engine::CheckPriority(uint32_t priority) {
  if (priority < scheduler::kMinWeight || priority > scheduler::kMaxWeight) {
    return absl::InvalidArgumentError(
        absl::StrCat("priority: must be from ", scheduler::kMinWeight, " to ",
                     scheduler::kMaxWeight, ", got ", priority));
  }
  return absl::OkStatus();
}

absl::Status Engine::SetPriority(int64_t run_id, uint32_t priority) {
  SKERRY_RETURN_IF_ERROR(CheckPriority(priority));
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  absl::Status s = store_->runs().SetRunPriority(
      run_id, static_cast<int32_t>(priority), clock_->WallMillis());
  if (!s.ok()) {
    if (!absl::IsNotFound(s)) NoteWriteFailure(s);
    return s;
  }
  if (auto it = runs_.find(run_id); it != runs_.end()) {
    it->second->record.priority = static_cast<int32_t>(priority);
  }
  // Also for an ended run: its validations may still be queued.
  queue_->SetWeight(run_id, priority);
  NotifyChange();
  return absl::OkStatus();
}

absl::StatusOr<store::RunRecord> Engine::Submit(RunSpec spec,
                                                std::string spec_text,
                                                std::string owner,
                                                uint32_t priority,
                                                std::string request_id) {
  if (priority == 0) priority = scheduler::kMinWeight;
  SKERRY_RETURN_IF_ERROR(CheckPriority(priority));
  SKERRY_ASSIGN_OR_RETURN(RunSpec prepared, PrepareSpec(std::move(spec)));
  // Generation 0 is a pure function of the spec: made before the lock is
  // taken, so that seeding a large run never stalls the other calls.
  std::vector<GenomeRecord> genomes;
  std::vector<std::unique_ptr<Strategy>> strategies;
  std::vector<std::string> states;
  SKERRY_RETURN_IF_ERROR(SeedIslands(prepared, &genomes, &strategies, &states));
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  store::RunRecord rec;
  rec.name = prepared.name();
  rec.owner = std::move(owner);
  rec.request_id = std::move(request_id);
  rec.priority = static_cast<int32_t>(priority);
  rec.spec = prepared;
  rec.spec_text = std::move(spec_text);
  rec.state = skerry::v1::RUNNING;
  rec.created_ms = rec.updated_ms = rec.started_ms = clock_->WallMillis();
  if (absl::Status s = store_->runs().CreateRun(&rec, &genomes, &states);
      !s.ok()) {
    NoteWriteFailure(s);
    return s;
  }

  Activate(rec, std::move(genomes), std::move(strategies));
  return rec;
}

absl::Status Engine::SeedIslands(
    const RunSpec& prepared, std::vector<GenomeRecord>* genomes,
    std::vector<std::unique_ptr<Strategy>>* strategies,
    std::vector<std::string>* states) {
  for (uint32_t i = 0; i < prepared.islands().count(); ++i) {
    SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<Strategy> strategy,
                            MakeStrategy(prepared, i));
    SKERRY_ASSIGN_OR_RETURN(std::vector<GenomeRecord> g0, strategy->Start());
    for (GenomeRecord& g : g0) genomes->push_back(std::move(g));
    states->push_back(strategy->Save().SerializeAsString());
    strategies->push_back(std::move(strategy));
  }
  return absl::OkStatus();
}

void Engine::Activate(const store::RunRecord& rec,
                      std::vector<GenomeRecord> genomes,
                      std::vector<std::unique_ptr<Strategy>> strategies) {
  const RunSpec& prepared = rec.spec;
  auto run = std::make_unique<Run>();
  run->record = rec;
  run->evaluator =
      std::make_shared<skerry::v1::EvaluatorSpec>(prepared.evaluator());
  run->islands.resize(prepared.islands().count());
  for (uint32_t i = 0; i < run->islands.size(); ++i) {
    run->islands[i].index = i;
    run->islands[i].strategy = std::move(strategies[i]);
  }
  for (GenomeRecord& g : genomes) {
    Island& island = run->islands[g.island];
    island.pending[g.id] = g.slot;
    island.current.push_back(std::move(g));
  }
  Run& r = *run;
  runs_[rec.id] = std::move(run);
  queue_->SetWeight(rec.id, static_cast<uint32_t>(rec.priority));
  for (const Island& island : r.islands) QueueIsland(r, island);
  NotifyChange();
}

absl::Status Engine::Pause(int64_t run_id) {
  return Transition(run_id, skerry::v1::RUNNING, skerry::v1::PAUSED, "paused");
}

absl::Status Engine::Resume(int64_t run_id) {
  return Transition(run_id, skerry::v1::PAUSED, skerry::v1::RUNNING, "resumed");
}

absl::Status Engine::Transition(int64_t run_id, skerry::v1::RunState from,
                                skerry::v1::RunState to, const char* verb) {
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  auto it = runs_.find(run_id);
  if (it == runs_.end() || it->second->record.state != from) {
    SKERRY_ASSIGN_OR_RETURN(store::RunRecord rec,
                            store_->runs().GetRun(run_id));
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", run_id, " is ", skerry::v1::RunState_Name(rec.state),
        "; only a ", skerry::v1::RunState_Name(from), " run can be ", verb));
  }
  const std::string message = to == skerry::v1::PAUSED ? "paused" : "";
  if (absl::Status s =
          store_->runs().SetRunState(run_id, to, message, clock_->WallMillis());
      !s.ok()) {
    NoteWriteFailure(s);
    return s;
  }
  it->second->record.state = to;
  queue_->SetPaused(run_id, to == skerry::v1::PAUSED);
  NotifyChange();
  return absl::OkStatus();
}

absl::Status Engine::Stop(int64_t run_id) {
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  auto it = runs_.find(run_id);
  if (it == runs_.end()) {
    SKERRY_ASSIGN_OR_RETURN(store::RunRecord rec,
                            store_->runs().GetRun(run_id));
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", run_id, " is already ", skerry::v1::RunState_Name(rec.state),
        "; nothing to stop"));
  }
  // A stopped run keeps every generation it made; no trimming.
  it->second->stop_generation.reset();
  return FinishRun(*it->second, skerry::v1::STOPPED, "stopped by a user");
}

absl::StatusOr<ReportOutcome> Engine::Report(
    int64_t worker_id, const std::vector<skerry::v1::TaskResult>& results) {
  return committer_->Submit(worker_id, results);
}

void Engine::Idle() {
  absl::MutexLock l(&mu_);
  for (int pass = 0; pass < kImmediatePasses && IdlePass(); ++pass) {
  }
}

bool Engine::IdlePass() {
  const bool held = !write_problem_.ok();
  RetryWrites();
  // While writes fail there is nothing to retry or breed.
  if (!write_problem_.ok()) return false;
  // Retry what a failed write left undone.
  std::vector<int64_t> ids;
  for (const auto& [id, run] : runs_) ids.push_back(id);
  for (int64_t id : ids) {
    auto it = runs_.find(id);
    if (it == runs_.end()) continue;
    absl::Status s = Advance(*it->second);
    if (!s.ok()) {
      std::fprintf(stderr, "run %lld: %s\n", static_cast<long long>(id),
                   s.ToString().c_str());
      NoteRunWriteFailure(id, s);
    }
  }
  return held && !write_problem_.ok();
}

void Engine::AwaitCommit() {
  auto quiet = [this]()
                   ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) { return !committing_; };
  mu_.Await(absl::Condition(&quiet));
}

void Engine::ApplyReports(absl::Span<ReportJob* const> jobs,
                          const std::function<void()>& answer) {
  using Applied = AppliedResult;
  std::vector<Applied> applied;
  std::vector<int64_t> claimed;  // task ids
  std::vector<store::ValidationUpdate> validated;
  std::vector<ValidatedResult> validated_from;  // one for each of validated
  std::vector<ReportOutcome> outcomes(jobs.size());
  {
    absl::MutexLock l(&mu_);
    ClaimResults(jobs, &applied, &claimed, &validated, &validated_from,
                 &outcomes);
    committing_ = true;
  }
  // The transaction is written and synced without the engine's lock, so that
  // summaries, lists and watches are answered meanwhile. Nothing it relies on
  // changes: every writer waits for committing_ to clear (AwaitCommit), and
  // the islands change only on this thread. What a read may do meanwhile
  // (mark a run damaged, which drops it) is checked for below.
  std::vector<store::ResultUpdate> updates;
  updates.reserve(applied.size());
  for (const Applied& a : applied) updates.push_back(a.update);
  absl::Status committed =
      updates.empty() && validated.empty()
          ? absl::OkStatus()
          : store_->genomes().CommitResults(updates, validated);
  absl::MutexLock l(&mu_);
  committing_ = false;
  if (!committed.ok() && !IsStorageTrouble(committed) &&
      !absl::IsDataLoss(committed)) {
    // Neither the disk nor damage: one result the store will not take must
    // not fail the others with it, nor come back every time it is resent.
    std::fprintf(stderr,
                 "skerry-coordinator: results not committed together (%s); "
                 "committing them one by one\n",
                 committed.ToString().c_str());
    SalvageBatch(&applied, &validated, &validated_from, &outcomes);
    committed = absl::OkStatus();
  }
  if (!committed.ok()) {
    queue_->Unclaim(claimed);
    std::fprintf(stderr, "results not committed: %s\n",
                 committed.ToString().c_str());
    if (absl::IsDataLoss(committed)) {
      // Damage, not a full disk: find the runs it is in and stop those.
      std::vector<int64_t> ids;
      for (const Applied& a : applied) ids.push_back(a.update.run_id);
      std::sort(ids.begin(), ids.end());
      ids.erase(std::unique(ids.begin(), ids.end()), ids.end());
      std::vector<int64_t> damaged;
      for (int64_t id : ids) {
        absl::Status v = store_->VerifyActiveRun(id);
        if (absl::IsDataLoss(v)) {
          MarkDamaged(id, v);
          damaged.push_back(id);
        }
      }
      // Damage no run's rows show (an index page, say): every run of the
      // batch stops, or the batch would fail again forever.
      if (damaged.empty()) {
        for (int64_t id : ids) MarkDamaged(id, committed);
      }
      applied.clear();
    } else {
      NoteWriteFailure(committed);
    }
  } else {
    KeepCommitted(applied, validated);
  }
  for (size_t j = 0; j < jobs.size(); ++j) {
    if (committed.ok()) {
      jobs[j]->outcome = outcomes[j];
    } else if (absl::IsUnavailable(committed) ||
               absl::IsResourceExhausted(committed)) {
      // UNAVAILABLE means storage trouble, and only that: retry later.
      jobs[j]->status = absl::UnavailableError(
          absl::StrCat("results could not be stored, report them again: ",
                       committed.message()));
    } else {
      // A damaged database, or a bug here: retrying will not fix either.
      jobs[j]->status = absl::Status(
          absl::IsDataLoss(committed) ? absl::StatusCode::kDataLoss
                                      : absl::StatusCode::kInternal,
          absl::StrCat("results could not be stored: ", committed.ToString()));
    }
  }
  answer();
  if (!committed.ok()) return;
  // Breed what the batch completed before anyone else takes the lock.
  std::vector<int64_t> touched;
  for (const Applied& a : applied) touched.push_back(a.update.run_id);
  std::sort(touched.begin(), touched.end());
  touched.erase(std::unique(touched.begin(), touched.end()), touched.end());
  for (int64_t id : touched) {
    auto it = runs_.find(id);
    if (it == runs_.end()) continue;
    absl::Status s = Advance(*it->second);
    if (!s.ok()) {
      std::fprintf(stderr, "run %lld: %s\n", static_cast<long long>(id),
                   s.ToString().c_str());
      NoteRunWriteFailure(id, s);
    }
  }
  NotifyChange();
}

void Engine::ClaimResults(absl::Span<ReportJob* const> jobs,
                          std::vector<AppliedResult>* applied,
                          std::vector<int64_t>* claimed,
                          std::vector<store::ValidationUpdate>* validated,
                          std::vector<ValidatedResult>* validated_from,
                          std::vector<ReportOutcome>* outcomes) {
  for (size_t j = 0; j < jobs.size(); ++j) {
    ReportOutcome& outcome = (*outcomes)[j];
    for (const skerry::v1::TaskResult& r : *jobs[j]->results) {
      // Metrics beyond their bounds make the attempt a failed one.
      const absl::Status metrics =
          r.error().empty() ? CheckMetrics(r.metrics()) : absl::OkStatus();
      const bool failed =
          !r.error().empty() || !std::isfinite(r.score()) || !metrics.ok();
      auto reject = [&](const absl::Status& why) {
        ++outcome.ignored;
        skerry::v1::RejectedResult* x = &outcome.rejected.emplace_back();
        x->set_task_id(r.task_id());
        x->set_code(static_cast<uint32_t>(why.code()));
        x->set_message(std::string(why.message()));
      };
      absl::Status why;
      std::optional<scheduler::TaskInfo> info = queue_->Claim(
          jobs[j]->worker_id, r.task_id(), r.attempt(), failed, &why);
      if (!info.has_value()) {
        reject(why);
        continue;
      }
      if (info->kind == skerry::v1::TASK_VALIDATE) {
        validated->push_back(ValidationOutcome(*info, r, failed));
        validated_from->push_back({j, &r, *info});
        claimed->push_back(info->task_id());
        ++outcome.accepted;
        continue;
      }
      auto run_it = runs_.find(info->run_id);
      const Island* island = nullptr;
      if (run_it != runs_.end() &&
          info->island < run_it->second->islands.size()) {
        island = &run_it->second->islands[info->island];
      }
      if (island == nullptr || island->generation != info->generation ||
          island->pending.count(info->genome_id) == 0) {
        // Not part of a live generation any more (the run ended): forget it.
        queue_->Complete({info->genome_id});
        reject(absl::NotFoundError(absl::StrCat(
            "task ", r.task_id(), " belongs to a run that has ended")));
        continue;
      }
      claimed->push_back(info->genome_id);
      const Run& run = *run_it->second;
      store::ResultUpdate u;
      u.genome_id = info->genome_id;
      u.run_id = info->run_id;
      // A result from a lease that an earlier coordinator handed out quotes
      // that lease's attempt; this queue may not have counted it.
      u.attempts = std::max({info->attempts, r.attempt(), 1u});
      u.eval_seconds = r.eval_seconds();
      if (failed) {
        u.error =
            metrics.ok() ? FailureText(r) : std::string(metrics.message());
        u.state = info->attempts >= run.record.spec.max_attempts()
                      ? skerry::v1::FAILED
                      : skerry::v1::PENDING;
      } else {
        u.state = skerry::v1::EVALUATED;
        u.score = r.score();
        u.metrics.insert(r.metrics().begin(), r.metrics().end());
      }
      applied->push_back({j, &r, info->island, info->generation, info->slot,
                          run.record.spec.max_attempts(), std::move(u)});
      ++outcome.accepted;
    }
  }
}

void Engine::KeepCommitted(
    const std::vector<AppliedResult>& applied,
    const std::vector<store::ValidationUpdate>& validated) {
  std::vector<int64_t> done, retry;
  for (const AppliedResult& a : applied) {
    auto it = runs_.find(a.update.run_id);
    // A read found the run damaged while the commit was written: the queue
    // has dropped its tasks, and its cache is gone.
    if (it == runs_.end()) continue;
    Run& run = *it->second;
    Island& island = run.islands[a.island];
    if (island.generation != a.generation) continue;  // cannot happen
    GenomeRecord& g = island.current[a.slot];
    g.state = a.update.state;
    g.score = a.update.score;
    g.attempts = a.update.attempts;
    g.error = a.update.error;
    g.eval_seconds = a.update.eval_seconds;
    if (g.state == skerry::v1::FAILED) run.last_error = g.error;
    if (g.state == skerry::v1::PENDING) {
      retry.push_back(g.id);
    } else {
      island.pending.erase(g.id);
      ++run.record.evaluations;
      done.push_back(g.id);
    }
  }
  for (const store::ValidationUpdate& v : validated) {
    const int64_t task = scheduler::kValidationTaskBase + v.id;
    if (v.state == skerry::v1::VALIDATION_PENDING) {
      retry.push_back(task);
    } else {
      validations_.erase(v.id);
      done.push_back(task);
    }
  }
  queue_->Complete(done);
  queue_->Unclaim(retry);
}

std::string Engine::FailureText(const skerry::v1::TaskResult& r) {
  std::string text =
      !r.error().empty()
          ? r.error()
          : absl::StrCat("score is not a finite number (", r.score(), ")");
  // A worker's text is stored: keep it bounded.
  if (text.size() > kMaxErrorBytes) {
    text.resize(kMaxErrorBytes);
    text += " [truncated]";
  }
  return text;
}

bool Engine::IsStorageTrouble(const absl::Status& s) {
  // The store's mapping (store/sqlite.cc, SqliteStatus): busy, I/O errors and
  // files it may not write are UNAVAILABLE, a full disk RESOURCE_EXHAUSTED.
  return absl::IsUnavailable(s) || absl::IsResourceExhausted(s);
}

void Engine::NoteWriteFailure(const absl::Status& s) {
  if (s.ok()) return;
  if (!IsStorageTrouble(s)) {
    // Not the storage's fault: holding the fleet would not fix it.
    if (absl::IsInternal(s)) {
      std::fprintf(stderr,
                   "skerry-coordinator: internal error (%s); the work that "
                   "met it fails, the rest goes on\n",
                   s.ToString().c_str());
    }
    return;
  }
  if (!write_problem_.ok()) return;
  write_problem_ = s;
  queue_->SetHeld(true);
  std::fprintf(stderr,
               "skerry-coordinator: cannot write the database (%s); handing "
               "out no work until writes succeed again\n",
               s.ToString().c_str());
  NotifyChange();
}

void Engine::RetryWrites() {
  if (write_problem_.ok()) return;
  if (!store_->db().ProbeWrite().ok()) return;
  std::fprintf(stderr,
               "skerry-coordinator: the database can be written again; work "
               "resumes\n");
  write_problem_ = absl::OkStatus();
  queue_->SetHeld(false);
  NotifyChange();
}

absl::Status Engine::Advance(Run& run) {
  const int64_t id = run.record.id;
  bool progress = true;
  while (progress) {
    progress = false;
    for (Island& island : run.islands) {
      SKERRY_ASSIGN_OR_RETURN(bool changed, AdvanceIsland(run, island));
      if (runs_.count(id) == 0) return absl::OkStatus();  // the run failed
      progress = progress || changed;
    }
  }
  const bool all_done = std::all_of(run.islands.begin(), run.islands.end(),
                                    [](const Island& i) { return i.done; });
  if (!all_done) return absl::OkStatus();
  std::string why = run.finish_reason.empty() ? "finished" : run.finish_reason;
  if (!run.record.best_score.has_value()) {
    // Nothing was ever scored: no champion, and nothing worth calling done.
    for (const Island& island : run.islands) {
      for (const auto& [g, genomes] : island.completed) {
        for (const GenomeRecord& genome : genomes) {
          if (run.last_error.empty()) run.last_error = genome.error;
        }
      }
    }
    return FinishRun(run, skerry::v1::FAILED_RUN,
                     absl::StrCat("every evaluation failed, so the run has no "
                                  "champion (",
                                  why, "); the last error: ",
                                  run.last_error.empty() ? "none recorded"
                                                         : run.last_error));
  }
  return FinishRun(run, skerry::v1::FINISHED, why);
}

absl::StatusOr<const std::vector<GenomeRecord>*> Engine::CompletedGeneration(
    Run& run, uint32_t source, uint32_t generation, bool* skip) {
  *skip = false;
  Island& s = run.islands[source];
  auto it = s.completed.find(generation);
  if (it != s.completed.end()) return &it->second;
  if (s.generation == generation && !s.done) {
    if (s.pending.empty()) return &s.current;
    return nullptr;
  }
  if (s.generation < generation) {
    *skip = s.done;  // the source ended before this epoch: no migrants from it
    return nullptr;
  }
  SKERRY_ASSIGN_OR_RETURN(
      std::vector<GenomeRecord> gen,
      store_->genomes().GetGeneration(run.record.id, source, generation,
                                      store::GenomeStore::Genes::kStored));
  DropGenes(&gen);
  auto [pos, inserted] = s.completed.emplace(generation, std::move(gen));
  return &pos->second;
}

absl::StatusOr<bool> Engine::AdvanceIsland(Run& run, Island& island) {
  const RunSpec& spec = run.record.spec;
  const uint32_t g = island.generation;
  IslandFacts facts;
  facts.done = island.done;
  facts.evaluating = !island.pending.empty();
  facts.generation = g;
  facts.run_stop_generation = run.stop_generation;
  facts.max_generations = spec.stop().max_generations();
  facts.max_evaluations = spec.stop().max_evaluations();
  store::StatsRecord stats;
  if (!island.done && !facts.evaluating) {
    // The diversity comes below: from the strategy's Tell when it measures
    // it, so that samples kept as recipes are rebuilt once (gene_spread.h).
    stats = ComputeScoreStats(spec, island.current);
    stats.run_id = run.record.id;
    stats.completed_ms = clock_->WallMillis();
    facts.has_best = stats.failed < island.current.size();
    facts.meets_target = facts.has_best && MeetsTarget(spec, stats.best);
    facts.evaluations = island.evaluations + stats.evaluations;
    if (facts.max_evaluations > 0) {
      facts.evaluation_share = EvaluationShare(spec, island.index);
    }
    facts.wall_time_up = WallTimeIsUp(run);
    facts.max_wall_seconds = spec.stop().max_wall_seconds();
  }
  IslandDecision decision = DecideIslandStep(facts);

  // Breeding at an epoch: find the migrants; a source that has not completed
  // their generation yet makes the island wait (reproducible mode).
  std::vector<const GenomeRecord*> migrants;
  std::deque<GenomeRecord> built_migrants;  // stable addresses
  if (decision.action == IslandAction::kBreed &&
      IsMigrationEpoch(spec, g + 1)) {
    for (uint32_t src : Sources(spec, island.index, g + 1)) {
      const std::vector<GenomeRecord>* source_gen = nullptr;
      bool skip = false;
      if (spec.islands().asynchronous()) {
        // Whatever the neighbour completed most recently, up to generation g
        // (not reproducible: it depends on how far the neighbour got).
        Island& s = run.islands[src];
        auto newest = s.completed.upper_bound(g);
        if (newest == s.completed.begin()) continue;  // nothing yet
        source_gen = &std::prev(newest)->second;
      } else {
        SKERRY_ASSIGN_OR_RETURN(source_gen,
                                CompletedGeneration(run, src, g, &skip));
        if (skip) continue;
        if (source_gen == nullptr) {
          facts.migrants_missing = true;
          decision = DecideIslandStep(facts);
          break;
        }
      }
      for (const GenomeRecord* m : ChooseEmigrants(
               spec, *source_gen, island.index, spec.islands().migrants())) {
        if (m->genes.empty()) {
          // A genome of a completed generation (DropGenes) or a sample kept
          // as its recipe: the strategy told of it needs its genes.
          GenomeRecord copy = *m;
          if (m->recipe.has_value()) {
            absl::StatusOr<std::vector<double>> genes =
                SampleGenes(*source_gen, *m);
            if (!genes.ok()) {
              FailRun(run, genes.status());
              return true;
            }
            copy.genes = std::move(*genes);
          } else {
            // A read failure is the store's trouble, handled as any other.
            SKERRY_ASSIGN_OR_RETURN(GenomeRecord stored,
                                    store_->genomes().GetGenome(m->id));
            copy.genes = std::move(stored.genes);
          }
          built_migrants.push_back(std::move(copy));
          m = &built_migrants.back();
        }
        migrants.push_back(m);
      }
    }
  }

  switch (decision.action) {
    case IslandAction::kNone:
      return false;
    case IslandAction::kDiscard: {
      // Bred past the run's stop generation: that work is discarded at finish.
      std::vector<int64_t> ids;
      for (const auto& [id, slot] : island.pending) ids.push_back(id);
      queue_->Remove(ids);
      island.pending.clear();
      island.current.clear();
      island.done = true;
      return true;
    }
    case IslandAction::kWait:
      island.waiting = true;
      return false;
    case IslandAction::kFinish:
    case IslandAction::kBreed:
      break;
  }
  const bool done = decision.action == IslandAction::kFinish;
  const std::string& reason = decision.reason;
  const std::optional<uint32_t>& new_stop = decision.new_stop;
  const bool has_best = facts.has_best;

  std::vector<GenomeRecord> next;
  skerry::v1::StrategyState before;
  std::optional<std::string> saved_state;
  if (!done) {
    before = island.strategy->Save();
    absl::StatusOr<std::vector<GenomeRecord>> bred =
        island.strategy->TellAndAsk(island.current, migrants);
    if (!bred.ok()) {
      FailRun(run, bred.status());
      return true;
    }
    next = std::move(*bred);
    for (GenomeRecord& n : next) n.run_id = run.record.id;
    saved_state = island.strategy->Save().SerializeAsString();
  }
  if (std::optional<double> told = island.strategy->ToldDiversity();
      !done && told.has_value()) {
    stats.diversity = *told;
  } else if (HasRecipes(island.current)) {
    absl::StatusOr<double> d = RecipeDiversity(island.current);
    if (!d.ok()) {
      if (!done) island.strategy->Restore(before).IgnoreError();
      FailRun(run, d.status());
      return true;
    }
    stats.diversity = *d;
  } else {
    stats.diversity = Diversity(island.current);
  }

  store::GenerationCommit commit;
  std::tuple<uint32_t, uint32_t, uint32_t> commit_champion_key;
  commit.run_id = run.record.id;
  commit.island = island.index;
  commit.completed = stats;
  commit.island_done = done;
  commit.next = done ? nullptr : &next;
  commit.stop_generation = new_stop;
  commit.strategy_state = saved_state;
  if (has_best) {
    const std::optional<double>& best = run.record.best_score;
    const bool better = !best.has_value() || Better(spec, stats.best, *best);
    const bool equal = !better && !Better(spec, *best, stats.best);
    for (const GenomeRecord& gr : island.current) {
      if (gr.state != skerry::v1::EVALUATED || gr.score != stats.best) continue;
      // The first in slot order is this generation's smallest key. On an
      // equal score it takes over only with a smaller key than the
      // champion's, as `skerry champion` orders ties (genome_store.h,
      // BestGenome).
      const auto key = std::make_tuple(gr.generation, gr.island, gr.slot);
      if (better || (equal && (!run.champion_key.has_value() ||
                               key < *run.champion_key))) {
        commit.champion = std::make_pair(gr.id, gr.score);
        commit_champion_key = key;
        commit.champion_genome = &gr;
      }
      break;
    }
  }
  // The genome the commit asks to validate, if any: kept whole with its
  // request (ValidationRequest::genome), and queued once committed.
  const GenomeRecord* validated = nullptr;
  if (has_best) {
    commit.validate = ChampionValidation(run, island.current, stats.best,
                                         commit.champion.has_value());
    for (const GenomeRecord& gr : island.current) {
      if (commit.validate.has_value() && gr.id == commit.validate->genome_id) {
        validated = &gr;
        commit.validate->genome = validated;
      }
    }
  }
  if (absl::Status s = store_->runs().CommitGeneration(commit); !s.ok()) {
    // The cache stays as it was: the strategy forgets what it was told.
    if (!done) island.strategy->Restore(before).IgnoreError();
    return s;
  }

  // Committed: bring the cache in line.
  if (validated != nullptr) {
    absl::StatusOr<std::vector<double>> genes =
        SampleGenes(island.current, *validated);
    if (genes.ok()) {
      QueueChampionValidation(run, *validated, *genes);
    } else {
      // Stored with the generation: queued again at the next start.
      std::fprintf(stderr, "run %lld: %s\n",
                   static_cast<long long>(run.record.id),
                   genes.status().ToString().c_str());
    }
  }
  if (commit.champion.has_value()) {
    run.record.champion_id = commit.champion->first;
    run.record.best_score = commit.champion->second;
    run.champion_key = commit_champion_key;
  }
  island.evaluations += stats.evaluations;
  island.last_stats = stats;
  island.waiting = false;
  DropGenes(&island.current,
            EmigrantsToKeep(spec, island.index, island.current));
  island.completed[g] = std::move(island.current);
  while (island.completed.size() > kCompletedKept) {
    island.completed.erase(island.completed.begin());
  }
  island.current.clear();
  if (done) {
    island.done = true;
    if (run.finish_reason.empty()) run.finish_reason = reason;
    if (new_stop.has_value() && (!run.stop_generation.has_value() ||
                                 *new_stop < *run.stop_generation)) {
      run.stop_generation = new_stop;
      run.finish_reason = reason;
    }
  } else {
    island.generation = g + 1;
    island.current = std::move(next);
    island.pending.clear();
    for (const GenomeRecord& n : island.current) {
      if (n.state == skerry::v1::PENDING) island.pending[n.id] = n.slot;
    }
    QueueIsland(run, island);
  }
  NotifyChange();
  return true;
}

absl::Status Engine::FinishRun(Run& run, skerry::v1::RunState state,
                               const std::string& message) {
  const int64_t id = run.record.id;
  SKERRY_RETURN_IF_ERROR(store_->runs().FinishRun(
      id, state, message, run.stop_generation, clock_->WallMillis()));
  queue_->RemoveRun(id);
  runs_.erase(id);
  NotifyChange();
  return absl::OkStatus();
}

void Engine::FailRun(Run& run, const absl::Status& why) {
  const int64_t id = run.record.id;
  // FinishRun marks every island done too: an ended run has no live island.
  absl::Status s = store_->runs().FinishRun(id, skerry::v1::FAILED_RUN,
                                            std::string(why.message()),
                                            std::nullopt, clock_->WallMillis());
  if (!s.ok()) {
    std::fprintf(stderr, "run %lld: could not record failure: %s\n",
                 static_cast<long long>(id), s.ToString().c_str());
    return;
  }
  queue_->RemoveRun(id);
  runs_.erase(id);
  NotifyChange();
}

bool Engine::WallTimeIsUp(const Run& run) {
  const double limit = run.record.spec.stop().max_wall_seconds();
  return limit > 0 && clock_->WallMillis() - run.record.started_ms >=
                          static_cast<int64_t>(limit * 1000);
}

void Engine::NotifyChange() { ++changes_; }

uint64_t Engine::WaitForChange(uint64_t seen, absl::Time deadline) {
  absl::MutexLock l(&mu_);
  auto changed = [this, seen]() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    return changes_ > seen;
  };
  mu_.AwaitWithDeadline(absl::Condition(&changed), deadline);
  return changes_;
}

std::string Engine::StorageProblem() {
  absl::MutexLock l(&mu_);
  return std::string(write_problem_.message());
}

absl::StatusOr<skerry::v1::RunSummary> Engine::Summary(int64_t run_id) {
  absl::MutexLock l(&mu_);
  absl::StatusOr<skerry::v1::RunSummary> s = SummaryLocked(run_id);
  if (absl::IsDataLoss(s.status())) {
    MarkDamaged(run_id, s.status());
    s = SummaryLocked(run_id);
  }
  return s;
}

absl::StatusOr<std::vector<skerry::v1::RunSummary>> Engine::ListSummaries() {
  // Read before the lock (from the read pool's snapshot): a long list does
  // not hold up the committer's next batch.
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::RunRecord> runs,
                          store_->runs().ListRuns());
  absl::MutexLock l(&mu_);
  std::vector<skerry::v1::RunSummary> out;
  for (const store::RunRecord& r : runs) {
    if (!r.damage.ok()) MarkDamaged(r.id, r.damage, &r);
    absl::StatusOr<skerry::v1::RunSummary> s = SummaryLocked(r.id);
    if (absl::IsDataLoss(s.status())) {
      // One damaged run does not hide the others.
      MarkDamaged(r.id, s.status(), &r);
      s = SummaryLocked(r.id);
    }
    if (!s.ok()) return s.status();
    out.push_back(*std::move(s));
  }
  return out;
}

absl::StatusOr<skerry::v1::RunSummary> Engine::SummaryLocked(int64_t run_id) {
  skerry::v1::RunSummary s;
  if (auto d = damaged_.find(run_id); d != damaged_.end()) {
    const store::RunRecord& rec = d->second.record;
    s.set_id(static_cast<uint64_t>(run_id));
    s.set_name(rec.name);
    s.set_owner(rec.owner);
    s.set_state(skerry::v1::FAILED_RUN);
    s.set_evaluations(static_cast<uint64_t>(rec.evaluations));
    s.set_created_unix_ms(rec.created_ms);
    s.set_updated_unix_ms(rec.updated_ms);
    s.set_priority(static_cast<uint32_t>(rec.priority));
    s.set_message(std::string(d->second.why.message()));
    return s;
  }
  auto it = runs_.find(run_id);
  store::RunRecord stored;
  const store::RunRecord* rec = nullptr;
  if (it != runs_.end()) {
    rec = &it->second->record;
  } else {
    SKERRY_ASSIGN_OR_RETURN(stored, store_->runs().GetRun(run_id));
    rec = &stored;
  }
  s.set_id(static_cast<uint64_t>(rec->id));
  s.set_name(rec->name);
  s.set_owner(rec->owner);
  s.set_state(rec->state);
  s.set_seed(rec->spec.seed());
  s.set_evaluations(static_cast<uint64_t>(rec->evaluations));
  s.set_created_unix_ms(rec->created_ms);
  s.set_updated_unix_ms(rec->updated_ms);
  s.set_has_best(rec->best_score.has_value());
  s.set_best_score(rec->best_score.value_or(0.0));
  s.set_champion_id(static_cast<uint64_t>(rec->champion_id));
  s.set_message(rec->message);
  s.set_objective(rec->spec.objective());
  s.set_priority(static_cast<uint32_t>(rec->priority));
  s.set_parent_run(static_cast<uint64_t>(rec->parent_run));
  s.set_parent_generation(rec->parent_generation);
  if (!write_problem_.ok()) {
    s.set_coordinator_problem(absl::StrCat(
        "the coordinator cannot write its database (", write_problem_.message(),
        "); no work is handed out until writes succeed again"));
  }
  auto fill_stats = [](skerry::v1::IslandStatus* is,
                       const std::optional<store::StatsRecord>& st) {
    if (!st.has_value()) return;
    is->set_has_stats(true);
    is->set_best(st->best);
    is->set_mean(st->mean);
    is->set_diversity(st->diversity);
  };
  if (it != runs_.end()) {
    for (const Island& island : it->second->islands) {
      skerry::v1::IslandStatus* is = s.add_islands();
      is->set_island(island.index);
      is->set_generation(island.generation);
      const uint32_t pop = IslandPopulation(rec->spec, island.index);
      is->set_population(pop);
      is->set_evaluated(
          island.done ? pop
                      : pop - static_cast<uint32_t>(island.pending.size()));
      is->set_done(island.done);
      fill_stats(is, island.last_stats);
    }
    return s;
  }
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::IslandRecord> islands,
                          store_->runs().GetIslands(run_id));
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::StatsRecord> stats,
                          store_->runs().GetStats(run_id, std::nullopt));
  for (const store::IslandRecord& ir : islands) {
    skerry::v1::IslandStatus* is = s.add_islands();
    is->set_island(ir.index);
    is->set_generation(ir.generation);
    const uint32_t pop = IslandPopulation(rec->spec, ir.index);
    is->set_population(pop);
    is->set_evaluated(pop);
    is->set_done(true);
    std::optional<store::StatsRecord> last;
    for (const store::StatsRecord& st : stats) {
      if (st.island == ir.index) last = st;
    }
    fill_stats(is, last);
  }
  return s;
}

}  // namespace skerry::engine
