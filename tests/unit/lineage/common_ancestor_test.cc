// LineageReader::CommonAncestor on the hand-built graph of lineage_graph.h,
// with rows added per test for ties, links that skip generations and broken
// links. Answers are worked out by hand beside each check, and every pair of
// genomes is held to a brute-force reading of the definition in lineage.proto
// (the common ancestors of the newest generation that has any; a genome is
// its own ancestor).
#include <map>
#include <optional>
#include <set>
#include <string>
#include <utility>
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
using skerry::testing::Row;
using skerry::testing::TempDir;
using ::testing::ElementsAre;
using ::testing::ElementsAreArray;
using ::testing::HasSubstr;
namespace t = skerry::testing;

// The definition, read literally: every ancestor of each genome (itself
// included), and the shared ones of the newest generation.
struct Brute {
  bool found = false;
  uint32_t generation = 0;
  std::vector<int64_t> ids;  // ascending
};

Brute BruteCommonAncestors(const std::vector<Row>& rows, int64_t a, int64_t b) {
  std::map<int64_t, Row> by_id;
  for (const Row& r : rows) by_id[r.id] = r;
  auto ancestry = [&](int64_t id) {
    std::set<int64_t> seen = {id};
    std::vector<int64_t> todo = {id};
    while (!todo.empty()) {
      const Row& r = by_id.at(todo.back());
      todo.pop_back();
      for (int64_t p : {r.parent_a, r.parent_b}) {
        if (p != 0 && seen.insert(p).second) todo.push_back(p);
      }
    }
    return seen;
  };
  const std::set<int64_t> sa = ancestry(a), sb = ancestry(b);
  Brute out;
  for (int64_t id : sa) {  // ascending
    if (sb.count(id) == 0) continue;
    const uint32_t g = by_id.at(id).generation;
    if (out.found && g < out.generation) continue;
    if (!out.found || g > out.generation) out.ids.clear();
    out.found = true;
    out.generation = g;
    out.ids.push_back(id);
  }
  return out;
}

class CommonAncestorTest : public ::testing::Test {
 protected:
  void SetUp() override {
    t::WriteGraph(path_);
    rows_ = t::GraphRows();
    Reopen();
  }
  void Reopen(ReaderOptions options = {}) {
    reader_.reset();
    auto r = LineageReader::Open(path_, options);
    ASSERT_TRUE(r.ok()) << r.status();
    reader_ = std::move(*r);
  }
  void Add(const std::vector<Row>& rows) {
    t::InsertRows(path_, rows);
    rows_.insert(rows_.end(), rows.begin(), rows.end());
  }
  absl::StatusOr<skerry::v1::CommonAncestorResponse> Common(int64_t a,
                                                            int64_t b) {
    return reader_->CommonAncestor(RefTo(a), RefTo(b));
  }
  // The answer for (a, b) and for (b, a) agree with the definition.
  void ExpectDefinition(int64_t a, int64_t b) {
    SCOPED_TRACE(::testing::Message() << "#" << a << " and #" << b);
    const Brute want = BruteCommonAncestors(rows_, a, b);
    auto ab = Common(a, b);
    auto ba = Common(b, a);
    ASSERT_TRUE(ab.ok()) << ab.status();
    ASSERT_TRUE(ba.ok()) << ba.status();
    EXPECT_EQ(ab->found(), want.found);
    EXPECT_THAT(IdsOf(ab->ancestors()), ElementsAreArray(want.ids));
    EXPECT_THAT(IdsOf(ba->ancestors()), ElementsAreArray(want.ids));
    if (want.found) {
      EXPECT_EQ(ab->depth_a(), ab->a().key().generation() - want.generation);
      EXPECT_EQ(ab->depth_b(), ab->b().key().generation() - want.generation);
      EXPECT_EQ(ba->depth_a(), ab->depth_b());
      EXPECT_EQ(ba->depth_b(), ab->depth_a());
    }
  }

  TempDir dir_;
  const std::string path_ = dir_.File("graph.db");
  std::vector<Row> rows_;
  std::unique_ptr<LineageReader> reader_;
};

TEST_F(CommonAncestorTest, IsTheNewestGenerationWhereLinesMeet) {
  struct Case {
    int64_t a, b;
    std::vector<int64_t> want;
    uint32_t depth_a, depth_b;
  };
  for (const Case& c : std::vector<Case>{
           {t::M, t::N, {t::H}, 1, 1},
           {t::M, t::O, {t::G}, 1, 1},  // diamond: M <- H, G and O <- I, G
           {t::M, t::P, {t::B}, 2, 2},  // P reaches B through the migrant K
           {t::M, t::H, {t::H}, 1, 0},  // one is the other's ancestor
           {t::M, t::M, {t::M}, 0, 0},
           {t::W, t::P, {t::B}, 3, 2},
           {t::M, t::S, {t::G}, 1, 1},
           {t::U, t::S, {t::K}, 1, 1},  // the migrant itself
           {t::W, t::O, {t::O}, 1, 0},  // an elite and the genome it kept
           {t::W, t::M, {t::G}, 2, 1},  // across an elite and a failed parent
           {t::N, t::P, {t::B}, 2, 2},  // no common generation 1, then B
           {t::K, t::G, {t::B}, 1, 1},  // a migrant and an elite of B
           {t::W, t::B, {t::B}, 3, 0},  // back to generation 0
       }) {
    SCOPED_TRACE(::testing::Message() << c.a << " and " << c.b);
    auto r = Common(c.a, c.b);
    ASSERT_TRUE(r.ok()) << r.status();
    EXPECT_TRUE(r->found());
    EXPECT_EQ(IdsOf(r->ancestors()), c.want);
    EXPECT_EQ(r->depth_a(), c.depth_a);
    EXPECT_EQ(r->depth_b(), c.depth_b);
    EXPECT_EQ(r->a().id(), static_cast<uint64_t>(c.a));
    EXPECT_EQ(r->b().id(), static_cast<uint64_t>(c.b));
  }
}

TEST_F(CommonAncestorTest, SeparateLinesAreNotFound) {
  // Q descends from the immigrant L alone; E had no children; L has no
  // parent.
  const std::vector<std::pair<int64_t, int64_t>> pairs = {
      {t::M, t::Q}, {t::E, t::M}, {t::L, t::P}};
  for (const auto& [a, b] : pairs) {
    SCOPED_TRACE(::testing::Message() << a << " and " << b);
    auto r = Common(a, b);
    ASSERT_TRUE(r.ok()) << r.status();
    EXPECT_FALSE(r->found());
    EXPECT_EQ(r->ancestors_size(), 0);
    EXPECT_EQ(r->depth_a(), 0u);
    EXPECT_EQ(r->depth_b(), 0u);
  }
  // But the immigrant is the common ancestor of its own line.
  auto q = Common(t::Q, t::L);
  ASSERT_TRUE(q.ok()) << q.status();
  EXPECT_THAT(IdsOf(q->ancestors()), ElementsAre(t::L));
}

TEST_F(CommonAncestorTest, TiesInTheNewestGenerationAreAllListedById) {
  // X = crossover(G, H) beside M = crossover(H, G): both parents are shared.
  Add({{40, 0, 2, 8, skerry::v1::CROSSOVER, t::G, t::H, 5.5}});
  auto r = Common(t::M, 40);
  ASSERT_TRUE(r.ok()) << r.status();
  EXPECT_THAT(IdsOf(r->ancestors()), ElementsAre(t::G, t::H));
  EXPECT_EQ(r->depth_a(), 1u);
}

TEST_F(CommonAncestorTest, AgreesWithTheDefinitionForEveryPair) {
  // Plus a tie across islands (Y <- W and D, skipping three generations).
  Add({{41, 0, 4, 0, skerry::v1::CROSSOVER, t::W, t::D, 3.5}});
  std::vector<int64_t> ids;
  for (const Row& r : rows_) ids.push_back(r.id);
  for (size_t i = 0; i < ids.size(); ++i) {
    for (size_t j = i; j < ids.size(); ++j) ExpectDefinition(ids[i], ids[j]);
  }
}

TEST_F(CommonAncestorTest, ALinkThatSkipsGenerationsIsFollowedAndReadOnce) {
  // Y (generation 4) <- W (3) and D (0). Y's generations: 3 W; 2 O; 1 I, G;
  // 0 C, B, D. P's: 1 K, J; 0 B, D. Newest shared: B and D in generation 0.
  Add({{41, 0, 4, 0, skerry::v1::CROSSOVER, t::W, t::D, 3.5}});
  auto r = Common(41, t::P);
  ASSERT_TRUE(r.ok()) << r.status();
  EXPECT_THAT(IdsOf(r->ancestors()), ElementsAre(t::B, t::D));
  EXPECT_EQ(r->depth_a(), 4u);
  EXPECT_EQ(r->depth_b(), 2u);
  // Y, W, D, O, P, I, G, K, J, B, C: D is reached twice (from Y while
  // generation 4 is expanded, from J while generation 1 is) and read once.
  EXPECT_EQ(r->visited(), 11u);
}

TEST_F(CommonAncestorTest, VisitedCountsTheGenomesRead) {
  // M and N, then their parents H and G; H is shared.
  auto r = Common(t::M, t::N);
  ASSERT_TRUE(r.ok()) << r.status();
  EXPECT_EQ(r->visited(), 4u);
  // The same genome twice is its own answer, read at once.
  auto same = Common(t::W, t::W);
  ASSERT_TRUE(same.ok()) << same.status();
  EXPECT_EQ(same->visited(), 0u);
}

TEST_F(CommonAncestorTest, GivesUpPastTheReadLimitSayingSo) {
  ReaderOptions options;
  options.max_visited = 5;
  Reopen(options);
  auto r = Common(t::W, t::P);  // needs 11 genomes
  EXPECT_TRUE(absl::IsResourceExhausted(r.status())) << r.status();
  EXPECT_THAT(t::Message(r.status()), HasSubstr("limit is 5"));
  auto near = Common(t::M, t::N);  // needs 4
  EXPECT_TRUE(near.ok()) << near.status();
}

TEST_F(CommonAncestorTest, ADanglingParentIsDataLossNamingBoth) {
  Add({{42, 0, 4, 1, skerry::v1::MUTATION, 99, 0, 1.0}});
  auto r = Common(42, t::M);
  EXPECT_TRUE(absl::IsDataLoss(r.status())) << r.status();
  EXPECT_THAT(t::Message(r.status()), HasSubstr("genome #42: parent #99"));
}

TEST_F(CommonAncestorTest, AParentThatIsNotOlderIsDataLoss) {
  // Generation 1 with a parent in generation 3.
  Add({{43, 1, 1, 3, skerry::v1::MUTATION, t::W, 0, 1.0}});
  auto r = Common(43, t::J);
  EXPECT_TRUE(absl::IsDataLoss(r.status())) << r.status();
  EXPECT_THAT(t::Message(r.status()),
              HasSubstr("parent #31 is not from an earlier generation"));
}

TEST_F(CommonAncestorTest, UnknownGenomesAreNotFound) {
  EXPECT_TRUE(absl::IsNotFound(Common(t::M, 999).status()));
  EXPECT_TRUE(absl::IsNotFound(Common(999, t::M).status()));
}

}  // namespace
}  // namespace skerry::lineage
