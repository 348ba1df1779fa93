// The DOT export (server/lineage/dot.h): node colours by island, edge labels
// by origin, the line of descent in bold, edges only between genomes shown.
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/lineage/dot.h"

namespace skerry::lineage {
namespace {

using skerry::v1::LineageNode;
using ::testing::HasSubstr;
using ::testing::Not;

LineageNode Node(uint64_t id, uint32_t island, uint32_t gen,
                 skerry::v1::Origin origin, uint64_t a, uint64_t b,
                 double score) {
  LineageNode n;
  n.set_id(id);
  n.mutable_key()->set_run_id(1);
  n.mutable_key()->set_island(island);
  n.mutable_key()->set_generation(gen);
  n.mutable_key()->set_slot(0);
  n.set_origin(origin);
  n.set_parent_a(a);
  n.set_parent_b(b);
  n.set_score(score);
  n.set_state(skerry::v1::EVALUATED);
  return n;
}

TEST(LineageDotTest, DrawsIslandsOriginsAndTheLineInBold) {
  const LineageNode child = Node(3, 0, 1, skerry::v1::CROSSOVER, 1, 2, 0.5);
  const std::vector<LineageNode> ancestors = {
      Node(1, 0, 0, skerry::v1::SEEDED, 0, 0, 2.0),
      Node(2, 1, 0, skerry::v1::SEEDED, 0, 0, 1.0)};
  const std::vector<LineageNode> line = {child, ancestors[1]};
  const std::string dot = AncestryDot(child, ancestors, line, "t \"q\"");
  EXPECT_THAT(dot, HasSubstr("digraph ancestry {"));
  EXPECT_THAT(dot, HasSubstr("label=\"t \\\"q\\\"\""));  // quotes escaped
  EXPECT_THAT(dot,
              HasSubstr("g3 [label=\"1/0/1/0\\n#3  0.5\", fillcolor=\"" +
                        std::string(kIslandPalette[0]) + "\", penwidth=3];"));
  EXPECT_THAT(dot,
              HasSubstr("g2 [label=\"1/1/0/0\\n#2  1\", fillcolor=\"" +
                        std::string(kIslandPalette[1]) + "\", penwidth=3];"));
  EXPECT_THAT(dot, HasSubstr("g1 [label=\"1/0/0/0\\n#1  2\", fillcolor=\"" +
                             std::string(kIslandPalette[0]) + "\"];"));
  EXPECT_THAT(dot, HasSubstr("g1 -> g3 [label=\"crossover\"];"));
  EXPECT_THAT(dot, HasSubstr("g2 -> g3 [label=\"crossover\", style=dashed, "
                             "penwidth=3, color=\"#1d3557\"];"));
  EXPECT_EQ(dot.substr(dot.size() - 2), "}\n");
}

TEST(LineageDotTest, LeavesOutEdgesToGenomesNotShown) {
  const LineageNode child = Node(3, 0, 1, skerry::v1::MUTATION, 1, 0, 0.5);
  const std::string dot = AncestryDot(child, {}, {child}, "x");
  EXPECT_THAT(dot, Not(HasSubstr("->")));
}

TEST(LineageDotTest, OriginLabelsNameEveryOrigin) {
  EXPECT_EQ(OriginLabel(skerry::v1::MIGRANT), "migrant");
  EXPECT_EQ(OriginLabel(skerry::v1::ELITE), "elite");
  EXPECT_EQ(OriginLabel(static_cast<skerry::v1::Origin>(42)), "origin 42");
}

}  // namespace
}  // namespace skerry::lineage
