#include "common/spec.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "common/evaluator.h"
#include "common/network.h"
#include "common/pole.h"
#include "common/quote.h"
#include "common/status_macros.h"
#include "common/strategy_spec.h"
#include "common/validation.h"
#include "google/protobuf/descriptor.h"

namespace skerry {
namespace {

using skerry::v1::RunSpec;

constexpr uint32_t kMaxGenomeLength = 1000000;
constexpr uint32_t kMaxKeyframeInterval = 100000;
constexpr uint32_t kMinPopulation = 2;
constexpr uint32_t kMaxPopulation = 1000000;
constexpr uint32_t kMaxIslands = 256;
constexpr uint32_t kMaxAttempts = 100;

absl::Status Bad(absl::string_view path, absl::string_view what,
                 absl::string_view allowed, absl::string_view got) {
  return absl::InvalidArgumentError(absl::StrCat(
      path, ": ", what, " (allowed: ", allowed, "; got ", got, ")"));
}

// Inclusive integer range.
absl::Status CheckRange(absl::string_view path, uint64_t value, uint64_t lo,
                        uint64_t hi) {
  if (value >= lo && value <= hi) return absl::OkStatus();
  return Bad(path, "out of range", absl::StrCat("[", lo, ", ", hi, "]"),
             absl::StrCat(value));
}

// Closed or half-open real range; NaN always fails.
absl::Status CheckReal(absl::string_view path, double value, double lo,
                       bool lo_open, double hi, bool hi_open) {
  const bool above = lo_open ? value > lo : value >= lo;
  const bool below = hi_open ? value < hi : value <= hi;
  if (above && below && std::isfinite(value)) return absl::OkStatus();
  return Bad(
      path, std::isfinite(value) ? "out of range" : "not finite",
      absl::StrCat(lo_open ? "(" : "[", lo, ", ", hi, hi_open ? ")" : "]"),
      absl::StrCat(value));
}

absl::Status CheckPositiveFinite(absl::string_view path, double value) {
  if (value > 0 && std::isfinite(value)) return absl::OkStatus();
  return Bad(path, std::isfinite(value) ? "must be positive" : "not finite",
             "a finite number > 0", absl::StrCat(value));
}

// A known, specified (non-zero) enum value.
absl::Status CheckEnum(absl::string_view path, int value,
                       const google::protobuf::EnumDescriptor* descriptor) {
  const google::protobuf::EnumValueDescriptor* found =
      descriptor->FindValueByNumber(value);
  if (value != 0 && found != nullptr) return absl::OkStatus();
  std::vector<std::string> allowed;
  for (int i = 0; i < descriptor->value_count(); ++i) {
    if (descriptor->value(i)->number() != 0) {
      allowed.push_back(descriptor->value(i)->name());
    }
  }
  return Bad(path, "unknown or unspecified value", absl::StrJoin(allowed, ", "),
             found != nullptr ? found->name() : absl::StrCat(value));
}

// gene_precision: unset means FLOAT64. FLOAT32 needs bounds a float32 can
// hold and a float32 value between them (common/genes.h RoundToFloat32).
absl::Status CheckGenePrecision(const RunSpec& spec) {
  if (spec.gene_precision() == skerry::v1::GENE_PRECISION_UNSPECIFIED) {
    return absl::OkStatus();
  }
  SKERRY_RETURN_IF_ERROR(CheckEnum("gene_precision", spec.gene_precision(),
                                   skerry::v1::GenePrecision_descriptor()));
  if (spec.gene_precision() != skerry::v1::FLOAT32) return absl::OkStatus();
  const double most = std::numeric_limits<float>::max();
  for (const auto& [name, value] :
       {std::pair<const char*, double>{"lower_bound", spec.lower_bound()},
        {"upper_bound", spec.upper_bound()}}) {
    if (std::fabs(value) > most) {
      return Bad(name, "beyond what gene_precision FLOAT32 can hold",
                 "a magnitude of at most 3.40282e+38", absl::StrCat(value));
    }
  }
  float inside = static_cast<float>(spec.lower_bound());
  if (static_cast<double>(inside) < spec.lower_bound()) {
    inside = std::nextafter(inside, std::numeric_limits<float>::infinity());
  }
  if (static_cast<double>(inside) > spec.upper_bound()) {
    return Bad(
        "upper_bound",
        "no float32 value lies between the bounds, so gene_precision "
        "FLOAT32 has no gene to make",
        "bounds at least one float32 step apart",
        absl::StrCat("[", spec.lower_bound(), ", ", spec.upper_bound(), "]"));
  }
  return absl::OkStatus();
}

absl::Status CheckBounds(const RunSpec& spec) {
  if (!spec.has_lower_bound()) {
    return Bad("lower_bound", "not set and the evaluator has no default",
               "a finite number", "nothing");
  }
  if (!spec.has_upper_bound()) {
    return Bad("upper_bound", "not set and the evaluator has no default",
               "a finite number", "nothing");
  }
  const double lo = spec.lower_bound();
  const double hi = spec.upper_bound();
  if (!std::isfinite(lo)) {
    return Bad("lower_bound", "not finite", "a finite number",
               absl::StrCat(lo));
  }
  if (!std::isfinite(hi)) {
    return Bad("upper_bound", "not finite", "a finite number",
               absl::StrCat(hi));
  }
  if (!(lo < hi)) {
    return Bad("upper_bound", "must be greater than lower_bound",
               absl::StrCat("> ", lo), absl::StrCat(hi));
  }
  return absl::OkStatus();
}

absl::Status CheckInitRange(const RunSpec& spec) {
  const std::string within =
      absl::StrCat("[", spec.lower_bound(), ", ", spec.upper_bound(), "]");
  if (!spec.has_init_lower()) {
    return Bad("init_lower", "not set", within, "nothing");
  }
  if (!spec.has_init_upper()) {
    return Bad("init_upper", "not set", within, "nothing");
  }
  const double lo = spec.init_lower();
  const double hi = spec.init_upper();
  if (!(lo >= spec.lower_bound() && lo <= spec.upper_bound())) {
    return Bad("init_lower", "outside the bounds", within, absl::StrCat(lo));
  }
  if (!(hi >= spec.lower_bound() && hi <= spec.upper_bound())) {
    return Bad("init_upper", "outside the bounds", within, absl::StrCat(hi));
  }
  if (lo > hi) {
    return Bad("init_upper", "must not be below init_lower",
               absl::StrCat(">= ", lo), absl::StrCat(hi));
  }
  return absl::OkStatus();
}

absl::Status CheckIslandSizes(const RunSpec& spec) {
  const auto& islands = spec.islands();
  if (absl::Status s =
          CheckRange("islands.count", islands.count(), 1, kMaxIslands);
      !s.ok()) {
    return s;
  }
  const int n = islands.population_sizes_size();
  if (n != 0 && static_cast<uint32_t>(n) != islands.count()) {
    return Bad("islands.population_sizes", "wrong length",
               absl::StrCat("empty or ", islands.count(), " entries"),
               absl::StrCat(n, " entries"));
  }
  for (int i = 0; i < n; ++i) {
    if (absl::Status s = CheckRange(
            absl::StrCat("islands.population_sizes[", i, "]"),
            islands.population_sizes(i), kMinPopulation, kMaxPopulation);
        !s.ok()) {
      return s;
    }
  }
  return absl::OkStatus();
}

uint32_t SmallestIsland(const RunSpec& spec) {
  uint32_t smallest = IslandPopulation(spec, 0);
  if (StrategyOf(spec) == StrategyKind::kGa) {
    smallest = spec.ga().population_size();
  }
  for (uint32_t i = 0; i < spec.islands().count(); ++i) {
    smallest = std::min(smallest, IslandPopulation(spec, i));
  }
  return smallest;
}

absl::Status CheckBreeding(const RunSpec& spec, uint32_t min_pop) {
  const auto& ga = spec.ga();
  const uint64_t elites = ga.elites();
  if (elites >= min_pop) {
    return Bad("ga.elites",
               "elites + immigrants must be below every island's population",
               absl::StrCat("[0, ", min_pop - 1, "]"), absl::StrCat(elites));
  }
  const uint64_t room = min_pop - 1 - elites;
  if (ga.immigrants() > room) {
    return Bad("ga.immigrants",
               "elites + immigrants must be below every island's population",
               absl::StrCat("[0, ", room, "]"), absl::StrCat(ga.immigrants()));
  }
  return absl::OkStatus();
}

absl::Status CheckSelection(const RunSpec& spec, uint32_t min_pop) {
  const auto& sel = spec.ga().selection();
  absl::Status s = CheckEnum("ga.selection.method", sel.method(),
                             skerry::v1::SelectionMethod_descriptor());
  if (s.ok()) {
    s = CheckEnum("ga.selection.scaling", sel.scaling(),
                  skerry::v1::FitnessScaling_descriptor());
  }
  if (s.ok() && sel.scaling() == skerry::v1::RAW &&
      spec.objective() != skerry::v1::MAXIMIZE) {
    s = Bad("ga.selection.scaling", "RAW scaling needs objective MAXIMIZE",
            "WINDOWING, LINEAR", "RAW");
  }
  if (s.ok()) {
    s = CheckReal("ga.selection.linear_scaling_factor",
                  sel.linear_scaling_factor(), 1, true, 10, false);
  }
  if (s.ok()) {
    s = CheckRange("ga.selection.tournament_size", sel.tournament_size(), 1,
                   min_pop);
  }
  if (s.ok()) {
    s = CheckReal("ga.selection.rank_pressure", sel.rank_pressure(), 1, false,
                  2, false);
  }
  if (s.ok()) {
    s = CheckReal("ga.selection.truncation_fraction", sel.truncation_fraction(),
                  0, true, 1, false);
  }
  return s;
}

absl::Status CheckVariation(const RunSpec& spec) {
  const auto& cx = spec.ga().crossover();
  const auto& mut = spec.ga().mutation();
  absl::Status s = CheckEnum("ga.crossover.method", cx.method(),
                             skerry::v1::CrossoverMethod_descriptor());
  if (s.ok() && !cx.has_rate()) {
    s = Bad("ga.crossover.rate", "not set", "[0, 1]", "nothing");
  }
  if (s.ok()) s = CheckReal("ga.crossover.rate", cx.rate(), 0, false, 1, false);
  if (s.ok()) {
    s = CheckReal("ga.crossover.blend_alpha", cx.blend_alpha(), 0, false, 1,
                  false);
  }
  if (s.ok() && !mut.has_rate()) {
    s = Bad("ga.mutation.rate", "not set", "[0, 1]", "nothing");
  }
  if (s.ok()) s = CheckReal("ga.mutation.rate", mut.rate(), 0, false, 1, false);
  if (s.ok() && !mut.has_step()) {
    s = Bad("ga.mutation.step", "not set", "a finite number > 0", "nothing");
  }
  if (s.ok()) s = CheckPositiveFinite("ga.mutation.step", mut.step());
  return s;
}

absl::Status CheckMigration(const RunSpec& spec, uint32_t min_pop) {
  const auto& isl = spec.islands();
  absl::Status s = CheckEnum("islands.topology", isl.topology(),
                             skerry::v1::Topology_descriptor());
  if (s.ok()) {
    s = CheckEnum("islands.emigrants", isl.emigrants(),
                  skerry::v1::EmigrantChoice_descriptor());
  }
  if (s.ok()) {
    s = CheckEnum("islands.replacement", isl.replacement(),
                  skerry::v1::Replacement_descriptor());
  }
  if (s.ok()) {
    s = CheckRange("islands.interval", isl.interval(), 1, UINT32_MAX);
  }
  if (s.ok())
    s = CheckRange("islands.migrants", isl.migrants(), 1, min_pop - 1);
  if (s.ok() && isl.topology() == skerry::v1::RANDOM && isl.count() > 1) {
    s = CheckRange("islands.random_degree", isl.random_degree(), 1,
                   isl.count() - 1);
  }
  // Every arrival needs a slot of its own beside the elites and immigrants,
  // with at least one slot left for offspring. A RANDOM topology's in-degree
  // varies by epoch; its surplus arrivals are dropped (documented in
  // server/engine/breeder.h).
  if (s.ok() && isl.count() > 1 && isl.topology() != skerry::v1::RANDOM) {
    uint64_t in_degree = 1;
    if (isl.topology() == skerry::v1::TWO_WAY_RING) {
      in_degree = isl.count() == 2 ? 1 : 2;
    } else if (isl.topology() == skerry::v1::FULLY_CONNECTED) {
      in_degree = isl.count() - 1;
    }
    const uint64_t arrivals = in_degree * isl.migrants();
    const uint64_t taken =
        arrivals + spec.ga().elites() + spec.ga().immigrants();
    if (taken >= min_pop) {
      s = Bad(
          "islands.migrants",
          absl::StrCat("each epoch brings ", arrivals,
                       " migrants to an island (", in_degree, " sources x ",
                       isl.migrants(), "); with ", spec.ga().elites(),
                       " elites and ", spec.ga().immigrants(),
                       " immigrants no slot is left for offspring"),
          absl::StrCat("[1, ",
                       (min_pop - 1 - spec.ga().elites() -
                        std::min<uint64_t>(spec.ga().immigrants(), min_pop)) /
                           in_degree,
                       "]"),
          absl::StrCat(isl.migrants()));
    }
  }
  return s;
}

// Pole evaluators: scores are maximised and the genome is the network.
absl::Status CheckNetworkRun(const RunSpec& spec) {
  const auto& ev = spec.evaluator();
  if (ev.kind_case() == skerry::v1::EvaluatorSpec::kBuiltin &&
      (ev.has_network() || ev.has_episodes())) {
    return Bad(ev.has_network() ? "evaluator.network" : "evaluator.episodes",
               "the builtin functions use neither a network nor episodes",
               "unset", "set");
  }
  if (!pole::IsPoleEvaluator(ev)) return absl::OkStatus();
  if (spec.objective() != skerry::v1::MAXIMIZE) {
    return Bad("objective", "pole balancing scores are maximised", "MAXIMIZE",
               skerry::v1::Objective_Name(spec.objective()));
  }
  absl::StatusOr<uint64_t> weights = WeightCount(ev.network());
  if (!weights.ok()) return weights.status();
  if (spec.genome_length() != *weights) {
    return Bad("genome_length",
               "must equal the number of weights evaluator.network has",
               absl::StrCat(*weights), absl::StrCat(spec.genome_length()));
  }
  return absl::OkStatus();
}

// External evaluators: whether argv[0] can be run is known only at the worker
// (its PATH, its files), so submit checks the shape alone.
absl::Status CheckExternal(const skerry::v1::ExternalEvaluator& ext) {
  if (ext.argv().empty() || ext.argv(0).empty()) {
    return Bad(
        "evaluator.external.argv", "no program given",
        "the program then its arguments, e.g. argv: \"/usr/bin/python3\"",
        ext.argv().empty() ? "nothing" : "an empty argv[0]");
  }
  if (ext.memory_limit_mb() > (1u << 20)) {
    return Bad("evaluator.external.memory_limit_mb", "too large",
               "at most 1048576 (1 TiB); 0 for no limit",
               absl::StrCat(ext.memory_limit_mb()));
  }
  for (const auto& entry : ext.env()) {
    const std::string& name = entry.first;
    if (name.empty() || name.find('=') != std::string::npos) {
      return Bad("evaluator.external.env", "bad variable name",
                 "a non-empty name without '='", QuotePrefix(name));
    }
  }
  return absl::OkStatus();
}

absl::Status CheckEvaluator(const RunSpec& spec) {
  if (spec.evaluator().kind_case() == skerry::v1::EvaluatorSpec::KIND_NOT_SET) {
    return absl::InvalidArgumentError(absl::StrCat(
        "evaluator: missing: say what scores a genome (allowed: evaluator { "
        "builtin { function: \"sphere\" } } or another of ",
        absl::StrJoin(BuiltinNames(), ", "),
        "; external { argv: \"./my-sim\" }; cart_pole { }; double_pole { }; "
        "docs/spec-reference.md)"));
  }
  if (spec.evaluator().kind_case() == skerry::v1::EvaluatorSpec::kExternal) {
    if (absl::Status s = CheckExternal(spec.evaluator().external()); !s.ok()) {
      return s;
    }
    // Episodes: one request each (docs/evaluator-protocol.md); 0 means 1.
    const auto& episodes = spec.evaluator().episodes();
    if (absl::Status s =
            CheckRange("evaluator.episodes.count", episodes.count(), 0, 1000);
        !s.ok()) {
      return s;
    }
    if (episodes.aggregate() != skerry::v1::AGGREGATE_UNSPECIFIED) {
      if (absl::Status s =
              CheckEnum("evaluator.episodes.aggregate", episodes.aggregate(),
                        skerry::v1::EpisodeAggregate_descriptor());
          !s.ok()) {
        return s;
      }
    }
  } else if (absl::Status s = MakeEvaluator(spec.evaluator()).status();
             !s.ok()) {
    return s;
  }
  if (absl::Status s = CheckNetworkRun(spec); !s.ok()) return s;
  if (absl::Status s = CheckValidation(spec.evaluator()); !s.ok()) return s;
  return CheckPositiveFinite("evaluator.time_limit_seconds",
                             spec.evaluator().time_limit_seconds());
}

bool HasStopCondition(const skerry::v1::StopSpec& stop) {
  return stop.max_generations() > 0 || stop.max_evaluations() > 0 ||
         stop.has_target_score() || stop.max_wall_seconds() > 0;
}

absl::Status CheckStop(const RunSpec& spec) {
  const auto& stop = spec.stop();
  if (!(stop.max_wall_seconds() >= 0) ||
      !std::isfinite(stop.max_wall_seconds())) {
    return Bad("stop.max_wall_seconds", "must be a finite number >= 0",
               "[0, inf) with 0 meaning no limit",
               absl::StrCat(stop.max_wall_seconds()));
  }
  if (stop.has_target_score() && !std::isfinite(stop.target_score())) {
    return Bad("stop.target_score", "not finite", "a finite number",
               absl::StrCat(stop.target_score()));
  }
  if (!HasStopCondition(stop)) {
    return Bad("stop", "no stop condition",
               "max_generations, max_evaluations, target_score or "
               "max_wall_seconds",
               "none");
  }
  return absl::OkStatus();
}

void NormalizeSelection(skerry::v1::SelectionSpec* sel) {
  if (sel->method() == skerry::v1::SELECTION_UNSPECIFIED) {
    sel->set_method(skerry::v1::TOURNAMENT);
  }
  if (sel->scaling() == skerry::v1::SCALING_UNSPECIFIED) {
    sel->set_scaling(skerry::v1::WINDOWING);
  }
  if (sel->linear_scaling_factor() == 0) sel->set_linear_scaling_factor(2.0);
  if (sel->tournament_size() == 0) sel->set_tournament_size(2);
  if (sel->rank_pressure() == 0) sel->set_rank_pressure(1.5);
  if (sel->truncation_fraction() == 0) sel->set_truncation_fraction(0.5);
}

// Needs genome_length and the initial range normalised first.
void NormalizeVariation(RunSpec* spec) {
  auto* ga = spec->mutable_ga();
  if (ga->crossover().method() == skerry::v1::CROSSOVER_UNSPECIFIED) {
    ga->mutable_crossover()->set_method(skerry::v1::UNIFORM);
  }
  if (!ga->crossover().has_rate()) ga->mutable_crossover()->set_rate(0.8);
  auto* mut = ga->mutable_mutation();
  if (!mut->has_rate() && spec->genome_length() > 0) {
    mut->set_rate(1.0 / spec->genome_length());
  }
  if (!mut->has_step()) {
    double width = spec->init_upper() - spec->init_lower();
    if (!(width > 0 && std::isfinite(width))) {
      width = spec->upper_bound() - spec->lower_bound();
    }
    if (width > 0 && std::isfinite(width)) mut->set_step(0.1 * width);
  }
}

void NormalizeIslands(skerry::v1::IslandSpec* isl) {
  if (isl->count() == 0) isl->set_count(1);
  if (isl->topology() == skerry::v1::TOPOLOGY_UNSPECIFIED) {
    isl->set_topology(skerry::v1::RING);
  }
  if (isl->interval() == 0) isl->set_interval(10);
  if (isl->migrants() == 0) isl->set_migrants(1);
  if (isl->emigrants() == skerry::v1::EMIGRANT_UNSPECIFIED) {
    isl->set_emigrants(skerry::v1::EMIGRATE_BEST);
  }
  if (isl->replacement() == skerry::v1::REPLACEMENT_UNSPECIFIED) {
    isl->set_replacement(skerry::v1::REPLACE_WORST);
  }
  if (isl->random_degree() == 0) isl->set_random_degree(1);
}

// Pole evaluators: their own defaults, then MAXIMIZE, network weights in
// [-10, 10] and genome_length = the weight count, each only when unset.
void NormalizeNetworkRun(RunSpec* spec) {
  if (!pole::IsPoleEvaluator(spec->evaluator())) return;
  pole::NormalizePoleEvaluator(spec->mutable_evaluator());
  if (spec->objective() == skerry::v1::OBJECTIVE_UNSPECIFIED) {
    spec->set_objective(skerry::v1::MAXIMIZE);
  }
  if (!spec->has_lower_bound()) spec->set_lower_bound(-10.0);
  if (!spec->has_upper_bound()) spec->set_upper_bound(10.0);
  absl::StatusOr<uint64_t> weights = WeightCount(spec->evaluator().network());
  if (spec->genome_length() == 0 && weights.ok() &&
      *weights <= kMaxGenomeLength) {
    spec->set_genome_length(static_cast<uint32_t>(*weights));
  }
}

}  // namespace

void NormalizeSpec(RunSpec* spec) {
  if (spec->name().empty()) spec->set_name("run");
  NormalizeNetworkRun(spec);
  if (spec->objective() == skerry::v1::OBJECTIVE_UNSPECIFIED) {
    spec->set_objective(skerry::v1::MINIMIZE);
  }
  if (spec->evaluator().kind_case() == skerry::v1::EvaluatorSpec::kBuiltin) {
    if (const BuiltinFunction* f =
            FindBuiltin(spec->evaluator().builtin().function())) {
      if (!spec->has_lower_bound()) spec->set_lower_bound(f->lower);
      if (!spec->has_upper_bound()) spec->set_upper_bound(f->upper);
    }
  }
  if (!spec->has_init_lower() && spec->has_lower_bound()) {
    spec->set_init_lower(spec->lower_bound());
  }
  if (!spec->has_init_upper() && spec->has_upper_bound()) {
    spec->set_init_upper(spec->upper_bound());
  }
  NormalizeStrategy(spec);
  if (StrategyOf(*spec) == StrategyKind::kGa) {
    auto* ga = spec->mutable_ga();
    if (ga->population_size() == 0) ga->set_population_size(50);
    if (!ga->has_elites()) ga->set_elites(1);
    NormalizeSelection(ga->mutable_selection());
    NormalizeVariation(spec);
  }
  NormalizeIslands(spec->mutable_islands());
  if (spec->evaluator().time_limit_seconds() == 0) {
    spec->mutable_evaluator()->set_time_limit_seconds(60);
  }
  NormalizeValidation(spec->mutable_evaluator());
  if (spec->max_attempts() == 0) spec->set_max_attempts(3);
  if (!HasStopCondition(spec->stop())) {
    spec->mutable_stop()->set_max_generations(100);
  }
}

absl::Status ValidateSpec(const RunSpec& spec) {
  // A bad network leaves genome_length unfilled; name the network, not that.
  absl::Status s =
      pole::IsPoleEvaluator(spec.evaluator())
          ? ValidateNetworkSpec(spec.evaluator().network(), "evaluator.network")
          : absl::OkStatus();
  if (s.ok()) {
    s = CheckRange("genome_length", spec.genome_length(), 1, kMaxGenomeLength);
  }
  if (s.ok()) {
    s = CheckEnum("objective", spec.objective(),
                  skerry::v1::Objective_descriptor());
  }
  if (s.ok()) s = CheckEvaluator(spec);
  if (s.ok()) s = CheckBounds(spec);
  if (s.ok()) s = CheckInitRange(spec);
  if (s.ok()) s = CheckGenePrecision(spec);
  if (s.ok()) s = ValidateStrategy(spec);
  const bool ga = StrategyOf(spec) == StrategyKind::kGa;
  if (s.ok() && ga) {
    s = CheckRange("ga.population_size", spec.ga().population_size(),
                   kMinPopulation, kMaxPopulation);
  }
  if (s.ok()) s = CheckIslandSizes(spec);
  if (!s.ok()) return s;
  const uint32_t min_pop = SmallestIsland(spec);
  if (ga) {
    s = CheckBreeding(spec, min_pop);
    if (s.ok()) s = CheckSelection(spec, min_pop);
    if (s.ok()) s = CheckVariation(spec);
    if (s.ok() && spec.ga().has_keyframe_interval()) {
      s = CheckRange("ga.keyframe_interval", spec.ga().keyframe_interval(), 1,
                     kMaxKeyframeInterval);
    }
  }
  if (s.ok()) s = CheckMigration(spec, min_pop);
  if (s.ok()) s = CheckStop(spec);
  if (s.ok()) {
    s = CheckRange("max_attempts", spec.max_attempts(), 1, kMaxAttempts);
  }
  return s;
}

uint32_t IslandPopulation(const RunSpec& spec, uint32_t island) {
  if (island < static_cast<uint32_t>(spec.islands().population_sizes_size())) {
    return spec.islands().population_sizes(static_cast<int>(island));
  }
  if (StrategyOf(spec) != StrategyKind::kGa) {
    return EsPopulation(spec) + (HasDistributionGenomes(spec) ? 1 : 0);
  }
  return spec.ga().population_size();
}

uint32_t KeyframeInterval(const RunSpec& spec) {
  if (StrategyOf(spec) != StrategyKind::kGa) return 1;
  if (spec.ga().has_keyframe_interval()) {
    return std::max<uint32_t>(1, spec.ga().keyframe_interval());
  }
  return spec.genome_length() >= kRecipeGenomeLength ? kDefaultKeyframeInterval
                                                     : 1;
}

absl::StatusOr<RunSpec> PrepareSpec(RunSpec spec) {
  NormalizeSpec(&spec);
  if (absl::Status s = ValidateSpec(spec); !s.ok()) return s;
  return spec;
}

namespace {

absl::Status OverBudget(absl::string_view what, uint64_t value, uint64_t limit,
                        absl::string_view flag) {
  if (limit == 0 || value <= limit) return absl::OkStatus();
  return absl::InvalidArgumentError(absl::StrCat(
      "budget ", what, ": ", value, " exceeds the coordinator's budget of ",
      limit, " (", flag, ")"));
}

// A task's fixed fields (ids, attempt, seed, kind) and framing, with room.
constexpr uint64_t kTaskOverheadBytes = 64;

}  // namespace

SpecBudgets DefaultSpecBudgets(uint64_t physical_memory_bytes) {
  SpecBudgets b;
  // At least 2^20 genes (a population of 1000 networks of 1000 weights),
  // even on a small machine.
  b.max_generation_genes =
      std::max<uint64_t>(physical_memory_bytes / 1024, uint64_t{1} << 20);
  // SQLite writes on the order of 10^5 genome rows a second here
  // (docs/performance.md): 10^6 is a commit of about ten seconds.
  b.max_generation_genomes = 1000000;
  b.max_evaluator_bytes = 1 << 20;
  b.max_name_bytes = 256;
  // A lease answer holds at least one task (server/api/fleet_service.h).
  b.max_task_bytes = 16 << 20;
  return b;
}

absl::StatusOr<RunSpec> PrepareSpec(RunSpec spec, const SpecBudgets& budgets) {
  // Before anything is made from the spec: the sizes as sent.
  if (absl::Status s = OverBudget("name bytes", spec.name().size(),
                                  budgets.max_name_bytes, "--max-name-bytes");
      !s.ok()) {
    return s;
  }
  if (absl::Status s =
          OverBudget("evaluator bytes (the serialised evaluator spec)",
                     spec.evaluator().ByteSizeLong(),
                     budgets.max_evaluator_bytes, "--max-evaluator-bytes");
      !s.ok()) {
    return s;
  }
  absl::StatusOr<RunSpec> prepared = PrepareSpec(std::move(spec));
  if (!prepared.ok()) return prepared.status();
  // Validated: every factor is within its range, so no product overflows
  // (at most 256 islands x 10^6 x 10^6).
  uint64_t population = 0;
  for (uint32_t i = 0; i < prepared->islands().count(); ++i) {
    population += IslandPopulation(*prepared, i);
  }
  if (absl::Status s = OverBudget("genomes per generation (over all islands)",
                                  population, budgets.max_generation_genomes,
                                  "--max-generation-genomes");
      !s.ok()) {
    return s;
  }
  // What the coordinator holds of a running generation. A natural ES island
  // with distribution genomes holds its samples as recipes, so only its
  // centre, the centre's genome and Adam's two moments: 4 vectors.
  const bool recipes = StrategyOf(*prepared) == StrategyKind::kNaturalEs &&
                       HasDistributionGenomes(*prepared);
  const uint64_t islands = std::max<uint32_t>(1, prepared->islands().count());
  const uint64_t held = recipes ? 4 * islands : population;
  const uint64_t genes = held * prepared->genome_length();
  if (absl::Status s = OverBudget(
          recipes ? absl::StrCat("genes held per generation (", islands,
                                 " islands x 4 vectors: the centre, its genome "
                                 "and Adam's two moments; natural ES samples "
                                 "are held as recipes; x genome_length ",
                                 prepared->genome_length(), ")")
                  : absl::StrCat("genes per generation (", population,
                                 " genomes over all islands x genome_length ",
                                 prepared->genome_length(), ")"),
          genes, budgets.max_generation_genes, "--max-generation-genes");
      !s.ok()) {
    return s;
  }
  const uint64_t task_bytes = 8 * uint64_t{prepared->genome_length()} +
                              prepared->evaluator().ByteSizeLong() +
                              kTaskOverheadBytes;
  if (absl::Status s = OverBudget(
          absl::StrCat("task bytes (8 x genome_length ",
                       prepared->genome_length(), " + the evaluator spec + ",
                       kTaskOverheadBytes, ")"),
          task_bytes, budgets.max_task_bytes, "--max-task-bytes");
      !s.ok()) {
    return s;
  }
  return prepared;
}

}  // namespace skerry
