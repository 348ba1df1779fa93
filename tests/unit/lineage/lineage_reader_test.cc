// LineageReader on the hand-built graph of lineage_graph.h, whose answers are
// worked out by hand in the comments beside each check.
#include "server/lineage/lineage_reader.h"

#include <algorithm>
#include <set>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/process.h"
#include "tests/unit/lineage/lineage_graph.h"
#include "tests/unit/server/sqlite_test_util.h"

namespace skerry::lineage {
namespace {

using skerry::testing::TempDir;
using skerry::v1::GenomeRef;
using skerry::v1::LineageNode;
using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::UnorderedElementsAre;
namespace t = skerry::testing;

using skerry::testing::RefTo;
GenomeRef Id(int64_t id) { return RefTo(id); }
using skerry::testing::IdsOf;

class LineageReaderTest : public ::testing::Test {
 protected:
  void Open(skerry::v1::Objective objective = skerry::v1::MINIMIZE) {
    t::WriteGraph(dir_.File("graph.db"), objective);
    auto r = LineageReader::Open(dir_.File("graph.db"));
    ASSERT_TRUE(r.ok()) << r.status();
    reader_ = std::move(*r);
  }
  void SetUp() override { Open(); }

  struct Streamed {
    LineageReader::StreamHead head;
    std::vector<LineageNode> nodes;
    int batches = 0;
  };
  Streamed Ancestors(int64_t id, uint32_t depth = 0, uint32_t batch = 0) {
    skerry::v1::AncestorsRequest req;
    *req.mutable_genome() = Id(id);
    req.set_max_depth(depth);
    req.set_batch_size(batch);
    Streamed out;
    absl::Status s = reader_->Ancestors(
        req,
        [&](const LineageReader::StreamHead& h) {
          out.head = h;
          return true;
        },
        [&](skerry::v1::LineageChunk& b) {
          ++out.batches;
          out.nodes.insert(out.nodes.end(), b.nodes().begin(), b.nodes().end());
          return true;
        });
    EXPECT_TRUE(s.ok()) << s;
    return out;
  }
  Streamed Descendants(int64_t id, uint32_t depth = 0) {
    skerry::v1::DescendantsRequest req;
    *req.mutable_genome() = Id(id);
    req.set_max_depth(depth);
    Streamed out;
    absl::Status s = reader_->Descendants(
        req,
        [&](const LineageReader::StreamHead& h) {
          out.head = h;
          return true;
        },
        [&](skerry::v1::LineageChunk& b) {
          out.nodes.insert(out.nodes.end(), b.nodes().begin(), b.nodes().end());
          return true;
        });
    EXPECT_TRUE(s.ok()) << s;
    return out;
  }
  std::vector<int64_t> Line(int64_t id) {
    auto line = reader_->LineOfDescent(Id(id));
    EXPECT_TRUE(line.ok()) << line.status();
    return line.ok() ? IdsOf(line->steps()) : std::vector<int64_t>();
  }

  TempDir dir_;
  std::unique_ptr<LineageReader> reader_;
};

TEST_F(LineageReaderTest, ResolvesIdKeyAndChampionToTheSameKindOfNode) {
  GenomeRef key;
  key.mutable_key()->set_run_id(1);
  key.mutable_key()->set_island(1);
  key.mutable_key()->set_generation(2);
  key.mutable_key()->set_slot(0);
  auto p = reader_->Resolve(key);
  ASSERT_TRUE(p.ok()) << p.status();
  EXPECT_EQ(p->id(), t::P);
  EXPECT_EQ(p->parent_a(), t::K);
  EXPECT_EQ(p->parent_b(), t::J);
  EXPECT_EQ(p->origin(), skerry::v1::CROSSOVER);
  EXPECT_DOUBLE_EQ(p->score(), 3.0);

  GenomeRef champion;
  champion.set_champion_of_run(1);
  auto w = reader_->Resolve(champion);
  ASSERT_TRUE(w.ok()) << w.status();
  EXPECT_EQ(w->id(), t::W);
  EXPECT_EQ(w->key().generation(), 3u);
}

TEST_F(LineageReaderTest, UnknownReferencesAreNotFoundAndNamed) {
  GenomeRef key;
  key.mutable_key()->set_run_id(1);
  key.mutable_key()->set_generation(9);
  key.mutable_key()->set_slot(9);
  auto r = reader_->Resolve(key);
  EXPECT_TRUE(absl::IsNotFound(r.status()));
  EXPECT_THAT(t::Message(r.status()), HasSubstr("1/0/9/9"));
  EXPECT_TRUE(absl::IsNotFound(reader_->Resolve(Id(999)).status()));
  GenomeRef run7;
  run7.set_champion_of_run(7);
  EXPECT_THAT(t::Message(reader_->Resolve(run7).status()), HasSubstr("run 7"));
  EXPECT_TRUE(absl::IsInvalidArgument(reader_->Resolve(GenomeRef()).status()));
}

TEST_F(LineageReaderTest, AncestorsOfADiamondListEachGenomeOnceNewestFirst) {
  // M <- H, G; H <- A, B; G <- B: B is reached twice and listed once.
  Streamed s = Ancestors(t::M);
  EXPECT_EQ(s.head.genome.id(), t::M);
  EXPECT_EQ(s.head.at_most, 16u);  // 2 generations x 2 islands x 4
  ASSERT_EQ(s.nodes.size(), 4u);
  EXPECT_THAT(IdsOf(s.nodes), UnorderedElementsAre(t::H, t::G, t::A, t::B));
  for (size_t i = 0; i < 2; ++i) EXPECT_EQ(s.nodes[i].key().generation(), 1u);
  for (size_t i = 2; i < 4; ++i) EXPECT_EQ(s.nodes[i].key().generation(), 0u);
}

TEST_F(LineageReaderTest, AncestorsStopAtTheDepthAndComeInBatches) {
  EXPECT_THAT(IdsOf(Ancestors(t::M, 1).nodes),
              UnorderedElementsAre(t::H, t::G));
  // W <- O <- I, G; I <- C; G <- B.
  Streamed w = Ancestors(t::W, 0, 2);
  EXPECT_THAT(IdsOf(w.nodes),
              UnorderedElementsAre(t::O, t::I, t::G, t::C, t::B));
  EXPECT_EQ(w.batches, 3);  // 2 + 2 + 1
  // A migrant's parent is on the other island.
  EXPECT_THAT(IdsOf(Ancestors(t::P).nodes),
              UnorderedElementsAre(t::K, t::J, t::B, t::D));
  EXPECT_TRUE(Ancestors(t::A).nodes.empty());
}

TEST_F(LineageReaderTest, StoppingTheSinkCancelsTheQuery) {
  skerry::v1::AncestorsRequest req;
  *req.mutable_genome() = Id(t::W);
  req.set_batch_size(1);
  int batches = 0;
  absl::Status s = reader_->Ancestors(
      req, [](const LineageReader::StreamHead&) { return true; },
      [&](skerry::v1::LineageChunk&) { return ++batches < 2; });
  EXPECT_TRUE(absl::IsCancelled(s)) << s;
  EXPECT_EQ(batches, 2);
}

TEST_F(LineageReaderTest, DescendantsFollowBothParentLinksToTheDepth) {
  Streamed all = Descendants(t::B);
  EXPECT_THAT(IdsOf(all.nodes),
              UnorderedElementsAre(t::G, t::H, t::K, t::M, t::N, t::O, t::S,
                                   t::P, t::U, t::W));
  EXPECT_EQ(all.head.at_most, 24u);  // generations 1..3 x 8
  EXPECT_EQ(all.nodes.front().key().generation(), 1u);
  EXPECT_EQ(all.nodes.back().id(), t::W);
  EXPECT_THAT(IdsOf(Descendants(t::B, 1).nodes),
              UnorderedElementsAre(t::G, t::H, t::K));
  EXPECT_EQ(Descendants(t::B, 2).nodes.size(), 9u);
  EXPECT_THAT(IdsOf(Descendants(t::L).nodes), ElementsAre(t::Q));
}

TEST_F(LineageReaderTest, LineOfDescentTakesTheFitterParentAndTiesToA) {
  EXPECT_THAT(Line(t::M), ElementsAre(t::M, t::H, t::B));  // H 6 < G 8
  EXPECT_THAT(Line(t::P), ElementsAre(t::P, t::J, t::D));  // J 7 < K 8
  EXPECT_THAT(Line(t::S), ElementsAre(t::S, t::G, t::B));  // tie 8 = 8: a
  EXPECT_THAT(Line(t::O), ElementsAre(t::O, t::G, t::B));  // a failed
  EXPECT_THAT(Line(t::W), ElementsAre(t::W, t::O, t::G, t::B));
  EXPECT_THAT(Line(t::Q), ElementsAre(t::Q, t::L));  // ends at an immigrant
  auto line = reader_->LineOfDescent(Id(t::M));
  ASSERT_TRUE(line.ok());
  EXPECT_EQ(line->objective(), skerry::v1::MINIMIZE);
  EXPECT_THAT(line->rule(), HasSubstr("fitter parent"));
}

TEST_F(LineageReaderTest, LineOfDescentStepsAreWholeNodes) {
  // I failed (no score); its line is I <- C. W's line runs through the elite
  // O's failed parent a to G.
  for (int64_t id : {t::I, t::W}) {
    auto line = reader_->LineOfDescent(Id(id));
    ASSERT_TRUE(line.ok()) << line.status();
    for (const LineageNode& step : line->steps()) {
      auto node = reader_->Resolve(Id(static_cast<int64_t>(step.id())));
      ASSERT_TRUE(node.ok()) << node.status();
      EXPECT_EQ(step.DebugString(), node->DebugString());
    }
  }
  auto i = reader_->LineOfDescent(Id(t::I));
  ASSERT_TRUE(i.ok());
  EXPECT_EQ(i->steps(0).state(), skerry::v1::FAILED);
  EXPECT_EQ(i->steps(0).key().slot(), 2u);
  EXPECT_EQ(i->steps(1).parent_a(), 0u);
}

TEST_F(LineageReaderTest, LineOfDescentFollowsTheObjective) {
  reader_.reset();
  TempDir other;
  t::WriteGraph(other.File("max.db"), skerry::v1::MAXIMIZE);
  auto r = LineageReader::Open(other.File("max.db"));
  ASSERT_TRUE(r.ok()) << r.status();
  reader_ = std::move(*r);
  EXPECT_THAT(Line(t::M), ElementsAre(t::M, t::G, t::B));  // G 8 > H 6
}

TEST_F(LineageReaderTest, AttributionCreditsEachStepToItsOrigin) {
  // N: B [8] -> H [6] crossover +2 -> N [6.5] mutation -0.5.
  auto n = reader_->Attribution(Id(t::N));
  ASSERT_TRUE(n.ok()) << n.status();
  EXPECT_EQ(n->steps(), 2u);
  EXPECT_EQ(n->founder().id(), t::B);
  EXPECT_DOUBLE_EQ(n->total_gain(), 1.5);
  ASSERT_EQ(n->improvements_size(), 1);
  EXPECT_EQ(n->improvements(0).child().id(), t::H);
  EXPECT_DOUBLE_EQ(n->improvements(0).gain(), 2.0);
  ASSERT_EQ(n->origins_size(), 2);
  EXPECT_EQ(n->origins(0).origin(), skerry::v1::CROSSOVER);
  EXPECT_EQ(n->origins(0).improvements(), 1u);
  EXPECT_DOUBLE_EQ(n->origins(0).gain(), 2.0);
  EXPECT_EQ(n->origins(1).origin(), skerry::v1::MUTATION);
  EXPECT_DOUBLE_EQ(n->origins(1).loss(), 0.5);
  EXPECT_EQ(n->crossings_size(), 0);
}

TEST_F(LineageReaderTest, AttributionReportsIslandCrossings) {
  // U: B [8] island 0 -> K [8] migrant to island 1 -> U [7.5] mutation.
  auto u = reader_->Attribution(Id(t::U));
  ASSERT_TRUE(u.ok()) << u.status();
  EXPECT_DOUBLE_EQ(u->total_gain(), 0.5);
  ASSERT_EQ(u->crossings_size(), 1);
  EXPECT_EQ(u->crossings(0).generation(), 1u);
  EXPECT_EQ(u->crossings(0).from_island(), 0u);
  EXPECT_EQ(u->crossings(0).to_island(), 1u);
  EXPECT_EQ(u->crossings(0).origin(), skerry::v1::MIGRANT);
  EXPECT_EQ(u->crossings(0).child_id(), static_cast<uint64_t>(t::K));
  // Elites carry the score: W's line B -> G -> O -> W gains only at O.
  auto w = reader_->Attribution(Id(t::W));
  ASSERT_TRUE(w.ok());
  EXPECT_DOUBLE_EQ(w->total_gain(), 4.0);
  ASSERT_EQ(w->improvements_size(), 1);
  EXPECT_EQ(w->improvements(0).child().id(), t::O);
}

TEST_F(LineageReaderTest, CoalescenceCountsDistinctAncestorsPerGeneration) {
  skerry::v1::CoalescenceRequest genome;
  *genome.mutable_genome() = Id(t::M);
  auto m = reader_->Coalescence(genome);
  ASSERT_TRUE(m.ok()) << m.status();
  ASSERT_EQ(m->levels_size(), 3);
  EXPECT_EQ(m->levels(0).ancestors(), 1u);  // M
  EXPECT_EQ(m->levels(1).ancestors(), 2u);  // H, G
  EXPECT_EQ(m->levels(2).ancestors(), 2u);  // A, B (B once)

  skerry::v1::CoalescenceRequest all;
  all.mutable_population()->set_run_id(1);
  all.mutable_population()->set_generation(2);
  all.mutable_population()->set_all_islands(true);
  auto g2 = reader_->Coalescence(all);
  ASSERT_TRUE(g2.ok()) << g2.status();
  ASSERT_EQ(g2->levels_size(), 3);
  EXPECT_EQ(g2->levels(0).ancestors(), 7u);  // M N O S P Q U
  EXPECT_EQ(g2->levels(1).ancestors(), 6u);  // G H I J K L
  EXPECT_EQ(g2->levels(2).ancestors(), 4u);  // A B C D (E has no child)
  EXPECT_EQ(g2->levels(2).islands(), 2u);

  skerry::v1::CoalescenceRequest one = all;
  one.mutable_population()->set_all_islands(false);
  one.mutable_population()->set_island(1);
  one.set_max_depth(1);
  auto i1 = reader_->Coalescence(one);
  ASSERT_TRUE(i1.ok()) << i1.status();
  ASSERT_EQ(i1->levels_size(), 2);
  EXPECT_EQ(i1->levels(0).ancestors(), 3u);  // P Q U
  EXPECT_EQ(i1->levels(1).ancestors(), 3u);  // K J L

  one.mutable_population()->set_generation(40);
  EXPECT_TRUE(absl::IsNotFound(reader_->Coalescence(one).status()));
}

TEST_F(LineageReaderTest, DanglingParentLinkIsDataLossNamingIt) {
  // Through a Skerry connection: the row's checksum is right, only its
  // parent link dangles.
  auto conn =
      store::Connection::Open(dir_.File("graph.db"), SQLITE_OPEN_READWRITE);
  ASSERT_TRUE(conn.ok()) << conn.status();
  ASSERT_TRUE((*conn)
                  ->Exec("INSERT INTO genomes (id, run_id, island, generation, "
                         "slot, origin, parent_a, genes, score, eval_state) "
                         "VALUES (40, 1, 0, 4, 0, 4, 99, x'0000000000000000', "
                         "1, 2)")
                  .ok());
  conn->reset();
  auto line = reader_->LineOfDescent(Id(40));
  EXPECT_TRUE(absl::IsDataLoss(line.status())) << line.status();
  EXPECT_THAT(t::Message(line.status()), HasSubstr("#99"));
}

TEST(LineageReaderOpenTest, RefusesAFileWithoutGenomes) {
  TempDir dir;
  skerry::testing::RawExec(dir.File("other.db"), "CREATE TABLE t (x)");
  auto r = LineageReader::Open(dir.File("other.db"));
  EXPECT_TRUE(absl::IsFailedPrecondition(r.status())) << r.status();
  EXPECT_THAT(t::Message(r.status()), HasSubstr("other.db"));
  EXPECT_FALSE(LineageReader::Open(dir.File("missing.db")).ok());
}

}  // namespace
}  // namespace skerry::lineage
