#include "cli/format.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <optional>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "google/protobuf/util/json_util.h"
#include "google/protobuf/wrappers.pb.h"
#include "server/lineage/dot.h"

namespace skerry::cli {
namespace {

using skerry::v1::GenerationStats;
using skerry::v1::RunSummary;

std::string Pad(const std::string& cell, size_t width, bool right) {
  std::string pad(width - std::min(width, cell.size()), ' ');
  return right ? pad + cell : cell + pad;
}

std::string RunBest(const RunSummary& run) {
  return run.has_best() ? FormatScore(run.best_score()) : "-";
}

// "12" when every island is at generation 12, "11-12" when they differ.
std::string GenerationRange(const RunSummary& run) {
  if (run.islands().empty()) return "-";
  uint32_t low = run.islands(0).generation();
  uint32_t high = low;
  for (const auto& island : run.islands()) {
    low = std::min(low, island.generation());
    high = std::max(high, island.generation());
  }
  return low == high ? absl::StrCat(low) : absl::StrCat(low, "-", high);
}

std::string ObjectiveName(skerry::v1::Objective objective) {
  return objective == skerry::v1::MAXIMIZE ? "maximize" : "minimize";
}

}  // namespace

std::string RunStateName(skerry::v1::RunState state) {
  switch (state) {
    case skerry::v1::QUEUED:
      return "queued";
    case skerry::v1::RUNNING:
      return "running";
    case skerry::v1::PAUSED:
      return "paused";
    case skerry::v1::FINISHED:
      return "finished";
    case skerry::v1::STOPPED:
      return "stopped";
    case skerry::v1::FAILED_RUN:
      return "failed";
    default:
      return absl::StrCat("state-", static_cast<int>(state));
  }
}

bool IsTerminal(skerry::v1::RunState state) {
  return state == skerry::v1::FINISHED || state == skerry::v1::STOPPED ||
         state == skerry::v1::FAILED_RUN;
}

std::string OriginName(skerry::v1::Origin origin) {
  return lineage::OriginLabel(origin);  // one name per origin, everywhere
}

std::string FormatScore(double score) {
  if (std::isnan(score)) return "nan";
  if (std::isinf(score)) return score > 0 ? "inf" : "-inf";
  return absl::StrFormat("%.6g", score);
}

std::string FormatCount(uint64_t count) {
  std::string digits = absl::StrCat(count);
  std::string out;
  for (size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (digits.size() - i) % 3 == 0) out.push_back(',');
    out.push_back(digits[i]);
  }
  return out;
}

std::string FormatTimestamp(int64_t unix_ms, absl::TimeZone zone) {
  if (unix_ms == 0) return "-";
  return absl::FormatTime("%Y-%m-%d %H:%M:%S", absl::FromUnixMillis(unix_ms),
                          zone);
}

std::string FormatTable(const std::vector<std::string>& header,
                        const std::vector<std::vector<std::string>>& rows,
                        const std::vector<size_t>& right_aligned) {
  std::vector<size_t> widths(header.size(), 0);
  auto widen = [&widths](const std::vector<std::string>& row) {
    for (size_t c = 0; c < row.size() && c < widths.size(); ++c) {
      widths[c] = std::max(widths[c], row[c].size());
    }
  };
  widen(header);
  for (const auto& row : rows) widen(row);
  auto line = [&](const std::vector<std::string>& row) {
    std::string out;
    for (size_t c = 0; c < widths.size(); ++c) {
      bool right = std::find(right_aligned.begin(), right_aligned.end(), c) !=
                   right_aligned.end();
      const std::string cell = c < row.size() ? row[c] : "";
      if (c > 0) out += "  ";
      out += Pad(cell, widths[c], right);
    }
    while (!out.empty() && out.back() == ' ') out.pop_back();
    return out + "\n";
  };
  std::string out = line(header);
  for (const auto& row : rows) out += line(row);
  return out;
}

std::string FormatRunList(const std::vector<RunSummary>& runs,
                          absl::TimeZone zone) {
  if (runs.empty()) return "no runs\n";
  std::vector<std::vector<std::string>> rows;
  for (const RunSummary& run : runs) {
    // A fork says whose: "NAME (fork of 3 at 12)".
    const std::string name =
        run.parent_run() == 0
            ? run.name()
            : absl::StrCat(run.name(), " (fork of ", run.parent_run(), " at ",
                           run.parent_generation(), ")");
    rows.push_back({absl::StrCat(run.id()), name, run.owner(),
                    RunStateName(run.state()), GenerationRange(run),
                    FormatCount(run.evaluations()), RunBest(run),
                    FormatTimestamp(run.created_unix_ms(), zone)});
  }
  return FormatTable(
      {"ID", "NAME", "OWNER", "STATE", "GEN", "EVALS", "BEST", "CREATED"}, rows,
      {0, 4, 5, 6});
}

std::string FormatValidationState(const skerry::v1::Validation& v) {
  switch (v.state()) {
    case skerry::v1::VALIDATION_DONE:
      return absl::StrCat(
          "score ", FormatScore(v.score()), " on ", v.cases(),
          v.cases() == 1 ? " held-out case" : " held-out cases");
    case skerry::v1::VALIDATION_FAILED:
      return absl::StrCat("failed after ", v.attempts(),
                          " attempts: ", v.error());
    default:
      return v.attempts() == 0
                 ? "pending"
                 : absl::StrCat("pending (", v.attempts(),
                                " attempts so far; last: ", v.error(), ")");
  }
}

std::string FormatRunDetails(const skerry::v1::GetRunResponse& response) {
  const RunSummary& run = response.run();
  std::vector<std::vector<std::string>> fields = {
      {"run", absl::StrCat(run.id(), " \"", run.name(), "\"")},
      {"owner", run.owner().empty() ? "-" : run.owner()},
      {"state", RunStateName(run.state())},
      {"objective", ObjectiveName(run.objective())},
      {"seed", absl::StrCat(run.seed())},
      {"evaluations", FormatCount(run.evaluations())},
      {"workers", absl::StrCat(response.workers())},
      {"champion", run.has_best()
                       ? absl::StrCat("score ", FormatScore(run.best_score()),
                                      " (genome ", run.champion_id(), ")")
                       : "none yet"},
  };
  if (response.has_champion_validation()) {
    fields.push_back(
        {"validation", FormatValidationState(response.champion_validation())});
  }
  if (run.parent_run() != 0) {
    fields.push_back({"forked from",
                      absl::StrCat("run ", run.parent_run(), " at generation ",
                                   run.parent_generation())});
  }
  if (run.priority() > 1) {
    fields.push_back({"priority", absl::StrCat(run.priority())});
  }
  if (!run.message().empty()) fields.push_back({"message", run.message()});
  if (!run.coordinator_problem().empty()) {
    fields.push_back({"problem", run.coordinator_problem()});
  }
  std::string out;
  for (const auto& field : fields) {
    absl::StrAppend(&out, Pad(field[0], 12, false), field[1], "\n");
  }
  if (run.islands().empty()) return out;
  std::vector<std::vector<std::string>> rows;
  for (const auto& island : run.islands()) {
    bool stats = island.has_stats();
    rows.push_back({absl::StrCat(island.island()),
                    absl::StrCat(island.generation()),
                    absl::StrCat(island.evaluated(), "/", island.population()),
                    stats ? FormatScore(island.best()) : "-",
                    stats ? FormatScore(island.mean()) : "-",
                    stats ? FormatScore(island.diversity()) : "-",
                    island.done() ? "done" : ""});
  }
  absl::StrAppend(&out, "\n",
                  FormatTable({"ISLAND", "GEN", "EVALUATED", "BEST", "MEAN",
                               "DIVERSITY", ""},
                              rows, {0, 1, 2, 3, 4, 5}));
  absl::StrAppend(&out, FormatFailedGenomes(response));
  return out;
}

std::string FormatFailedGenomes(const skerry::v1::GetRunResponse& response) {
  if (response.failed_count() == 0) return "";
  std::string out = absl::StrCat(
      "\n", FormatCount(response.failed_count()),
      " genomes failed every attempt (they rank last)",
      response.failed_size() < static_cast<int>(response.failed_count())
          ? absl::StrCat("; the newest ", response.failed_size(), ":")
          : ":",
      "\n");
  for (const skerry::v1::Genome& g : response.failed()) {
    absl::StrAppend(&out, "  genome ", g.id(), " (", g.key().island(), "/",
                    g.key().generation(), "/", g.key().slot(), ", ",
                    g.attempts(), " attempts): ", g.error(), "\n");
  }
  return out;
}

std::string FormatGenerationTable(const std::vector<GenerationStats>& history,
                                  skerry::v1::Objective objective,
                                  size_t max_rows) {
  if (history.empty()) return "no complete generation yet\n";
  struct Row {
    double best = 0;
    std::optional<double> validation;  // of the island with the best
    double mean_sum = 0;
    uint64_t evaluations = 0;
    uint32_t islands = 0;
  };
  bool maximize = objective == skerry::v1::MAXIMIZE;
  bool validated = false;
  std::map<uint32_t, Row> by_generation;
  for (const GenerationStats& stats : history) {
    Row& row = by_generation[stats.generation()];
    bool better = maximize ? stats.best() > row.best : stats.best() < row.best;
    validated = validated || stats.has_validation_score();
    if (row.islands == 0 || better) {
      row.best = stats.best();
      row.validation.reset();
      if (stats.has_validation_score())
        row.validation = stats.validation_score();
    }
    row.mean_sum += stats.mean();
    row.evaluations += stats.evaluations();
    ++row.islands;
  }
  size_t skip = 0;
  if (max_rows > 0 && by_generation.size() > max_rows) {
    skip = by_generation.size() - max_rows;
  }
  std::vector<std::vector<std::string>> rows;
  size_t index = 0;
  for (const auto& [generation, row] : by_generation) {
    if (index++ < skip) continue;
    rows.push_back({absl::StrCat(generation), FormatScore(row.best),
                    FormatScore(row.mean_sum / row.islands),
                    FormatCount(row.evaluations), absl::StrCat(row.islands)});
    if (validated) {
      rows.back().insert(
          rows.back().begin() + 2,
          row.validation.has_value() ? FormatScore(*row.validation) : "-");
    }
  }
  std::string out;
  if (skip > 0) {
    absl::StrAppend(&out, "(", skip,
                    " earlier generations not shown; --all shows every one)\n");
  }
  if (validated) {
    absl::StrAppend(&out, FormatTable({"GEN", "BEST", "VALIDATION", "MEAN",
                                       "EVALS", "ISLANDS"},
                                      rows, {0, 1, 2, 3, 4, 5}));
  } else {
    absl::StrAppend(
        &out, FormatTable({"GEN", "BEST", "MEAN", "EVALS", "ISLANDS"}, rows,
                          {0, 1, 2, 3, 4}));
  }
  return out;
}

std::string FormatHistory(const std::vector<GenerationStats>& history) {
  if (history.empty()) return "no complete generation yet\n";
  bool validated = false;
  std::vector<std::vector<std::string>> rows;
  for (const GenerationStats& stats : history) {
    rows.push_back(
        {absl::StrCat(stats.island()), absl::StrCat(stats.generation()),
         FormatScore(stats.best()), FormatScore(stats.mean()),
         FormatScore(stats.worst()), FormatScore(stats.diversity()),
         FormatCount(stats.evaluations()), FormatCount(stats.failed())});
    validated = validated || stats.has_validation_score();
  }
  if (!validated) {
    return FormatTable({"ISLAND", "GEN", "BEST", "MEAN", "WORST", "DIVERSITY",
                        "EVALS", "FAILED"},
                       rows, {0, 1, 2, 3, 4, 5, 6, 7});
  }
  for (size_t i = 0; i < history.size(); ++i) {
    rows[i].insert(rows[i].begin() + 3,
                   history[i].has_validation_score()
                       ? FormatScore(history[i].validation_score())
                       : "-");
  }
  return FormatTable({"ISLAND", "GEN", "BEST", "VALIDATION", "MEAN", "WORST",
                      "DIVERSITY", "EVALS", "FAILED"},
                     rows, {0, 1, 2, 3, 4, 5, 6, 7, 8});
}

std::string FormatProgressLine(const RunSummary& run,
                               uint32_t max_generations) {
  std::string generation = GenerationRange(run);
  if (max_generations > 0) absl::StrAppend(&generation, "/", max_generations);
  size_t done = std::count_if(run.islands().begin(), run.islands().end(),
                              [](const auto& island) { return island.done(); });
  std::string line = absl::StrCat(
      "run ", run.id(), " ", RunStateName(run.state()), "  gen ", generation,
      "  evals ", FormatCount(run.evaluations()), "  best ", RunBest(run));
  if (done > 0) {
    absl::StrAppend(&line, "  islands done ", done, "/", run.islands_size());
  }
  if (!run.coordinator_problem().empty()) {
    absl::StrAppend(&line,
                    "  [coordinator cannot write its database: work held]");
  }
  if (run.dropped_updates() > 0) {
    absl::StrAppend(&line, "  [", run.dropped_updates(),
                    " updates dropped: read too slowly]");
  }
  // Every island with more than one: generation and best of its last complete
  // generation ("-" before the first).
  if (run.islands_size() > 1) {
    absl::StrAppend(&line, "  |");
    for (const auto& island : run.islands()) {
      absl::StrAppend(&line, " ", island.island(), ":g", island.generation(),
                      " ",
                      island.has_stats() ? FormatScore(island.best()) : "-");
    }
  }
  return line;
}

std::string FormatFinalState(const RunSummary& run) {
  std::string out =
      absl::StrCat("run ", run.id(), " ", RunStateName(run.state()), " after ",
                   FormatCount(run.evaluations()), " evaluations; ");
  if (run.has_best()) {
    absl::StrAppend(&out, "best score ", FormatScore(run.best_score()),
                    " (genome ", run.champion_id(), ")\n");
  } else {
    absl::StrAppend(&out, "no score yet\n");
  }
  if (!run.message().empty()) absl::StrAppend(&out, "  ", run.message(), "\n");
  return out;
}

std::string FormatChampion(const skerry::v1::Genome& genome,
                           absl::string_view spec_name) {
  const skerry::v1::GenomeKey& key = genome.key();
  std::string parents;
  if (genome.parent_a() != 0) {
    parents = absl::StrCat(" (parent ", genome.parent_a());
    if (genome.parent_b() != 0)
      absl::StrAppend(&parents, ", ", genome.parent_b());
    parents += ")";
  }
  std::string out = absl::StrCat(
      "champion of run ", key.run_id(), " \"", spec_name, "\"\n",
      "genome      ", genome.id(), "\n", "key         run ", key.run_id(),
      " / island ", key.island(), " / generation ", key.generation(),
      " / slot ", key.slot(), "\n", "origin      ", OriginName(genome.origin()),
      parents, "\n", "score       ", FormatScore(genome.score()), "\n",
      "genes (", genome.genes_size(), ")");
  for (int i = 0; i < genome.genes_size(); ++i) {
    absl::StrAppend(&out, i % 5 == 0 ? "\n  " : "  ",
                    absl::StrFormat("%.10g", genome.genes(i)));
  }
  return out + "\n";
}

absl::StatusOr<std::string> ChampionJson(const skerry::v1::Genome& genome,
                                         uint64_t run_id,
                                         absl::string_view spec_name) {
  google::protobuf::util::JsonPrintOptions options;
  options.always_print_primitive_fields = true;
  std::string genome_json;
  auto status = google::protobuf::util::MessageToJsonString(
      genome, &genome_json, options);
  if (!status.ok()) {
    return absl::InternalError(
        absl::StrCat("cannot write the genome as JSON: ", status.ToString()));
  }
  // A StringValue maps to a bare JSON string: this escapes the name for us.
  google::protobuf::StringValue name;
  name.set_value(std::string(spec_name));
  std::string name_json;
  status = google::protobuf::util::MessageToJsonString(name, &name_json);
  if (!status.ok()) {
    return absl::InternalError(absl::StrCat(
        "cannot write the spec name as JSON: ", status.ToString()));
  }
  return absl::StrCat("{\"runId\":\"", run_id, "\",\"specName\":", name_json,
                      ",\"genome\":", genome_json, "}\n");
}

}  // namespace skerry::cli
