#include "server/engine/breeder.h"

#include <algorithm>
#include <cmath>
#include <memory>

#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/random.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "server/engine/operators.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;

RandomStream Stream(const RunSpec& spec, uint32_t island, uint32_t generation,
                    StreamPurpose purpose, uint32_t slot) {
  StreamKey key;
  key.run_seed = spec.seed();
  key.island = island;
  key.generation = generation;
  key.purpose = purpose;
  key.slot = slot;
  return RandomStream(key);
}

// The recipe of genome (island, generation, slot) of `kind` (child_recipe.h),
// from the run's spec: what BuildChild makes its genes from.
ChildRecipe RecipeOf(const RunSpec& spec, uint32_t island, uint32_t generation,
                     uint32_t slot, ChildKind kind) {
  ChildRecipe r;
  r.kind = kind;
  r.float32 = spec.gene_precision() == skerry::v1::FLOAT32;
  r.crossover_method = spec.ga().crossover().method();
  r.seed = spec.seed();
  r.island = island;
  r.generation = generation;
  r.slot = slot;
  r.length = spec.genome_length();
  r.crossover_rate = spec.ga().crossover().rate();
  r.blend_alpha = spec.ga().crossover().blend_alpha();
  r.mutation_rate = spec.ga().mutation().rate();
  r.mutation_step = spec.ga().mutation().step();
  r.lower = spec.lower_bound();
  r.upper = spec.upper_bound();
  r.init_lower = spec.init_lower();
  r.init_upper = spec.init_upper();
  return r;
}

// Gives `g` its genes, built from `recipe` and its parents' (a FLOAT32 run's
// rounded as the store rounds them), and, when the run keeps recipes, the
// recipe too: a keyframe at every KeyframeInterval-th generation, except for
// seeds and immigrants, which replay from their stream alone.
absl::Status Build(const RunSpec& spec, const ChildRecipe& recipe,
                   absl::Span<const double> a, absl::Span<const double> b,
                   GenomeRecord* g) {
  absl::StatusOr<std::vector<double>> genes = BuildChild(recipe, a, b);
  if (!genes.ok()) {
    return absl::InvalidArgumentError(
        absl::StrCat("island ", g->island, " generation ", g->generation,
                     " slot ", g->slot, ": ", genes.status().message()));
  }
  g->genes = *std::move(genes);
  const uint32_t interval = KeyframeInterval(spec);
  if (interval > 1) {
    g->child_recipe = recipe;
    g->keyframe = ParentsOf(recipe.kind) > 0 && g->generation % interval == 0;
  }
  return absl::OkStatus();
}

GenomeRecord Fresh(const RunSpec& spec, uint32_t island, uint32_t generation,
                   uint32_t slot, skerry::v1::Origin origin) {
  GenomeRecord g;
  g.island = island;
  g.generation = generation;
  g.slot = slot;
  g.origin = origin;
  g.state = skerry::v1::PENDING;
  return g;
}

// A copy that keeps its score unless the evaluator is noisy, appended to
// `out`; its genes, recipe and keyframe flag as Build gives any genome.
absl::Status CarryOver(const RunSpec& spec, const GenomeRecord& from,
                       uint32_t island, uint32_t generation, uint32_t slot,
                       skerry::v1::Origin origin,
                       std::vector<GenomeRecord>* out) {
  GenomeRecord g = Fresh(spec, island, generation, slot, origin);
  g.parent_a = from.id;
  SKERRY_RETURN_IF_ERROR(
      Build(spec, RecipeOf(spec, island, generation, slot, ChildKind::kCopy),
            from.genes, {}, &g));
  if (!spec.evaluator().noisy()) {
    g.state = from.state;
    g.score = from.score;
    g.error = from.error;
  }
  out->push_back(std::move(g));
  return absl::OkStatus();
}

// Scores and validity of a pool, in the form the operators take.
struct ScoredPool {
  explicit ScoredPool(const std::vector<const GenomeRecord*>& pool)
      : scores(pool.size()), valid_(new bool[pool.size()]), n_(pool.size()) {
    for (size_t i = 0; i < pool.size(); ++i) {
      scores[i] = pool[i]->score;
      valid_[i] = pool[i]->state == skerry::v1::EVALUATED;
    }
  }
  absl::Span<const bool> valid() const {
    return absl::Span<const bool>(valid_.get(), n_);
  }

  std::vector<double> scores;

 private:
  std::unique_ptr<bool[]> valid_;
  size_t n_;
};

// The genome a migrant replaces in the breeding pool, per the replacement
// policy. `taken` marks pool members already replaced this epoch.
int ChooseVictim(const RunSpec& spec, absl::Span<const int> rank_of,
                 absl::Span<const int> order, const std::vector<bool>& taken,
                 RandomStream& rng) {
  const int n = static_cast<int>(order.size());
  switch (spec.islands().replacement()) {
    case skerry::v1::REPLACE_RANDOM:
    case skerry::v1::REPLACE_TOURNAMENT_LOSER: {
      // Bounded: the caller guarantees fewer migrants than pool members.
      for (int tries = 0; tries < 64; ++tries) {
        int victim = static_cast<int>(rng.Below(n));
        if (spec.islands().replacement() ==
            skerry::v1::REPLACE_TOURNAMENT_LOSER) {
          const int other = static_cast<int>(rng.Below(n));
          if (rank_of[other] > rank_of[victim]) victim = other;
        }
        if (!taken[victim]) return victim;
      }
      [[fallthrough]];  // crowded pool: fall back to the worst free member
    }
    case skerry::v1::REPLACE_WORST:
    default:
      for (int r = n - 1; r >= 0; --r) {
        if (!taken[order[r]]) return order[r];
      }
      return order[n - 1];
  }
}

}  // namespace

bool Better(const RunSpec& spec, double a, double b) {
  return spec.objective() == skerry::v1::MAXIMIZE ? a > b : a < b;
}

uint64_t EvalSeed(const RunSpec& spec, uint32_t island, uint32_t generation,
                  uint32_t slot) {
  return Stream(spec, island, generation, StreamPurpose::kEvalSeed, slot)
      .NextU64();
}

absl::StatusOr<std::vector<GenomeRecord>> Seed(const RunSpec& spec,
                                               uint32_t island) {
  const uint32_t n = IslandPopulation(spec, island);
  std::vector<GenomeRecord> out;
  out.reserve(n);
  for (uint32_t slot = 0; slot < n; ++slot) {
    GenomeRecord g = Fresh(spec, island, 0, slot, skerry::v1::SEEDED);
    SKERRY_RETURN_IF_ERROR(Build(
        spec, RecipeOf(spec, island, 0, slot, ChildKind::kSeed), {}, {}, &g));
    out.push_back(std::move(g));
  }
  return out;
}

std::vector<const GenomeRecord*> ChooseEmigrants(
    const RunSpec& spec, absl::Span<const GenomeRecord> source,
    uint32_t destination, uint32_t count) {
  std::vector<const GenomeRecord*> members;
  for (const GenomeRecord& g : source) members.push_back(&g);
  const ScoredPool scored(members);
  const bool maximize = spec.objective() == skerry::v1::MAXIMIZE;
  const std::vector<int> order =
      RankBestFirst(scored.scores, scored.valid(), maximize);
  std::vector<int> rank_of(order.size());
  for (size_t r = 0; r < order.size(); ++r)
    rank_of[order[r]] = static_cast<int>(r);

  const uint32_t generation = source.empty() ? 0 : source.front().generation;
  const uint32_t island = source.empty() ? 0 : source.front().island;
  RandomStream rng =
      Stream(spec, island, generation, StreamPurpose::kMigration, destination);
  count = std::min<uint32_t>(count, static_cast<uint32_t>(source.size()));
  std::vector<const GenomeRecord*> out;
  std::vector<bool> chosen(source.size(), false);
  for (uint32_t k = 0; k < count; ++k) {
    int pick = -1;
    switch (spec.islands().emigrants()) {
      case skerry::v1::EMIGRATE_RANDOM:
      case skerry::v1::EMIGRATE_TOURNAMENT:
        for (int tries = 0; tries < 64 && pick < 0; ++tries) {
          int c = static_cast<int>(rng.Below(source.size()));
          if (spec.islands().emigrants() == skerry::v1::EMIGRATE_TOURNAMENT) {
            const int other = static_cast<int>(rng.Below(source.size()));
            if (rank_of[other] < rank_of[c]) c = other;
          }
          if (!chosen[c]) pick = c;
        }
        if (pick >= 0) break;
        [[fallthrough]];
      case skerry::v1::EMIGRATE_BEST:
      default:
        for (int idx : order) {
          if (!chosen[idx]) {
            pick = idx;
            break;
          }
        }
    }
    chosen[pick] = true;
    out.push_back(&source[pick]);
  }
  return out;
}

absl::StatusOr<std::vector<GenomeRecord>> Breed(
    const RunSpec& spec, uint32_t island,
    absl::Span<const GenomeRecord> current,
    absl::Span<const GenomeRecord* const> migrants) {
  const uint32_t next_gen = current.front().generation + 1;
  const uint32_t n = IslandPopulation(spec, island);
  const bool maximize = spec.objective() == skerry::v1::MAXIMIZE;
  const uint32_t elites = std::min<uint32_t>(spec.ga().elites(), n);
  const uint32_t immigrants =
      std::min<uint32_t>(spec.ga().immigrants(), n - elites);
  // Arrivals beyond what leaves one offspring slot are dropped, in source
  // order (only a RANDOM topology can bring that many; validation refuses it
  // for the others).
  const uint32_t room = n - elites - immigrants;
  const uint32_t n_migrants = std::min<uint32_t>(
      static_cast<uint32_t>(migrants.size()), room > 0 ? room - 1 : 0);
  const uint32_t offspring = room - n_migrants;

  // The breeding pool: generation g, with migrants replacing some members.
  std::vector<const GenomeRecord*> pool;
  for (const GenomeRecord& g : current) pool.push_back(&g);
  ScoredPool scored(pool);
  const std::vector<int> own_order =
      RankBestFirst(scored.scores, scored.valid(), maximize);

  std::vector<GenomeRecord> out;
  out.reserve(n);
  for (uint32_t e = 0; e < elites; ++e) {
    SKERRY_RETURN_IF_ERROR(CarryOver(spec, *pool[own_order[e]], island,
                                     next_gen, e, skerry::v1::ELITE, &out));
  }
  if (n_migrants > 0) {
    std::vector<int> rank_of(own_order.size());
    for (size_t r = 0; r < own_order.size(); ++r) {
      rank_of[own_order[r]] = static_cast<int>(r);
    }
    std::vector<bool> taken(pool.size(), false);
    RandomStream rng =
        Stream(spec, island, next_gen, StreamPurpose::kMigration, island);
    for (uint32_t m = 0; m < n_migrants; ++m) {
      const uint32_t slot = elites + m;
      SKERRY_RETURN_IF_ERROR(CarryOver(spec, *migrants[m], island, next_gen,
                                       slot, skerry::v1::MIGRANT, &out));
      if (m + 1 < pool.size()) {
        const int victim = ChooseVictim(spec, rank_of, own_order, taken, rng);
        taken[victim] = true;
        pool[victim] = migrants[m];
      }
    }
    scored = ScoredPool(pool);
  }

  if (offspring > 0) {
    RandomStream select_rng =
        Stream(spec, island, next_gen, StreamPurpose::kSelection, 0);
    absl::StatusOr<std::vector<int>> parents =
        Select(spec.ga().selection(), scored.scores, scored.valid(), maximize,
               static_cast<int>(2 * offspring), select_rng);
    if (!parents.ok()) {
      return absl::InvalidArgumentError(
          absl::StrCat("island ", island, " generation ", next_gen - 1, ": ",
                       parents.status().message()));
    }
    for (uint32_t k = 0; k < offspring; ++k) {
      const uint32_t slot = elites + n_migrants + k;
      const GenomeRecord* a = pool[(*parents)[2 * k]];
      const GenomeRecord* b = pool[(*parents)[2 * k + 1]];
      // Whether the child is crossed is its stream's first draw; BuildChild
      // draws it again, and refuses a kind that disagrees.
      RandomStream rng =
          Stream(spec, island, next_gen, StreamPurpose::kBreed, slot);
      const bool crossed = rng.Bernoulli(spec.ga().crossover().rate());
      GenomeRecord child =
          Fresh(spec, island, next_gen, slot,
                crossed ? skerry::v1::CROSSOVER : skerry::v1::MUTATION);
      child.parent_a = a->id;
      if (crossed) child.parent_b = b->id;
      SKERRY_RETURN_IF_ERROR(Build(
          spec,
          RecipeOf(spec, island, next_gen, slot,
                   crossed ? ChildKind::kCrossover : ChildKind::kMutation),
          a->genes,
          crossed ? absl::Span<const double>(b->genes)
                  : absl::Span<const double>(),
          &child));
      out.push_back(std::move(child));
    }
  }
  for (uint32_t k = 0; k < immigrants; ++k) {
    const uint32_t slot = n - immigrants + k;
    GenomeRecord g = Fresh(spec, island, next_gen, slot, skerry::v1::IMMIGRANT);
    SKERRY_RETURN_IF_ERROR(Build(
        spec, RecipeOf(spec, island, next_gen, slot, ChildKind::kImmigrant), {},
        {}, &g));
    out.push_back(std::move(g));
  }
  return out;
}

store::StatsRecord ComputeScoreStats(
    const RunSpec& spec, absl::Span<const GenomeRecord> generation) {
  store::StatsRecord s;
  if (generation.empty()) return s;
  s.island = generation.front().island;
  s.generation = generation.front().generation;
  bool any = false;
  double sum = 0.0;
  int valid = 0;
  for (const GenomeRecord& g : generation) {
    if (g.attempts > 0) ++s.evaluations;
    s.eval_seconds += g.eval_seconds;
    if (g.state != skerry::v1::EVALUATED) {
      ++s.failed;
      continue;
    }
    if (!any || Better(spec, g.score, s.best)) s.best = g.score;
    if (!any || Better(spec, s.worst, g.score)) s.worst = g.score;
    any = true;
    sum += g.score;
    ++valid;
  }
  s.mean = valid > 0 ? sum / valid : 0.0;
  // With no evaluated genome, best, mean and worst stay 0 and failed == size.
  return s;
}

store::StatsRecord ComputeStats(const RunSpec& spec,
                                absl::Span<const GenomeRecord> generation) {
  store::StatsRecord s = ComputeScoreStats(spec, generation);
  s.diversity = Diversity(generation);
  return s;
}

double Diversity(absl::Span<const GenomeRecord> generation) {
  if (generation.empty()) return 0.0;
  // Diversity: mean over genes of the population standard deviation.
  const size_t len = generation.front().genes.size();
  const double count = static_cast<double>(generation.size());
  double total = 0.0;
  for (size_t j = 0; j < len; ++j) {
    double m = 0.0;
    for (const GenomeRecord& g : generation) m += g.genes[j];
    m /= count;
    double var = 0.0;
    for (const GenomeRecord& g : generation) {
      var += (g.genes[j] - m) * (g.genes[j] - m);
    }
    total += std::sqrt(var / count);
  }
  return len > 0 ? total / static_cast<double>(len) : 0.0;
}

}  // namespace skerry::engine
