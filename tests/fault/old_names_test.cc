// Runs stored before the name budget (--max-name-bytes) existed may have names
// of megabytes: a 10 MiB name made every ListRuns 10 MB. Such a row is written
// here straight into a real database file, with its row checksum right
// (server/store/row_sums.h), as an old coordinator would have left it. list,
// show and watch then answer with the name cut and marked (AnsweredName in
// common/quote.h), and --check warns about it without failing.
#include <sqlite3.h>

#include <chrono>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "server/store/row_sums.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "skerry/v1/spec.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using ::testing::HasSubstr;
using ::testing::Not;
using testing::RunCommand;

constexpr size_t kHugeName = 10 << 20;  // 10 MiB, as observed (issue 11)

constexpr char kSpec[] = R"(
name: "short"
seed: 7
genome_length: 2
evaluator { builtin { function: "sphere" } }
ga { population_size: 4 }
stop { max_generations: 2 }
)";

// Gives run 1 a huge name in its record and its stored spec, through a raw
// SQLite connection that knows the checksum function, so the update trigger
// keeps the row's checksum right.
void GiveRunOneAHugeName(const std::string& db, const std::string& name) {
  sqlite3* conn = nullptr;
  ASSERT_EQ(sqlite3_open(db.c_str(), &conn), SQLITE_OK);
  ASSERT_EQ(store::RegisterRowSumFunction(conn), SQLITE_OK);
  sqlite3_stmt* get = nullptr;
  ASSERT_EQ(sqlite3_prepare_v2(conn, "SELECT spec FROM runs WHERE id = 1", -1,
                               &get, nullptr),
            SQLITE_OK);
  ASSERT_EQ(sqlite3_step(get), SQLITE_ROW);
  skerry::v1::RunSpec spec;
  ASSERT_TRUE(spec.ParseFromArray(sqlite3_column_blob(get, 0),
                                  sqlite3_column_bytes(get, 0)));
  sqlite3_finalize(get);
  spec.set_name(name);
  const std::string blob = spec.SerializeAsString();
  sqlite3_stmt* put = nullptr;
  ASSERT_EQ(sqlite3_prepare_v2(
                conn, "UPDATE runs SET name = ?1, spec = ?2 WHERE id = 1", -1,
                &put, nullptr),
            SQLITE_OK);
  sqlite3_bind_text(put, 1, name.data(), static_cast<int>(name.size()),
                    SQLITE_TRANSIENT);
  sqlite3_bind_blob(put, 2, blob.data(), static_cast<int>(blob.size()),
                    SQLITE_TRANSIENT);
  ASSERT_EQ(sqlite3_step(put), SQLITE_DONE) << sqlite3_errmsg(conn);
  sqlite3_finalize(put);
  sqlite3_close(conn);
}

TEST(OldRunNamesTest, HugeNameFromBeforeTheBudgetIsCutInAnswersAndWarnedOf) {
  testing::TempDir dir;
  const std::string db = dir.File("old.db");
  ASSERT_TRUE(testing::WriteTextFile(dir.File("spec"), kSpec));
  CommandResult local =
      RunCommand({SKERRY_CLI_BIN, "local", dir.File("spec"), "--workers", "1",
                  "--db", db, "--sandbox", "none"},
                 absl::Seconds(120));
  ASSERT_EQ(local.exit_code, 0) << local.output;
  const std::string name = "old-run-" + std::string(kHugeName - 8, 'n');
  GiveRunOneAHugeName(db, name);
  const std::string marker =
      absl::StrCat("...[name truncated: ", kHugeName, " bytes]");

  CommandResult check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", db});
  EXPECT_EQ(check.exit_code, 0) << check.output.substr(0, 4096);
  EXPECT_THAT(check.output, HasSubstr("invariants: ok"));
  EXPECT_THAT(check.output, HasSubstr("warnings: 1"));
  EXPECT_THAT(check.output,
              HasSubstr(absl::StrCat("run 1: name of ", kHugeName,
                                     " bytes, over --max-name-bytes 256")));

  absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
      SKERRY_COORDINATOR_BIN, db, dir.File("coordinator.log"));
  ASSERT_TRUE(c.ok()) << c.status();
  for (const std::vector<std::string>& command :
       std::vector<std::vector<std::string>>{{"list"}, {"show", "1"}}) {
    SCOPED_TRACE(command[0]);
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     c->address()};
    argv.insert(argv.end(), command.begin(), command.end());
    CommandResult r = RunCommand(argv);
    EXPECT_EQ(r.exit_code, 0) << r.output.substr(0, 4096);
    EXPECT_THAT(r.output, HasSubstr("old-run-nnn"));
    EXPECT_THAT(r.output, HasSubstr(marker));
    // The first 256 bytes of the name and the marker, not 10 MiB.
    EXPECT_LT(r.output.size(), 64u << 10);
  }
  // The stored name is left as it was.
  {
    SCOPED_TRACE("WatchRun");
    auto stub = skerry::v1::RunService::NewStub(
        grpc::CreateChannel(c->address(), grpc::InsecureChannelCredentials()));
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() +
                     std::chrono::seconds(60));
    skerry::v1::WatchRunRequest req;
    req.set_run_id(1);
    auto reader = stub->WatchRun(&ctx, req);
    skerry::v1::RunSummary summary;
    ASSERT_TRUE(reader->Read(&summary));
    EXPECT_THAT(summary.name(), HasSubstr(marker));
    EXPECT_LT(summary.name().size(), 1024u);
    while (reader->Read(&summary)) {
    }
    EXPECT_TRUE(reader->Finish().ok());
  }
  EXPECT_EQ(
      testing::QueryText(db, "SELECT length(name) FROM runs WHERE id = 1"),
      absl::StrCat(kHugeName));
  EXPECT_THAT(c->process.Log(), Not(HasSubstr(name.substr(0, 4096))));
}

}  // namespace
}  // namespace skerry
