// The unary lineage commands: descent, common-ancestor, coalescence,
// attribution. Each makes one call with a deadline and prints its answer as
// text, or as JSON with --json.
#include <algorithm>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "cli/format.h"
#include "cli/lineage_internal.h"
#include "server/lineage/dot.h"

namespace skerry::cli::lineage_internal {

using skerry::v1::GenomeRef;
using skerry::v1::LineageNode;

namespace {

double Gain(skerry::v1::Objective objective, const LineageNode& parent,
            const LineageNode& child) {
  return objective == skerry::v1::MAXIMIZE ? child.score() - parent.score()
                                           : parent.score() - child.score();
}

std::string ObjectiveName(skerry::v1::Objective o) {
  return o == skerry::v1::MAXIMIZE ? "maximize" : "minimize";
}

}  // namespace

int DescentCommand(const Call& call, const GenomeRef& ref) {
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::LineOfDescentRequest request;
  *request.mutable_genome() = ref;
  skerry::v1::LineOfDescentResponse line;
  absl::Status s = call.Check(call.stub.GetLineOfDescent(&ctx, request, &line),
                              "GetLineOfDescent");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(line, call.io);
  const auto& steps = line.steps();
  std::vector<std::vector<std::string>> rows;
  for (int i = 0; i < steps.size(); ++i) {
    const LineageNode& n = steps[i];
    std::string gain = "-";
    if (i + 1 < steps.size() && n.state() == skerry::v1::EVALUATED &&
        steps[i + 1].state() == skerry::v1::EVALUATED) {
      gain = FormatScore(Gain(line.objective(), steps[i + 1], n));
    }
    rows.push_back({absl::StrCat(n.key().generation()), Key(n),
                    absl::StrCat("#", n.id()), lineage::OriginLabel(n.origin()),
                    ScoreText(n), gain});
  }
  *call.io.out << "line of descent of " << Name(steps[0]) << ": "
               << steps.size() - 1 << " steps back to "
               << Name(steps[steps.size() - 1]) << " ("
               << lineage::OriginLabel(steps[steps.size() - 1].origin())
               << ")\nrule: " << line.rule()
               << "\nobjective: " << ObjectiveName(line.objective())
               << "; gain: the step's improvement over the parent below it\n"
               << FormatTable(
                      {"gen", "genome", "id", "origin", "score", "gain"}, rows,
                      {0, 4, 5});
  return kExitOk;
}

int CommonAncestorCommand(const Call& call, const GenomeRef& a,
                          const GenomeRef& b) {
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::CommonAncestorRequest request;
  *request.mutable_a() = a;
  *request.mutable_b() = b;
  skerry::v1::CommonAncestorResponse out;
  absl::Status s = call.Check(call.stub.GetCommonAncestor(&ctx, request, &out),
                              "GetCommonAncestor");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(out, call.io);
  *call.io.out << "a: " << Name(out.a()) << "  score " << ScoreText(out.a())
               << "\nb: " << Name(out.b()) << "  score " << ScoreText(out.b())
               << "\n";
  if (!out.found()) {
    *call.io.out << "no common ancestor: the lineages never meet (read "
                 << FormatCount(out.visited()) << " genomes)\n";
    return kExitOk;
  }
  const LineageNode& first = out.ancestors(0);
  *call.io.out << "most recent common ancestor"
               << (out.ancestors_size() > 1 ? "s" : "") << " in generation "
               << first.key().generation() << " (" << out.depth_a() << " and "
               << out.depth_b() << " generations back; read "
               << FormatCount(out.visited()) << " genomes):\n"
               << NodeHeader();
  for (const LineageNode& n : out.ancestors()) *call.io.out << NodeRow(n);
  return kExitOk;
}

int CoalescenceCommand(const Call& call, uint32_t depth) {
  skerry::v1::CoalescenceRequest request;
  request.set_max_depth(depth);
  const std::string& target = call.args.positionals[0];
  const size_t slashes = std::count(target.begin(), target.end(), '/');
  if (slashes == 2) {
    absl::StatusOr<skerry::v1::PopulationRef> p = ParsePopulationRef(target);
    if (!p.ok()) {
      *call.io.err << "skerry: coalescence: " << p.status().message() << "\n";
      return kExitUsage;
    }
    *request.mutable_population() = *p;
  } else {
    absl::StatusOr<GenomeRef> g = ParseGenomeRef(target);
    if (!g.ok()) {
      *call.io.err << "skerry: coalescence: " << g.status().message() << "\n";
      return kExitUsage;
    }
    *request.mutable_genome() = *g;
  }
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::CoalescenceResponse out;
  absl::Status s = call.Check(call.stub.GetCoalescence(&ctx, request, &out),
                              "GetCoalescence");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(out, call.io);
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::CoalescenceLevel& l : out.levels()) {
    rows.push_back({absl::StrCat(l.generation()),
                    absl::StrCat(out.generation() - l.generation()),
                    FormatCount(l.ancestors()), absl::StrCat(l.islands())});
  }
  *call.io.out << "distinct ancestors of " << target << " (run " << out.run_id()
               << ", generation " << out.generation() << ") per generation:\n"
               << FormatTable({"gen", "back", "ancestors", "islands"}, rows,
                              {0, 1, 2, 3});
  return kExitOk;
}

namespace {

void PrintAttribution(const skerry::v1::AttributionResponse& out, Io& io) {
  *io.out << "attribution of " << Name(out.genome()) << " ("
          << ObjectiveName(out.objective()) << "): line of descent of "
          << out.steps() << " steps from founder " << Name(out.founder())
          << " (" << lineage::OriginLabel(out.founder().origin()) << "), score "
          << ScoreText(out.founder()) << " -> " << ScoreText(out.genome())
          << ", total gain " << FormatScore(out.total_gain())
          << "\n\nby origin:\n";
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::OriginShare& o : out.origins()) {
    rows.push_back({lineage::OriginLabel(o.origin()), absl::StrCat(o.steps()),
                    absl::StrCat(o.improvements()), FormatScore(o.gain()),
                    FormatScore(o.loss()), FormatScore(o.gain() - o.loss())});
  }
  *io.out << FormatTable(
      {"origin", "steps", "improvements", "gain", "loss", "net"}, rows,
      {1, 2, 3, 4, 5});
  rows.clear();
  for (const skerry::v1::DescentStep& st : out.improvements()) {
    rows.push_back({absl::StrCat(st.child().key().generation()),
                    Key(st.child()), lineage::OriginLabel(st.child().origin()),
                    ScoreText(st.parent()), ScoreText(st.child()),
                    FormatScore(st.gain())});
  }
  *io.out << "\nimprovements (oldest first):\n"
          << FormatTable({"gen", "genome", "origin", "from", "to", "gain"},
                         rows, {0, 3, 4, 5});
  rows.clear();
  for (const skerry::v1::IslandCrossing& c : out.crossings()) {
    rows.push_back({absl::StrCat(c.generation()),
                    absl::StrCat(c.from_island(), " -> ", c.to_island()),
                    lineage::OriginLabel(c.origin()),
                    absl::StrCat("#", c.child_id())});
  }
  *io.out << "\nisland crossings: " << out.crossings_size() << "\n";
  if (!rows.empty()) {
    *io.out << FormatTable({"gen", "islands", "origin", "genome"}, rows, {0});
  }
  *io.out << std::flush;
}

}  // namespace

int AttributionCommand(const Call& call, const GenomeRef& ref) {
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::AttributionRequest request;
  *request.mutable_genome() = ref;
  skerry::v1::AttributionResponse out;
  absl::Status s = call.Check(call.stub.GetAttribution(&ctx, request, &out),
                              "GetAttribution");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(out, call.io);
  PrintAttribution(out, call.io);
  return kExitOk;
}

}  // namespace skerry::cli::lineage_internal
