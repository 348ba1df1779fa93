#include "cli/compare.h"

#include <algorithm>
#include <cmath>
#include <set>
#include <sstream>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_split.h"
#include "cli/format.h"
#include "cli/handlers.h"
#include "cli/series.h"
#include "common/rank_sum.h"

namespace skerry::cli {
namespace {

using skerry::v1::RunSummary;

bool Better(skerry::v1::Objective objective, double a, double b) {
  return objective == skerry::v1::MAXIMIZE ? a > b : a < b;
}

bool Reaches(skerry::v1::Objective objective, double best, double target) {
  return objective == skerry::v1::MAXIMIZE ? best >= target : best <= target;
}

std::string Num(double v) { return absl::StrFormat("%.6g", v); }

// "median [q1, q3] (n)" of the values, or "-" when there are none.
std::string Summary(const std::vector<double>& values, size_t runs) {
  if (values.empty()) return "-";
  std::string out = Num(Quantile(values, 0.5));
  if (values.size() > 1) {
    absl::StrAppend(&out, " [", Num(Quantile(values, 0.25)), ", ",
                    Num(Quantile(values, 0.75)), "]");
  }
  if (values.size() != runs) absl::StrAppend(&out, " (", values.size(), ")");
  return out;
}

// The default checkpoints: a quarter, a half, three quarters and all of the
// shortest run's evaluations, so that every run has a value at each.
}  // namespace

std::vector<uint64_t> DefaultCheckpoints(
    const std::vector<CompareGroup>& groups) {
  uint64_t shortest = 0;
  bool first = true;
  for (const CompareGroup& g : groups) {
    for (const BestCurve& c : g.curves) {
      if (c.empty()) continue;
      shortest = first ? c.back().first : std::min(shortest, c.back().first);
      first = false;
    }
  }
  std::vector<uint64_t> out;
  if (shortest == 0) return out;
  for (uint64_t q = 1; q <= 4; ++q) {
    const uint64_t at = shortest * q / 4;
    if (at > 0 && (out.empty() || at > out.back())) out.push_back(at);
  }
  return out;
}

BestCurve MakeBestCurve(const std::vector<skerry::v1::GenerationStats>& history,
                        skerry::v1::Objective objective) {
  std::vector<const skerry::v1::GenerationStats*> order;
  for (const auto& g : history) order.push_back(&g);
  std::sort(order.begin(), order.end(), [](const auto* a, const auto* b) {
    return std::make_pair(a->generation(), a->island()) <
           std::make_pair(b->generation(), b->island());
  });
  BestCurve out;
  uint64_t evaluations = 0;
  std::optional<double> best;
  for (const auto* g : order) {
    evaluations += g->evaluations();
    // A generation whose every evaluation failed has no best.
    if (g->failed() < g->evaluations() || g->evaluations() == 0) {
      if (!best.has_value() || Better(objective, g->best(), *best)) {
        best = g->best();
      }
    }
    if (best.has_value()) out.emplace_back(evaluations, *best);
  }
  return out;
}

std::optional<double> BestAt(const BestCurve& curve, uint64_t evaluations) {
  if (curve.empty() || curve.back().first < evaluations) return std::nullopt;
  std::optional<double> best;
  for (const auto& [evals, b] : curve) {
    if (evals > evaluations) break;
    best = b;
  }
  return best;
}

absl::StatusOr<std::vector<uint64_t>> ParseCheckpoints(absl::string_view text) {
  std::vector<uint64_t> out;
  for (absl::string_view item : absl::StrSplit(text, ',')) {
    item = absl::StripAsciiWhitespace(item);
    uint64_t v = 0;
    if (!absl::SimpleAtoi(item, &v) || v == 0 || item[0] == '+') {
      return absl::InvalidArgumentError(absl::StrCat(
          "--at: '", item,
          "' is not a number of evaluations (a whole number from 1); write "
          "checkpoints as 1000,5000,20000"));
    }
    if (!out.empty() && v <= out.back()) {
      return absl::InvalidArgumentError(
          absl::StrCat("--at: checkpoints go in increasing order, but ", v,
                       " follows ", out.back()));
    }
    out.push_back(v);
  }
  if (out.size() > kMaxCheckpoints) {
    return absl::InvalidArgumentError(absl::StrCat(
        "--at: at most ", kMaxCheckpoints, " checkpoints, got ", out.size()));
  }
  return out;
}

std::vector<CommandSpec> CompareCommandSpecs() {
  return {
      {"compare",
       {"RUN|SERIES", "[RUN|SERIES...]"},
       {{"at", "LIST",
         "checkpoints in evaluations, e.g. 1000,5000 (default: 1/4, 1/2, 3/4 "
         "and all of the shortest run's)"},
        {"target", "X", "also give each group's success rate at score X"}},
       "compare runs and series: best score by evaluations (--at), success "
       "at a target (--target), rank-sum test",
       "Each argument is a group: a run id, or a series name for all its "
       "runs. Prints, per group and checkpoint, the median best score the "
       "runs had reached by then with its quartiles [lower, upper] (Hyndman "
       "& Fan definition 7); with --target, how many runs reached X and the "
       "median evaluations they took; and between each two groups the "
       "Mann-Whitney U rank-sum test on the best score at the last "
       "checkpoint every group reached, two-sided, with its p-value, exact for "
       "small samples "
       "without ties, else the normal approximation with tie and continuity "
       "correction (the output says which).",
       CompareHandler},
  };
}

absl::StatusOr<std::vector<CompareGroup>> LoadCompareGroups(
    const std::vector<std::string>& args, RunClient& client) {
  std::optional<std::vector<RunSummary>> all;
  std::vector<CompareGroup> groups;
  std::set<std::string> seen;
  size_t total = 0;
  for (const std::string& arg : args) {
    if (!seen.insert(arg).second) {
      return absl::InvalidArgumentError(
          absl::StrCat("'", arg, "' is named twice"));
    }
    CompareGroup group;
    std::vector<RunSummary> runs;
    const bool is_id =
        !arg.empty() && std::all_of(arg.begin(), arg.end(), [](char c) {
          return absl::ascii_isdigit(static_cast<unsigned char>(c));
        });
    if (is_id) {
      absl::StatusOr<uint64_t> id = ParseRunId(arg);
      if (!id.ok()) return id.status();
      absl::StatusOr<skerry::v1::GetRunResponse> run = client.Get(*id);
      if (!run.ok()) return run.status();
      runs.push_back(run->run());
      group.label = absl::StrCat("run ", *id);
    } else {
      if (!all.has_value()) {
        absl::StatusOr<std::vector<RunSummary>> list = client.List();
        if (!list.ok()) return list.status();
        all = *std::move(list);
      }
      runs = SeriesRuns(*all, arg);
      if (runs.empty()) {
        return absl::NotFoundError(absl::StrCat(
            "no series named '", arg, "' (`skerry series` lists them)"));
      }
      group.label = absl::StrCat("series ", arg);
    }
    total += runs.size();
    if (total > kMaxCompareRuns) {
      return absl::InvalidArgumentError(
          absl::StrCat("at most ", kMaxCompareRuns, " runs in one comparison"));
    }
    group.objective = runs.front().objective();
    for (const RunSummary& r : runs) {
      if (r.objective() != group.objective) {
        return absl::InvalidArgumentError(
            absl::StrCat(group.label, " mixes minimising and maximising runs"));
      }
      absl::StatusOr<std::vector<skerry::v1::GenerationStats>> history =
          client.History(r.id(), std::nullopt);
      if (!history.ok()) return history.status();
      group.run_ids.push_back(r.id());
      group.curves.push_back(MakeBestCurve(*history, r.objective()));
    }
    groups.push_back(std::move(group));
  }
  for (const CompareGroup& g : groups) {
    if (g.objective != groups.front().objective) {
      return absl::InvalidArgumentError(
          "the groups do not share an objective: one minimises, another "
          "maximises");
    }
  }
  return groups;
}

int CompareCommand(const ParsedArgs& args, RunClient& client, Io& io) {
  std::vector<uint64_t> checkpoints;
  if (args.Has("at")) {
    absl::StatusOr<std::vector<uint64_t>> at = ParseCheckpoints(args.Get("at"));
    if (!at.ok()) return UsageFailure(at.status(), "compare", io);
    checkpoints = *std::move(at);
  }
  std::optional<double> target;
  if (args.Has("target")) {
    double x = 0;
    if (!absl::SimpleAtod(args.Get("target"), &x) || !std::isfinite(x)) {
      return UsageFailure(
          absl::InvalidArgumentError(absl::StrCat(
              "--target: '", args.Get("target"), "' is not a number")),
          "compare", io);
    }
    target = x;
  }
  absl::StatusOr<std::vector<CompareGroup>> groups =
      LoadCompareGroups(args.positionals, client);
  if (!groups.ok()) {
    if (absl::IsInvalidArgument(groups.status())) {
      return UsageFailure(groups.status(), "compare", io);
    }
    return ReportError(groups.status(), io);
  }
  if (checkpoints.empty()) checkpoints = DefaultCheckpoints(*groups);
  if (checkpoints.empty()) {
    *io.err << "skerry: no run compared has completed a generation yet\n";
    return kExitFailure;
  }
  *io.out << FormatComparison(*groups, checkpoints, target);
  return kExitOk;
}

std::string FormatComparison(const std::vector<CompareGroup>& groups_in,
                             const std::vector<uint64_t>& checkpoints,
                             std::optional<double> target) {
  const std::vector<CompareGroup>* groups = &groups_in;
  std::ostringstream out;
  const skerry::v1::Objective objective = groups->front().objective;
  out << "groups ("
      << (objective == skerry::v1::MAXIMIZE ? "maximising" : "minimising")
      << ")\n";
  for (size_t i = 0; i < groups->size(); ++i) {
    const CompareGroup& g = (*groups)[i];
    out << "  " << static_cast<char>('A' + i % 26) << "  " << g.label << ": "
        << g.run_ids.size() << (g.run_ids.size() == 1 ? " run" : " runs");
    if (g.run_ids.size() > 1) {
      out << " (" << g.run_ids.front() << " to " << g.run_ids.back() << ")";
    }
    out << "\n";
  }
  out << "\nbest score by evaluations: median [lower quartile, upper "
         "quartile]; (n) when only n runs got that far\n";
  std::vector<std::string> header = {"EVALS"};
  for (size_t i = 0; i < groups->size(); ++i) {
    header.push_back(std::string(1, static_cast<char>('A' + i % 26)));
  }
  std::vector<std::vector<std::string>> rows;
  // columns[checkpoint][group]: the best scores of the runs that got there.
  std::vector<std::vector<std::vector<double>>> columns;
  for (uint64_t at : checkpoints) {
    columns.emplace_back(groups->size());
    std::vector<std::string> row = {FormatCount(at)};
    for (size_t i = 0; i < groups->size(); ++i) {
      std::vector<double> values;
      for (const BestCurve& c : (*groups)[i].curves) {
        if (std::optional<double> b = BestAt(c, at)) values.push_back(*b);
      }
      row.push_back(Summary(values, (*groups)[i].curves.size()));
      columns.back()[i] = values;
    }
    rows.push_back(std::move(row));
  }
  out << FormatTable(header, rows, {0});
  if (target.has_value()) {
    out << "\nsuccess at target " << Num(*target) << " (best "
        << (objective == skerry::v1::MAXIMIZE ? ">=" : "<=") << " target)\n";
    for (size_t i = 0; i < groups->size(); ++i) {
      const CompareGroup& g = (*groups)[i];
      std::vector<double> took;
      for (const BestCurve& c : g.curves) {
        for (const auto& [evals, best] : c) {
          if (Reaches(objective, best, *target)) {
            took.push_back(static_cast<double>(evals));
            break;
          }
        }
      }
      out << "  " << static_cast<char>('A' + i % 26) << "  " << took.size()
          << "/" << g.curves.size() << " runs ("
          << absl::StrFormat("%.0f%%", 100.0 *
                                           static_cast<double>(took.size()) /
                                           static_cast<double>(g.curves.size()))
          << ")";
      if (!took.empty()) {
        out << ", median evaluations to reach it "
            << FormatCount(static_cast<uint64_t>(Quantile(took, 0.5)));
      }
      out << "\n";
    }
  }
  if (groups->size() >= 2) {
    // The last checkpoint every group reached with at least one run.
    size_t at = columns.size();
    for (size_t k = columns.size(); k-- > 0;) {
      bool all = true;
      for (const std::vector<double>& v : columns[k]) all = all && !v.empty();
      if (all) {
        at = k;
        break;
      }
    }
    if (at == columns.size()) {
      out << "\nMann-Whitney U rank-sum test: no checkpoint that every group "
             "reached\n";
      return out.str();
    }
    const std::vector<std::vector<double>>& last = columns[at];
    out << "\nMann-Whitney U rank-sum test, two-sided, on the best score at "
        << FormatCount(checkpoints[at]) << " evaluations\n";
    for (size_t i = 0; i < groups->size(); ++i) {
      for (size_t j = i + 1; j < groups->size(); ++j) {
        const char a = static_cast<char>('A' + i % 26);
        const char b = static_cast<char>('A' + j % 26);
        absl::StatusOr<RankSumTest> t = MannWhitneyU(last[i], last[j]);
        if (!t.ok()) {
          out << "  " << a << " vs " << b << ": not computed ("
              << t.status().message() << ")\n";
          continue;
        }
        out << "  " << a << " vs " << b << ": U = " << Num(t->u1) << " (U of "
            << b << " " << Num(t->u2) << "), n = " << last[i].size() << " and "
            << last[j].size() << ", p = " << absl::StrFormat("%.4g", t->p_value)
            << ", " << t->method << "\n";
      }
    }
  }
  return out.str();
}

}  // namespace skerry::cli
