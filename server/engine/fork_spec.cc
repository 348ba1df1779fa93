#include "server/engine/fork_spec.h"

#include <string>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "common/strategy_spec.h"
#include "google/protobuf/text_format.h"
#include "google/protobuf/util/message_differencer.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;

absl::Status Unchangeable(const std::string& field, const std::string& parent,
                          const std::string& fork) {
  return absl::InvalidArgumentError(
      absl::StrCat(field, ": a fork may not change it (the parent's is ",
                   parent, ", the fork's would be ", fork,
                   "); the fork starts from copies of the parent's genomes"));
}

// The name of the spec's strategy field (`ga` once normalised: NormalizeSpec
// moves `strategy.ga` to the top-level `ga`).
std::string StrategyName(const RunSpec& spec) {
  const google::protobuf::FieldDescriptor* field =
      skerry::v1::StrategySpec::descriptor()->FindFieldByNumber(
          static_cast<int>(spec.strategy().kind_case()));
  return field == nullptr ? std::string("ga") : field->name();
}

}  // namespace

absl::StatusOr<RunSpec> MergeForkChanges(const RunSpec& parent,
                                         absl::string_view changes) {
  // Parsed alone first, for an error that points at the changes' own line
  // and column (and for the UTF-8 check of string fields).
  absl::StatusOr<RunSpec> alone = ParseSpecText(changes, "changes");
  if (!alone.ok()) return alone.status();
  RunSpec merged = parent;
  // Merged over the parent's with the text parser, not MergeFrom: a zero
  // written in the changes (`immigrants: 0`) must win over the parent's
  // value, and proto3 MergeFrom skips zeros.
  if (!google::protobuf::TextFormat::MergeFromString(std::string(changes),
                                                     &merged)) {
    return absl::InvalidArgumentError(
        "changes: cannot be merged over the parent's spec");
  }
  KeepGenomeLayout(parent, &merged);
  return merged;
}

absl::Status CheckForkChanges(const RunSpec& parent, const RunSpec& fork,
                              uint32_t generation) {
  // The fork's islands go on from the parent's strategy states at the fork
  // generation (strategy_replay.h), which only the same strategy can read.
  if (StrategyOf(fork) != StrategyOf(parent)) {
    return Unchangeable("strategy", StrategyName(parent), StrategyName(fork));
  }
  if (fork.genome_length() != parent.genome_length()) {
    return Unchangeable("genome_length", absl::StrCat(parent.genome_length()),
                        absl::StrCat(fork.genome_length()));
  }
  if (fork.objective() != parent.objective()) {
    return Unchangeable("objective",
                        skerry::v1::Objective_Name(parent.objective()),
                        skerry::v1::Objective_Name(fork.objective()));
  }
  if (fork.islands().count() != parent.islands().count()) {
    return Unchangeable("islands.count", absl::StrCat(parent.islands().count()),
                        absl::StrCat(fork.islands().count()));
  }
  for (uint32_t i = 0; i < parent.islands().count(); ++i) {
    const uint32_t a = IslandPopulation(parent, i);
    const uint32_t b = IslandPopulation(fork, i);
    if (a != b) {
      return Unchangeable(
          parent.islands().population_sizes_size() > 0 ||
                  fork.islands().population_sizes_size() > 0
              ? absl::StrCat("islands.population_sizes[", i, "]")
          : StrategyOf(parent) == StrategyKind::kGa
              ? std::string("ga.population_size")
              : absl::StrCat("strategy.", StrategyName(parent),
                             ".population_size"),
          absl::StrCat(a), absl::StrCat(b));
    }
  }
  if (fork.stop().max_generations() > 0 &&
      fork.stop().max_generations() <= generation) {
    return absl::InvalidArgumentError(absl::StrCat(
        "stop.max_generations: the fork starts at generation ", generation,
        ", so its generation limit must be more than that (got ",
        fork.stop().max_generations(), ")"));
  }
  return absl::OkStatus();
}

bool ForkKeepsScores(const RunSpec& parent, const RunSpec& fork) {
  if (parent.seed() != fork.seed()) return false;
  skerry::v1::EvaluatorSpec a = parent.evaluator();
  skerry::v1::EvaluatorSpec b = fork.evaluator();
  a.clear_validation();
  b.clear_validation();
  return google::protobuf::util::MessageDifferencer::Equals(a, b);
}

}  // namespace skerry::engine
