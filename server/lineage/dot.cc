#include "server/lineage/dot.h"

#include <cstdio>
#include <unordered_map>
#include <unordered_set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_replace.h"

namespace skerry::lineage {
namespace {

using skerry::v1::LineageNode;

constexpr size_t kPaletteSize =
    sizeof(kIslandPalette) / sizeof(kIslandPalette[0]);

std::string Quote(absl::string_view s) {
  return absl::StrCat(
      "\"",
      absl::StrReplaceAll(s, {{"\\", "\\\\"}, {"\"", "\\\""}, {"\n", "\\n"}}),
      "\"");
}

std::string Score(const LineageNode& n) {
  if (n.state() == skerry::v1::FAILED) return "failed";
  if (n.state() != skerry::v1::EVALUATED) return "pending";
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.6g", n.score());
  return buf;
}

std::string NodeLine(const LineageNode& n, bool on_line) {
  const auto& k = n.key();
  std::string label =
      absl::StrCat(k.run_id(), "/", k.island(), "/", k.generation(), "/",
                   k.slot(), "\n#", n.id(), "  ", Score(n));
  return absl::StrCat("  g", n.id(), " [label=", Quote(label), ", fillcolor=",
                      Quote(kIslandPalette[k.island() % kPaletteSize]),
                      on_line ? ", penwidth=3" : "", "];\n");
}

}  // namespace

std::string OriginLabel(skerry::v1::Origin origin) {
  switch (origin) {
    case skerry::v1::SEEDED:
      return "seeded";
    case skerry::v1::ELITE:
      return "elite";
    case skerry::v1::CROSSOVER:
      return "crossover";
    case skerry::v1::MUTATION:
      return "mutation";
    case skerry::v1::IMMIGRANT:
      return "immigrant";
    case skerry::v1::MIGRANT:
      return "migrant";
    case skerry::v1::SAMPLED:
      return "sampled";
    case skerry::v1::DISTRIBUTION:
      return "distribution";
    default:
      return absl::StrCat("origin ", static_cast<int>(origin));
  }
}

std::string AncestryDot(const LineageNode& genome,
                        const std::vector<LineageNode>& ancestors,
                        const std::vector<LineageNode>& line,
                        absl::string_view title) {
  std::unordered_set<uint64_t> present = {genome.id()};
  for (const LineageNode& n : ancestors) present.insert(n.id());
  // Line edges, child id -> the parent the line goes through.
  std::unordered_map<uint64_t, uint64_t> line_parent;
  std::unordered_set<uint64_t> on_line;
  for (size_t i = 0; i < line.size(); ++i) {
    on_line.insert(line[i].id());
    if (i + 1 < line.size()) line_parent[line[i].id()] = line[i + 1].id();
  }
  std::string out = absl::StrCat(
      "digraph ancestry {\n  label=", Quote(title),
      ";\n  labelloc=t;\n  rankdir=BT;\n"
      "  node [shape=box, style=\"rounded,filled\", fontname=\"Helvetica\", "
      "fontsize=10];\n  edge [fontname=\"Helvetica\", fontsize=9, "
      "color=\"#7a7a7a\"];\n");
  absl::StrAppend(&out, NodeLine(genome, true));
  for (const LineageNode& n : ancestors) {
    absl::StrAppend(&out, NodeLine(n, on_line.count(n.id()) > 0));
  }
  auto edges = [&](const LineageNode& child) {
    const std::string label = OriginLabel(child.origin());
    for (int which = 0; which < 2; ++which) {
      const uint64_t parent = which == 0 ? child.parent_a() : child.parent_b();
      if (parent == 0 || present.count(parent) == 0) continue;
      auto it = line_parent.find(child.id());
      const bool bold = it != line_parent.end() && it->second == parent;
      absl::StrAppend(&out, "  g", parent, " -> g", child.id(),
                      " [label=", Quote(label),
                      which == 1 ? ", style=dashed" : "",
                      bold ? ", penwidth=3, color=\"#1d3557\"" : "", "];\n");
    }
  };
  edges(genome);
  for (const LineageNode& n : ancestors) edges(n);
  absl::StrAppend(&out, "}\n");
  return out;
}

}  // namespace skerry::lineage
