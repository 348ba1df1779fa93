// Seed series in the store (server/store/series_store.h): made all or
// nothing, found again by request id, their rows' checksums checked by
// `--check`, and the migration that adds them.
#include "server/store/series_store.h"

#include <memory>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/store/check.h"
#include "server/store/store.h"
#include "tests/unit/server/sqlite_test_util.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using skerry::testing::RawExec;
using skerry::testing::RawQuery;
using ::testing::HasSubstr;
using ::testing::Not;

class SeriesStoreTest : public StoreTest {
 protected:
  // A series of one run per seed, each of 2 islands of 4 genomes.
  absl::Status MakeSeries(const std::string& name,
                          const std::vector<uint64_t>& seeds,
                          SeriesRecord* series) {
    series->name = name;
    series->owner = "alice";
    series->created_ms = 5;
    series->request_id = "req-" + name;
    std::vector<RunRecord> runs;
    std::vector<std::vector<GenomeRecord>> genomes;
    for (uint64_t seed : seeds) {
      RunSpec spec = SmallSpec(2);
      spec.set_seed(seed);
      runs.push_back(MakeRun(spec));
      genomes.push_back(Generation0(2, 4));
      series->members.emplace_back(0, seed);
    }
    return store_->runs().CreateSeries(series, &runs, &genomes);
  }
};

TEST_F(SeriesStoreTest, SeriesIsStoredWithItsRunsAndFoundByRequestId) {
  SeriesRecord s;
  ASSERT_TRUE(MakeSeries("low", {3, 1, 2}, &s).ok());
  ASSERT_EQ(s.members.size(), 3u);
  absl::StatusOr<std::optional<SeriesRecord>> found =
      store_->runs().FindSeriesByRequest("alice", "req-low");
  ASSERT_TRUE(found.ok()) << found.status();
  ASSERT_TRUE(found->has_value());
  EXPECT_EQ((*found)->name, "low");
  EXPECT_EQ((*found)->members, s.members);  // seed order kept: 3, 1, 2
  EXPECT_EQ((*found)->members[0].second, 3u);
  absl::StatusOr<std::map<int64_t, std::string>> of =
      store_->runs().SeriesOfRuns();
  ASSERT_TRUE(of.ok()) << of.status();
  EXPECT_EQ(of->size(), 3u);
  EXPECT_EQ(of->at(s.members[1].first), "low");
  EXPECT_EQ(*store_->runs().UnusedSeriesName("low"), "low-2");
  EXPECT_EQ(*store_->runs().UnusedSeriesName("other"), "other");
  EXPECT_EQ(RawQuery(path(),
                     "SELECT group_concat(seed) FROM (SELECT seed FROM "
                     "runs ORDER BY id)"),
            "3,1,2");
}

TEST_F(SeriesStoreTest, TakenNameStoresNothingAtAll) {
  SeriesRecord first;
  ASSERT_TRUE(MakeSeries("low", {1}, &first).ok());
  SeriesRecord second;
  absl::Status s = MakeSeries("low", {1, 2, 3}, &second);
  EXPECT_TRUE(absl::IsAlreadyExists(s)) << s;
  EXPECT_THAT(std::string(s.message()), HasSubstr("'low' exists already"));
  EXPECT_EQ(RawQuery(path(), "SELECT count(*) FROM runs"), "1");
  EXPECT_EQ(RawQuery(path(), "SELECT count(*) FROM genomes"), "8");
  EXPECT_EQ(RawQuery(path(), "SELECT count(*) FROM series_runs"), "1");
}

TEST_F(SeriesStoreTest, CheckFindsADamagedSeriesRow) {
  SeriesRecord s;
  ASSERT_TRUE(MakeSeries("low", {1, 2}, &s).ok());
  store_.reset();
  absl::StatusOr<CheckReport> clean = CheckDatabase(path());
  ASSERT_TRUE(clean.ok()) << clean.status();
  EXPECT_TRUE(clean->ok()) << clean->ToString();
  // A change the triggers do not see: the checksum no longer matches.
  RawExec(path(),
          "DROP TRIGGER series_runs_sum_update; UPDATE series_runs SET seed "
          "= 99 WHERE position = 1; DROP TRIGGER series_sum_update; UPDATE "
          "series SET owner = 'mallory'");
  absl::StatusOr<CheckReport> damaged = CheckDatabase(path());
  ASSERT_TRUE(damaged.ok()) << damaged.status();
  EXPECT_THAT(damaged->ToString(),
              HasSubstr("series membership row does not match its checksum"));
  EXPECT_THAT(damaged->ToString(),
              HasSubstr("series 'low': series row does not match"));
}

TEST_F(SeriesStoreTest, MemberWithoutItsRunIsFoundByCheck) {
  SeriesRecord s;
  ASSERT_TRUE(MakeSeries("low", {1}, &s).ok());
  store_.reset();
  RawExec(path(), "DELETE FROM runs");  // a raw connection: no triggers run
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(report->ToString(), HasSubstr("but no such run"));
}

// The migration to the series schema keeps the data and adds both tables,
// their index and triggers.
TEST_F(SeriesStoreTest, DatabaseBeforeSeriesGainsTheSeriesTables) {
  std::vector<GenomeRecord> genomes;
  RunRecord run = CreateRun(1, &genomes);
  store_.reset();
  RawExec(path(), skerry::testing::UndoSchemaTo(8));
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(*(*again)->db().SchemaVersion(), Database::kSchemaVersion);
  EXPECT_EQ(RawQuery(path(),
                     "SELECT count(*) FROM sqlite_master WHERE name IN "
                     "('series', 'series_runs', 'series_runs_series', "
                     "'series_request', 'series_sum_insert', "
                     "'series_runs_sum_update')"),
            "6");
  EXPECT_TRUE((*again)->runs().GetRun(run.id).ok());
  EXPECT_TRUE((*again)->db().QuickCheck().ok());
}

TEST_F(SeriesStoreTest, ExtendRunRefusesARunThatHasNotEnded) {
  std::vector<GenomeRecord> genomes;
  RunRecord run = CreateRun(1, &genomes);
  absl::Status s = store_->runs().ExtendRun(run.id, run.spec, 2000, {});
  EXPECT_TRUE(absl::IsFailedPrecondition(s)) << s;
  EXPECT_THAT(std::string(s.message()),
              HasSubstr("only a FINISHED or STOPPED run can be extended"));
  EXPECT_TRUE(
      absl::IsNotFound(store_->runs().ExtendRun(999, run.spec, 2000, {})));
}

}  // namespace
}  // namespace skerry::store
