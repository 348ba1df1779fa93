// The lineage commands' table, their arguments (GENOME, TARGET, --depth) and
// the dispatch to lineage_queries.cc and lineage_stream.cc.
#include "cli/lineage.h"

#include <unistd.h>

#include <algorithm>
#include <iostream>
#include <utility>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "cli/format.h"
#include "cli/handlers.h"
#include "cli/lineage_internal.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"

namespace skerry::cli {
namespace {

using lineage_internal::AncestorsCommand;
using lineage_internal::AttributionCommand;
using lineage_internal::Call;
using lineage_internal::CoalescenceCommand;
using lineage_internal::CommonAncestorCommand;
using lineage_internal::DescendantsCommand;
using lineage_internal::DescentCommand;
using lineage_internal::Stub;
using skerry::v1::GenomeRef;

constexpr char kGenomeHelp[] =
    " GENOME is ID, #ID, RUN/ISLAND/GENERATION/SLOT (e.g. 3/0/12/5) or "
    "RUN/best (the run's champion).";

const FlagSpec kJson = {"json", nullptr,
                        "print protobuf's JSON mapping of the answer"};
const FlagSpec kDepth = {"depth", "N", "at most N generations away"};
const FlagSpec kYes = {"yes", nullptr,
                       "print answers of any size without asking"};

}  // namespace

std::vector<CommandSpec> LineageCommandSpecs() {
  static const std::string ancestors = absl::StrCat(
      "Prints the ancestors of GENOME, newest generation first: every genome "
      "it descends from, to --depth generations back (default: all the way). "
      "A late genome's full ancestry covers most of the run: past ",
      FormatCount(kConfirmRows),
      " genomes you are asked first (--yes to skip). --json prints the "
      "streamed messages, one per line. --dot prints a Graphviz graph (depth ",
      kDefaultDotDepth,
      " unless --depth says otherwise): nodes coloured by island, edges "
      "labelled by origin, the line of descent in bold.",
      kGenomeHelp);
  static const std::string descent = absl::StrCat(
      "Prints the line of descent of GENOME: the single chain back to its "
      "founder (generation 0, an immigrant, or the first centre of a CMA-ES "
      "restart) through the fitter parent "
      "(a scored parent beats a failed one; ties and single parents go to "
      "parent a), with each step's score and gain.",
      kGenomeHelp);
  static const std::string descendants = absl::StrCat(
      "Prints the descendants of GENOME, oldest generation first, to --depth "
      "generations forward (default: all). Large answers are confirmed as "
      "for ancestors.",
      kGenomeHelp);
  static const std::string common = absl::StrCat(
      "Prints the most recent common ancestors of two genomes: the common "
      "ancestors of the newest generation that has any (a genome counts as "
      "its own ancestor).",
      kGenomeHelp);
  static const std::string coalescence = absl::StrCat(
      "Prints, per generation back, how many distinct ancestors TARGET has "
      "and on how many islands: how fast its ancestry coalesces. TARGET is a "
      "GENOME, or a population RUN/ISLAND/GENERATION or RUN/*/GENERATION "
      "(every island).",
      kGenomeHelp);
  static const std::string attribution = absl::StrCat(
      "Along the line of descent of GENOME, which origin (crossover, "
      "mutation, migrant, immigrant, elite; for the evolution strategies, "
      "distribution and sampled) made each improvement of the "
      "score and by how much (each step against the parent the line goes "
      "through), and where the line crossed between islands.",
      kGenomeHelp);
  return {
      {"ancestors",
       {"GENOME"},
       {kDepth,
        kJson,
        {"dot", nullptr, "print a Graphviz DOT graph of the ancestry"},
        kYes},
       "print a genome's ancestors (stream; asks before huge answers)",
       ancestors.c_str(),
       LineageHandler},
      {"descent",
       {"GENOME"},
       {kJson},
       "print a genome's line of descent back to its founder",
       descent.c_str(),
       LineageHandler},
      {"descendants",
       {"GENOME"},
       {kDepth, kJson, kYes},
       "print a genome's descendants",
       descendants.c_str(),
       LineageHandler},
      {"common-ancestor",
       {"GENOME", "GENOME"},
       {kJson},
       "print the most recent common ancestors of two genomes",
       common.c_str(),
       LineageHandler},
      {"coalescence",
       {"TARGET"},
       {kDepth, kJson},
       "count distinct ancestors per generation of a genome or population",
       coalescence.c_str(),
       LineageHandler},
      {"attribution",
       {"GENOME"},
       {kJson},
       "which origins and islands made a genome's improvements",
       attribution.c_str(),
       LineageHandler},
  };
}

namespace {

absl::StatusOr<std::vector<uint64_t>> Numbers(absl::string_view text,
                                              absl::string_view what) {
  std::vector<uint64_t> out;
  for (absl::string_view part : absl::StrSplit(text, '/')) {
    uint64_t v = 0;
    bool digits = !part.empty() &&
                  std::all_of(part.begin(), part.end(), absl::ascii_isdigit);
    if (!digits || !absl::SimpleAtoi(part, &v) || v > UINT32_MAX) {
      return absl::InvalidArgumentError(absl::StrCat(
          "'", text, "' is not ", what, " ('", part, "' is not a number)"));
    }
    out.push_back(v);
  }
  return out;
}

}  // namespace

absl::StatusOr<GenomeRef> ParseGenomeRef(absl::string_view text) {
  constexpr char kWhat[] =
      "a genome: ID, #ID, RUN/ISLAND/GENERATION/SLOT or RUN/best";
  GenomeRef ref;
  absl::string_view t = text;
  if (absl::ConsumePrefix(&t, "#") || t.find('/') == absl::string_view::npos) {
    uint64_t id = 0;
    bool digits =
        !t.empty() && std::all_of(t.begin(), t.end(), absl::ascii_isdigit);
    if (!digits || !absl::SimpleAtoi(t, &id) || id == 0) {
      return absl::InvalidArgumentError(
          absl::StrCat("'", text, "' is not ", kWhat));
    }
    ref.set_id(id);
    return ref;
  }
  if (absl::EndsWith(t, "/best")) {
    absl::StatusOr<std::vector<uint64_t>> run =
        Numbers(t.substr(0, t.size() - 5), kWhat);
    if (!run.ok() || run->size() != 1 || (*run)[0] == 0) {
      return absl::InvalidArgumentError(
          absl::StrCat("'", text, "' is not ", kWhat));
    }
    ref.set_champion_of_run((*run)[0]);
    return ref;
  }
  absl::StatusOr<std::vector<uint64_t>> parts = Numbers(t, kWhat);
  if (!parts.ok()) return parts.status();
  if (parts->size() != 4 || (*parts)[0] == 0) {
    return absl::InvalidArgumentError(absl::StrCat(
        "'", text, "' is not ", kWhat, " (a key has 4 parts, the run > 0)"));
  }
  ref.mutable_key()->set_run_id((*parts)[0]);
  ref.mutable_key()->set_island(static_cast<uint32_t>((*parts)[1]));
  ref.mutable_key()->set_generation(static_cast<uint32_t>((*parts)[2]));
  ref.mutable_key()->set_slot(static_cast<uint32_t>((*parts)[3]));
  return ref;
}

absl::StatusOr<skerry::v1::PopulationRef> ParsePopulationRef(
    absl::string_view text) {
  constexpr char kWhat[] =
      "a population: RUN/ISLAND/GENERATION or RUN/*/GENERATION";
  std::vector<std::string> parts = absl::StrSplit(text, '/');
  skerry::v1::PopulationRef p;
  if (parts.size() == 3 && parts[1] == "*") {
    parts[1] = "0";
    p.set_all_islands(true);
  }
  absl::StatusOr<std::vector<uint64_t>> n =
      parts.size() == 3 ? Numbers(absl::StrJoin(parts, "/"), kWhat)
                        : absl::StatusOr<std::vector<uint64_t>>(
                              absl::InvalidArgumentError(""));
  if (!n.ok() || (*n)[0] == 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("'", text, "' is not ", kWhat));
  }
  p.set_run_id((*n)[0]);
  p.set_island(static_cast<uint32_t>((*n)[1]));
  p.set_generation(static_cast<uint32_t>((*n)[2]));
  return p;
}

Confirm TerminalConfirm() {
  return [](const std::string& question) -> std::optional<bool> {
    if (isatty(STDIN_FILENO) == 0) return std::nullopt;
    std::cerr << question << " [y/N] " << std::flush;
    std::string answer;
    if (!std::getline(std::cin, answer)) return false;
    answer = absl::AsciiStrToLower(absl::StripAsciiWhitespace(answer));
    return answer == "y" || answer == "yes";
  };
}

namespace {

absl::StatusOr<uint32_t> DepthFlag(const ParsedArgs& args) {
  if (!args.Has("depth")) return 0u;
  return ParseBoundedUint("--depth", args.Get("depth"), 1, 100'000'000);
}

int Usage(const ParsedArgs& args, const absl::Status& s, Io& io) {
  *io.err << "skerry: " << args.command << ": " << s.message() << "\n"
          << "run `skerry " << args.command << " --help` for its usage\n";
  return kExitUsage;
}

}  // namespace

int LineageCommand(const ParsedArgs& args, const LineageStubFactory& factory,
                   const Confirm& confirm, Io& io, uint64_t confirm_rows) {
  absl::StatusOr<uint32_t> depth = DepthFlag(args);
  if (!depth.ok()) return Usage(args, depth.status(), io);
  std::vector<GenomeRef> refs;
  if (args.command != "coalescence") {
    for (const std::string& text : args.positionals) {
      absl::StatusOr<GenomeRef> ref = ParseGenomeRef(text);
      if (!ref.ok()) return Usage(args, ref.status(), io);
      refs.push_back(*ref);
    }
  }
  // Each lineage command's query, by name: the positional counts are the
  // command table's (ParseArgs checked them), so refs holds what each needs.
  using Query = int (*)(const Call&, const std::vector<GenomeRef>&, uint32_t);
  static constexpr struct {
    const char* name;
    Query run;
  } kQueries[] = {
      {"ancestors", [](const Call& c, const std::vector<GenomeRef>& r,
                       uint32_t d) { return AncestorsCommand(c, r[0], d); }},
      {"descendants",
       [](const Call& c, const std::vector<GenomeRef>& r, uint32_t d) {
         return DescendantsCommand(c, r[0], d);
       }},
      {"descent", [](const Call& c, const std::vector<GenomeRef>& r,
                     uint32_t) { return DescentCommand(c, r[0]); }},
      {"common-ancestor",
       [](const Call& c, const std::vector<GenomeRef>& r, uint32_t) {
         return CommonAncestorCommand(c, r[0], r[1]);
       }},
      {"coalescence", [](const Call& c, const std::vector<GenomeRef>&,
                         uint32_t d) { return CoalescenceCommand(c, d); }},
      {"attribution", [](const Call& c, const std::vector<GenomeRef>& r,
                         uint32_t) { return AttributionCommand(c, r[0]); }},
  };
  for (const auto& q : kQueries) {
    if (args.command != q.name) continue;
    std::unique_ptr<Stub> stub = factory(args.coordinator);
    Call call{args, *stub, confirm, io, confirm_rows};
    return q.run(call, refs, *depth);
  }
  return Usage(args, absl::InvalidArgumentError("not a lineage command"), io);
}

}  // namespace skerry::cli
