// The ancestry walk (server/lineage/ancestry_walk.h) through the queries built
// on it, ancestors and coalescence, on the hand-built graph of
// lineage_graph.h with rows added for what Skerry itself never writes: parent
// links that skip generations, and broken links.
#include "server/lineage/ancestry_walk.h"

#include <algorithm>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/lineage/lineage_reader.h"
#include "tests/support/process.h"
#include "tests/unit/lineage/lineage_graph.h"
#include "tests/unit/server/sqlite_test_util.h"

namespace skerry::lineage {
namespace {

using skerry::testing::IdsOf;
using skerry::testing::RefTo;
using skerry::testing::TempDir;
using skerry::v1::LineageNode;
using ::testing::ElementsAre;
using ::testing::HasSubstr;
namespace t = skerry::testing;

class AncestryWalkTest : public ::testing::Test {
 protected:
  void SetUp() override {
    t::WriteGraph(path_);
    // Y (generation 4) <- W (3) and D (0): D is three generations back.
    t::InsertRows(path_,
                  {{41, 0, 4, 0, skerry::v1::CROSSOVER, t::W, t::D, 3.5}});
    auto r = LineageReader::Open(path_);
    ASSERT_TRUE(r.ok()) << r.status();
    reader_ = std::move(*r);
  }
  absl::StatusOr<std::vector<LineageNode>> Ancestors(int64_t id,
                                                     uint32_t depth = 0) {
    skerry::v1::AncestorsRequest req;
    *req.mutable_genome() = RefTo(id);
    req.set_max_depth(depth);
    std::vector<LineageNode> out;
    absl::Status s = reader_->Ancestors(
        req, [](const LineageReader::StreamHead&) { return true; },
        [&](skerry::v1::LineageChunk& c) {
          out.insert(out.end(), c.nodes().begin(), c.nodes().end());
          return true;
        });
    if (!s.ok()) return s;
    return out;
  }

  TempDir dir_;
  const std::string path_ = dir_.File("graph.db");
  std::unique_ptr<LineageReader> reader_;
};

TEST_F(AncestryWalkTest, AncestorsComeNewestGenerationFirstThenById) {
  // W <- O <- I, G; I <- C; G <- B.
  auto w = Ancestors(t::W);
  ASSERT_TRUE(w.ok()) << w.status();
  EXPECT_THAT(IdsOf(*w), ElementsAre(t::O, t::G, t::I, t::B, t::C));
}

TEST_F(AncestryWalkTest, ALinkThatSkipsGenerationsIsListedInItsGeneration) {
  // Y's ancestors: 3 W; 2 O; 1 G, I; 0 B, C, D, with D reached from Y
  // directly and listed once, among generation 0.
  auto y = Ancestors(41);
  ASSERT_TRUE(y.ok()) << y.status();
  EXPECT_THAT(IdsOf(*y), ElementsAre(t::W, t::O, t::G, t::I, t::B, t::C, t::D));
  // Two generations back: D is read, but older than the bound.
  auto near = Ancestors(41, 2);
  ASSERT_TRUE(near.ok()) << near.status();
  EXPECT_THAT(IdsOf(*near), ElementsAre(t::W, t::O));
}

TEST_F(AncestryWalkTest, CoalescenceCountsASkippingLinkInItsGeneration) {
  skerry::v1::CoalescenceRequest req;
  *req.mutable_genome() = RefTo(41);
  auto c = reader_->Coalescence(req);
  ASSERT_TRUE(c.ok()) << c.status();
  std::vector<uint64_t> counts;
  for (const auto& level : c->levels()) counts.push_back(level.ancestors());
  EXPECT_THAT(counts, ElementsAre(1, 1, 1, 2, 3));  // Y; W; O; G I; B C D
  EXPECT_EQ(c->levels(4).islands(), 2u);            // D is on island 1
}

TEST_F(AncestryWalkTest, ADanglingParentIsDataLossNamingTheChild) {
  t::InsertRows(path_, {{42, 0, 4, 1, skerry::v1::MUTATION, 99, 0, 1.0}});
  auto a = Ancestors(42);
  EXPECT_TRUE(absl::IsDataLoss(a.status())) << a.status();
  EXPECT_THAT(t::Message(a.status()), HasSubstr("genome #42: parent #99"));
}

TEST(SortUniqueTest, SortsAndDropsRepeatsWithOrWithoutTheBitmap) {
  std::vector<uint64_t> scratch;
  // Dense (the bitmap): 40 ids over a range of 100.
  std::vector<uint64_t> dense;
  for (uint64_t i = 0; i < 40; ++i) dense.push_back(1000 + (i * 37) % 100);
  dense.push_back(1000);
  std::vector<uint64_t> want = dense;
  std::sort(want.begin(), want.end());
  want.erase(std::unique(want.begin(), want.end()), want.end());
  internal::SortUnique(dense, scratch);
  EXPECT_EQ(dense, want);
  // Sparse (sorting): far apart.
  std::vector<uint64_t> sparse = {9'000'000'000, 5, 70'000, 5, 9'000'000'000};
  for (uint64_t i = 0; i < 40; ++i) sparse.push_back(i * 1'000'003);
  want = sparse;
  std::sort(want.begin(), want.end());
  want.erase(std::unique(want.begin(), want.end()), want.end());
  internal::SortUnique(sparse, scratch);
  EXPECT_EQ(sparse, want);
}

}  // namespace
}  // namespace skerry::lineage
