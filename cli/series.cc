#include "cli/series.h"

#include <map>
#include <random>
#include <set>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"
#include "cli/format.h"
#include "cli/handlers.h"

namespace skerry::cli {
namespace {

using skerry::v1::RunSummary;

constexpr int kSubmitRetries = 2;

std::string NewSeriesRequestId() {
  std::random_device device;
  std::string id = "series-";
  for (int i = 0; i < 4; ++i) {
    absl::StrAppend(&id, absl::Hex(device(), absl::kZeroPad8));
  }
  return id;
}

absl::Status SeedError(absl::string_view item, absl::string_view why) {
  return absl::InvalidArgumentError(absl::StrCat(
      "--seeds: '", item, "' ", why, " (write seeds as 1-20 or 1,3,5-7)"));
}

absl::StatusOr<uint64_t> OneSeed(absl::string_view item,
                                 absl::string_view text) {
  uint64_t v = 0;
  if (text.empty() || !absl::SimpleAtoi(text, &v) || text[0] == '+' ||
      text[0] == '-') {
    return SeedError(item, "is not a seed (a whole number from 0)");
  }
  return v;
}

absl::StatusOr<skerry::v1::RunSummary> Steer(RunClient& client, uint64_t run_id,
                                             absl::string_view action) {
  if (action == "pause") return client.Pause(run_id);
  if (action == "resume") return client.Resume(run_id);
  return client.Stop(run_id);
}

// Whether `action` applies to a run in `state`; otherwise the run is left.
bool Applies(absl::string_view action, skerry::v1::RunState state) {
  if (action == "pause") return state == skerry::v1::RUNNING;
  if (action == "resume") return state == skerry::v1::PAUSED;
  return !IsTerminal(state);
}

std::string PastTense(absl::string_view action) {
  return action == "stop" ? "stopped" : absl::StrCat(action, "d");
}

}  // namespace

absl::StatusOr<std::vector<uint64_t>> ParseSeedList(absl::string_view text) {
  std::vector<uint64_t> out;
  std::set<uint64_t> seen;
  if (absl::StripAsciiWhitespace(text).empty()) {
    return absl::InvalidArgumentError(
        "--seeds: empty (write seeds as 1-20 or 1,3,5-7)");
  }
  for (absl::string_view item : absl::StrSplit(text, ',')) {
    item = absl::StripAsciiWhitespace(item);
    if (item.empty()) return SeedError(text, "has an empty item");
    std::vector<absl::string_view> ends = absl::StrSplit(item, '-');
    uint64_t lo = 0, hi = 0;
    if (ends.size() == 1) {
      absl::StatusOr<uint64_t> v = OneSeed(item, ends[0]);
      if (!v.ok()) return v.status();
      lo = hi = *v;
    } else if (ends.size() == 2) {
      absl::StatusOr<uint64_t> a = OneSeed(item, ends[0]);
      if (!a.ok()) return a.status();
      absl::StatusOr<uint64_t> b = OneSeed(item, ends[1]);
      if (!b.ok()) return b.status();
      if (*b < *a) return SeedError(item, "runs backwards");
      lo = *a;
      hi = *b;
    } else {
      return SeedError(item, "is not a seed or a range FROM-TO");
    }
    if (hi - lo >= kMaxSeeds) {
      return SeedError(item, absl::StrCat("names more than ", kMaxSeeds,
                                          " seeds, the most one series has"));
    }
    for (uint64_t s = lo;; ++s) {
      if (!seen.insert(s).second) {
        return SeedError(item, absl::StrCat("repeats seed ", s));
      }
      out.push_back(s);
      if (out.size() > kMaxSeeds) {
        return absl::InvalidArgumentError(
            absl::StrCat("--seeds: more than ", kMaxSeeds,
                         " seeds, the most one series has"));
      }
      if (s == hi) break;
    }
  }
  return out;
}

std::vector<CommandSpec> SeriesCommandSpecs() {
  return {
      {"series",
       {"[ACTION]", "[NAME]"},
       {},
       "list seed series, or show, pause, resume or stop one by name",
       "With no argument (or `list`), lists every series: name, owner, runs "
       "and their states. `show NAME` lists the series' runs; `pause NAME`, "
       "`resume NAME` and `stop NAME` act on each of its runs that can take "
       "the action (running, paused, not yet ended) and leave the others, "
       "naming each. A series is made by `skerry submit SPEC --seeds LIST`.",
       SeriesHandler},
      {"extend",
       {"RUN"},
       {{"generations", "N", "raise the generation limit to N"},
        {"evaluations", "N", "raise the evaluation budget to N"},
        {"wall-seconds", "S",
         "raise the wall-time limit to S seconds, counted from now"},
        {"target", "X",
         "move the target score further (up when maximising, down when "
         "minimising)"}},
       "raise an ended run's stop rule (--generations, --evaluations, "
       "--wall-seconds, --target) and let it go on",
       "Raises the stop rule of a finished or stopped run and lets it go on "
       "from where it ended. Each option given replaces the run's value and "
       "may not lower it; give at least one. The run then makes the very "
       "genomes a run submitted with the raised rule from the start makes "
       "(same digest), except under a wall-time limit, which is never "
       "reproducible.",
       ExtendHandler},
  };
}

int SubmitSeriesCommand(const ParsedArgs& args,
                        skerry::v1::StudyService::StubInterface& study,
                        Io& io) {
  if (args.Has("watch")) {
    return UsageFailure(
        absl::InvalidArgumentError("--watch: follows one run, so it does not "
                                   "go with --seeds (watch a run of the "
                                   "series by its id instead)"),
        "submit", io);
  }
  absl::StatusOr<std::vector<uint64_t>> seeds =
      ParseSeedList(args.Get("seeds"));
  if (!seeds.ok()) return UsageFailure(seeds.status(), "submit", io);
  skerry::v1::SubmitSeriesRequest req;
  if (args.Has("series")) req.set_name(args.Get("series"));
  if (args.Has("priority")) {
    absl::StatusOr<uint32_t> n =
        ParseBoundedUint("--priority", args.Get("priority"), 1, 1000);
    if (!n.ok()) return UsageFailure(n.status(), "submit", io);
    req.set_priority(*n);
  }
  absl::StatusOr<LoadedSpec> loaded = LoadSpecFile(args.positionals[0]);
  if (!loaded.ok()) {
    *io.err << "skerry: " << loaded.status().message() << "\n";
    return kExitUsage;
  }
  *req.mutable_spec() = loaded->spec;
  req.set_spec_text(loaded->text);
  for (uint64_t s : *seeds) req.add_seeds(s);
  // One id per invocation, reused on retry: a series is never made twice.
  req.set_request_id(NewSeriesRequestId());
  skerry::v1::SubmitSeriesResponse resp;
  absl::Status status;
  for (int attempt = 0; attempt <= kSubmitRetries; ++attempt) {
    if (attempt > 0) {
      const absl::Duration wait = absl::Seconds(1 << (attempt - 1));
      if (io.sleep) {
        io.sleep(wait);
      } else {
        absl::SleepFor(wait);
      }
    }
    grpc::ClientContext ctx;
    ctx.set_deadline(
        absl::ToChronoTime(absl::Now() + CallDeadline(absl::Seconds(60))));
    status = FromGrpc(study.SubmitSeries(&ctx, req, &resp), "SubmitSeries",
                      args.coordinator);
    if (status.ok() || !IsUnreachable(status)) break;
  }
  if (!status.ok()) return ReportError(status, io);
  *io.out << "series " << resp.name() << ": " << resp.members_size()
          << (resp.members_size() == 1 ? " run" : " runs") << "\n";
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::SeriesMember& m : resp.members()) {
    rows.push_back({absl::StrCat(m.run_id()), absl::StrCat(m.seed())});
  }
  *io.out << FormatTable({"RUN", "SEED"}, rows, {0, 1}) << std::flush;
  return kExitOk;
}

int ExtendCommand(const ParsedArgs& args,
                  skerry::v1::StudyService::StubInterface& study, Io& io) {
  absl::StatusOr<uint64_t> run_id = ParseRunId(args.positionals[0]);
  if (!run_id.ok()) return UsageFailure(run_id.status(), "extend", io);
  skerry::v1::ExtendRunRequest req;
  req.set_run_id(*run_id);
  auto bad = [&](const char* flag, const std::string& text) {
    return UsageFailure(
        absl::InvalidArgumentError(absl::StrCat(
            "--", flag, ": '", text, "' is not a ",
            std::string(flag) == "generations"   ? "number from 1 to 1000000"
            : std::string(flag) == "evaluations" ? "whole number from 1"
            : std::string(flag) == "target"      ? "number"
                                                 : "positive number")),
        "extend", io);
  };
  if (args.Has("generations")) {
    uint32_t n = 0;
    if (!absl::SimpleAtoi(args.Get("generations"), &n) || n == 0 ||
        n > 1000000) {
      return bad("generations", args.Get("generations"));
    }
    req.set_max_generations(n);
  }
  if (args.Has("evaluations")) {
    uint64_t n = 0;
    if (!absl::SimpleAtoi(args.Get("evaluations"), &n) || n == 0) {
      return bad("evaluations", args.Get("evaluations"));
    }
    req.set_max_evaluations(n);
  }
  if (args.Has("wall-seconds")) {
    double s = 0;
    if (!absl::SimpleAtod(args.Get("wall-seconds"), &s) || !(s > 0) ||
        !std::isfinite(s)) {
      return bad("wall-seconds", args.Get("wall-seconds"));
    }
    req.set_max_wall_seconds(s);
  }
  if (args.Has("target")) {
    double x = 0;
    if (!absl::SimpleAtod(args.Get("target"), &x) || !std::isfinite(x)) {
      return bad("target", args.Get("target"));
    }
    req.set_target_score(x);
  }
  if (!req.has_max_generations() && !req.has_max_evaluations() &&
      !req.has_max_wall_seconds() && !req.has_target_score()) {
    return UsageFailure(
        absl::InvalidArgumentError("give at least one of --generations, "
                                   "--evaluations, --wall-seconds, --target"),
        "extend", io);
  }
  grpc::ClientContext ctx;
  ctx.set_deadline(
      absl::ToChronoTime(absl::Now() + CallDeadline(absl::Seconds(30))));
  RunSummary resp;
  absl::Status status = FromGrpc(study.ExtendRun(&ctx, req, &resp), "ExtendRun",
                                 args.coordinator);
  if (!status.ok()) return ReportError(status, io);
  *io.out << "run " << resp.id() << " " << RunStateName(resp.state())
          << " again\n";
  return kExitOk;
}

std::vector<RunSummary> SeriesRuns(const std::vector<RunSummary>& runs,
                                   absl::string_view name) {
  std::vector<RunSummary> out;
  for (const RunSummary& r : runs) {
    if (r.series() == name) out.push_back(r);
  }
  return out;
}

std::string FormatGroupedRunList(const std::vector<RunSummary>& runs,
                                 absl::TimeZone zone) {
  std::vector<RunSummary> alone;
  std::map<std::string, std::vector<RunSummary>> series;
  std::vector<std::string> order;  // by first run
  for (const RunSummary& r : runs) {
    if (r.series().empty()) {
      alone.push_back(r);
      continue;
    }
    if (series.count(r.series()) == 0) order.push_back(r.series());
    series[r.series()].push_back(r);
  }
  if (series.empty()) return FormatRunList(runs, zone);
  std::string out;
  if (!alone.empty()) out = FormatRunList(alone, zone);
  for (const std::string& name : order) {
    const std::vector<RunSummary>& members = series[name];
    if (!out.empty()) out += "\n";
    absl::StrAppend(&out, "series ", name, " (", members.size(),
                    members.size() == 1 ? " run" : " runs", ")\n",
                    FormatRunList(members, zone));
  }
  return out;
}

int SeriesCommand(const ParsedArgs& args, RunClient& client, Io& io) {
  const std::string action =
      args.positionals.empty() ? "list" : args.positionals[0];
  static const std::set<std::string> kActions = {"list", "show", "pause",
                                                 "resume", "stop"};
  if (kActions.count(action) == 0) {
    return UsageFailure(absl::InvalidArgumentError(absl::StrCat(
                            "series: unknown action '", action,
                            "' (one of list, show, pause, resume, stop)")),
                        "series", io);
  }
  if (action != "list" && args.positionals.size() < 2) {
    return UsageFailure(absl::InvalidArgumentError(absl::StrCat(
                            "series ", action, ": missing the series NAME")),
                        "series", io);
  }
  absl::StatusOr<std::vector<RunSummary>> runs = client.List();
  if (!runs.ok()) return ReportError(runs.status(), io);
  if (action == "list") {
    std::map<std::string, std::vector<RunSummary>> by_name;
    for (const RunSummary& r : *runs) {
      if (!r.series().empty()) by_name[r.series()].push_back(r);
    }
    if (by_name.empty()) {
      *io.out << "no series\n";
      return kExitOk;
    }
    std::vector<std::vector<std::string>> rows;
    for (const auto& [name, members] : by_name) {
      std::map<std::string, int> states;
      for (const RunSummary& r : members) ++states[RunStateName(r.state())];
      std::string state_text;
      for (const auto& [state, n] : states) {
        absl::StrAppend(&state_text, state_text.empty() ? "" : ", ", n, " ",
                        state);
      }
      rows.push_back(
          {name, members.front().owner(), absl::StrCat(members.size()),
           absl::StrCat(members.front().id(), "-", members.back().id()),
           state_text});
    }
    *io.out << FormatTable({"SERIES", "OWNER", "RUNS", "IDS", "STATES"}, rows,
                           {2});
    return kExitOk;
  }
  const std::string& name = args.positionals[1];
  std::vector<RunSummary> members = SeriesRuns(*runs, name);
  if (members.empty()) {
    *io.err << "skerry: no series named '" << name
            << "' (`skerry series` lists them)\n";
    return kExitFailure;
  }
  if (action == "show") {
    *io.out << "series " << name << " (" << members.size() << " runs)\n"
            << FormatRunList(members, io.zone);
    return kExitOk;
  }
  int changed = 0, left = 0, failed = 0;
  for (const RunSummary& r : members) {
    if (!Applies(action, r.state())) {
      *io.out << "run " << r.id() << " " << RunStateName(r.state())
              << ", left as it is\n";
      ++left;
      continue;
    }
    absl::StatusOr<RunSummary> after = Steer(client, r.id(), action);
    if (!after.ok()) {
      *io.err << "skerry: run " << r.id() << ": "
              << Redact(std::string(after.status().message()), io) << "\n";
      ++failed;
      continue;
    }
    *io.out << "run " << after->id() << " " << RunStateName(after->state())
            << "\n";
    ++changed;
  }
  *io.out << "series " << name << ": " << changed << " "
          << (changed == 1 ? "run " : "runs ") << PastTense(action);
  if (left > 0) *io.out << ", " << left << " left as they were";
  if (failed > 0) *io.out << ", " << failed << " failed";
  *io.out << "\n";
  return failed > 0 ? kExitFailure : kExitOk;
}

}  // namespace skerry::cli
