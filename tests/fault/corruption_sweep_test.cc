// Damaged database files (issue: corruption is detected and named, never
// served). A small run is driven to its end (and, for the second sweep, to the
// middle) by a test fleet, as engine_fault_test does; then for every page of
// the file in turn one byte is flipped in a copy, and the copy is also cut
// short at several points. Each case is opened the way the coordinator opens
// a database at start (Store::Open, QuickCheck, Engine::Open; QuickCheck is
// the start's check and the whole-file check the coordinator makes next,
// while serving, which stops every write when it finds damage: done here
// before anything is written), the mid-run
// copies are driven to their end, and the case must end in one of:
//   refused   the coordinator would not start on the file;
//   damaged   a DATA_LOSS naming the run (the digest, the engine's summary of
//             the run), or `--check` naming a problem;
//   unchanged the run's digest equals the undamaged run's.
// Never a changed digest with `--check` ok. The counts are printed (and kept in
// docs/operations.md, "Damaged files").
#include <sys/stat.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <memory>
#include <random>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/clock.h"
#include "gtest/gtest.h"
#include "server/engine/engine.h"
#include "server/scheduler/task_queue.h"
#include "server/store/check.h"
#include "server/store/store.h"
#include "tests/support/engine_harness.h"
#include "tests/support/process.h"

namespace skerry::engine {
namespace {

using skerry::testing::TempDir;
using skerry::v1::RunSpec;
using skerry::v1::Task;
using skerry::v1::TaskResult;

constexpr int64_t kWorker = 1;

using Harness = skerry::testing::EngineHarness;

RunSpec SmallSpec() { return skerry::testing::SmallSphereSpec("sweep", 91); }

// Opens as the coordinator does at start; the status says why it would not.
absl::StatusOr<std::unique_ptr<Harness>> OpenLikeTheCoordinator(
    const std::string& path, Clock* clock) {
  auto h = std::make_unique<Harness>();
  absl::StatusOr<std::unique_ptr<store::Store>> s = store::Store::Open(path);
  if (!s.ok()) return s.status();
  h->store = std::move(*s);
  if (absl::Status q = h->store->db().QuickCheck(); !q.ok()) return q;
  // As the coordinator does (coordinator.cc): a file it cannot write is
  // refused at start. Without this a flip of header byte 18 (the write
  // version: 3 makes SQLite open the file read-only) stalled here while the
  // real coordinator refuses it.
  if (absl::Status w = h->store->db().ProbeWrite(); !w.ok()) return w;
  h->queue = std::make_unique<scheduler::TaskQueue>(clock, absl::Seconds(30));
  absl::StatusOr<std::unique_ptr<Engine>> e =
      Engine::Open(h->store.get(), h->queue.get(), clock);
  if (!e.ok()) return e.status();
  h->engine = std::move(*e);
  return h;
}

std::vector<TaskResult> Score(const std::vector<Task>& tasks) {
  return skerry::testing::SphereResults(tasks, 0.0);
}

// The run's state as the engine shows it.
skerry::v1::RunSummary SummaryOf(Harness& h, int64_t run) {
  absl::StatusOr<skerry::v1::RunSummary> s = h.engine->Summary(run);
  if (!s.ok()) {
    skerry::v1::RunSummary failed;
    failed.set_state(skerry::v1::FAILED_RUN);
    failed.set_message(std::string(s.status().message()));
    return failed;
  }
  return *s;
}

bool IsActive(const skerry::v1::RunSummary& s) {
  return s.state() == skerry::v1::RUNNING || s.state() == skerry::v1::QUEUED;
}

// Drives the run until it ends or `max_rounds` Report rounds were made.
// Returns false when the run is active but no work can be leased (a stall).
bool Drive(Harness& h, int64_t run, int max_rounds) {
  for (int round = 0; round < max_rounds; ++round) {
    if (!IsActive(SummaryOf(h, run))) return true;
    std::vector<Task> tasks;
    for (int i = 0; i < 40 && tasks.empty(); ++i) {
      tasks = h.queue->Lease(kWorker, 1000, absl::Milliseconds(25));
    }
    if (tasks.empty()) return false;
    if (!h.engine->Report(kWorker, Score(tasks)).ok()) return false;
  }
  return true;
}

std::string ReadAll(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in),
                     std::istreambuf_iterator<char>());
}

void WriteAll(const std::string& path, const std::string& bytes) {
  std::filesystem::remove(path + "-wal");
  std::filesystem::remove(path + "-shm");
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

enum class Outcome { kRefused, kDamaged, kUnchanged, kSilentlyWrong, kStall };

const char* Name(Outcome o) {
  switch (o) {
    case Outcome::kRefused:
      return "refused at start";
    case Outcome::kDamaged:
      return "DATA_LOSS or --check names the damage";
    case Outcome::kUnchanged:
      return "digest unchanged";
    case Outcome::kSilentlyWrong:
      return "changed digest with --check ok";
    case Outcome::kStall:
      return "stalled";
  }
  return "?";
}

class CorruptionSweepTest : public ::testing::Test {
 protected:
  // Makes the reference: the run driven to its end (`rounds` < 0) or for
  // `rounds` rounds; `digest_` is always that of the finished run.
  void Prepare(int rounds) {
    const std::string ref = dir_.File("ref.db");
    {
      auto h = OpenLikeTheCoordinator(ref, &clock_);
      ASSERT_TRUE(h.ok()) << h.status();
      absl::StatusOr<store::RunRecord> run =
          (*h)->engine->Submit(SmallSpec(), "spec", "alice");
      ASSERT_TRUE(run.ok()) << run.status();
      run_ = run->id;
      ASSERT_TRUE(Drive(**h, run_, rounds < 0 ? 100 : rounds));
    }  // closed: the WAL is folded into the file
    ASSERT_FALSE(std::filesystem::exists(ref + "-wal") &&
                 std::filesystem::file_size(ref + "-wal") > 0);
    image_ = ReadAll(ref);
    {
      auto h = OpenLikeTheCoordinator(ref, &clock_);
      ASSERT_TRUE(h.ok()) << h.status();
      ASSERT_TRUE(Drive(**h, run_, 100));
      absl::StatusOr<store::GenomeStore::Digest> d =
          (*h)->store->genomes().RunDigest(run_);
      ASSERT_TRUE(d.ok()) << d.status();
      digest_ = d->sha256;
    }
  }

  Outcome Classify(const std::string& bytes, std::string* why) {
    const std::string db = dir_.File("case.db");
    WriteAll(db, bytes);
    std::string digest;
    {
      auto h = OpenLikeTheCoordinator(db, &clock_);
      if (!h.ok()) {
        *why = std::string(h.status().message());
        return Outcome::kRefused;
      }
      if (!Drive(**h, run_, 100)) {
        skerry::v1::RunSummary s = SummaryOf(**h, run_);
        *why = s.message();
        if (!IsActive(s)) return Outcome::kDamaged;
        return Outcome::kStall;
      }
      skerry::v1::RunSummary s = SummaryOf(**h, run_);
      absl::StatusOr<store::GenomeStore::Digest> d =
          (*h)->store->genomes().RunDigest(run_);
      if (absl::IsDataLoss(d.status()) ||
          absl::StrContains(s.message(), "damaged")) {
        *why = d.ok() ? s.message() : std::string(d.status().message());
        EXPECT_TRUE(absl::StrContains(*why, absl::StrCat("run ", run_)))
            << *why;
        return Outcome::kDamaged;
      }
      if (d.ok()) digest = d->sha256;
    }
    if (digest == digest_) return Outcome::kUnchanged;
    absl::StatusOr<store::CheckReport> report = store::CheckDatabase(db);
    if (!report.ok() || !report->ok()) {
      *why = report.ok() ? report->ToString()
                         : std::string(report.status().message());
      return Outcome::kDamaged;
    }
    *why = report->ToString();
    return Outcome::kSilentlyWrong;
  }

  // Every page in turn, `per_page` single-bit flips each (seeded choices of
  // where in the page), then cuts at several points.
  void Sweep(const std::string& label, int per_page) {
    ASSERT_GE(image_.size(), 512u);
    const size_t page =
        (static_cast<unsigned char>(image_[16]) << 8) |
        static_cast<unsigned char>(image_[17]);  // SQLite file format, header
    ASSERT_GE(page, 512u);
    const size_t pages = image_.size() / page;
    ASSERT_LE(pages, 200u) << "keep the sweep small";
    std::mt19937 rng(20261202);
    std::map<Outcome, int> counts;
    size_t cases = 0;
    for (size_t p = 0; p < pages; ++p) {
      // Bytes in use (non-zero: free space in a page is mostly zeros), so
      // that the flips land in headers, pointers, keys and row content.
      std::vector<size_t> used;
      for (size_t i = p * page; i < (p + 1) * page; ++i) {
        if (image_[i] != 0) used.push_back(i);
      }
      if (used.empty()) used.push_back(p * page);
      for (int k = 0; k < per_page; ++k) {
        std::string bytes = image_;
        const size_t offset = used[std::uniform_int_distribution<size_t>(
            0, used.size() - 1)(rng)];
        bytes[offset] = static_cast<char>(bytes[offset] ^ (1 << (rng() % 8)));
        std::string why;
        const Outcome o = Classify(bytes, &why);
        ++counts[o];
        ++cases;
        EXPECT_NE(o, Outcome::kSilentlyWrong)
            << label << ": byte " << offset << " (page " << p + 1 << ")\n"
            << why;
        EXPECT_NE(o, Outcome::kStall) << label << ": byte " << offset
                                      << " (page " << p + 1 << "): " << why;
      }
    }
    for (size_t cut : {size_t{0}, size_t{100}, page, page * pages / 2,
                       page * (pages - 1), image_.size() - 1}) {
      std::string why;
      const Outcome o = Classify(image_.substr(0, cut), &why);
      ++counts[o];
      ++cases;
      EXPECT_NE(o, Outcome::kSilentlyWrong)
          << label << ": cut at " << cut << "\n"
          << why;
      EXPECT_NE(o, Outcome::kStall)
          << label << ": cut at " << cut << ": " << why;
    }
    std::printf("%s: %zu pages of %zu bytes, %zu cases\n", label.c_str(), pages,
                page, cases);
    for (const auto& [o, n] : counts) std::printf("  %-42s %d\n", Name(o), n);
  }

  FakeClock clock_;
  TempDir dir_;
  int64_t run_ = 0;
  std::string image_;   // the database file swept
  std::string digest_;  // the undamaged run's, finished
};

TEST_F(CorruptionSweepTest, FlippedOrCutFinishedDatabaseIsRefusedOrNamed) {
  Prepare(-1);
  if (HasFatalFailure()) return;
  Sweep("finished database", 32);
}

TEST_F(CorruptionSweepTest, FlippedOrCutMidRunCopyIsRefusedOrNamed) {
  Prepare(2);
  if (HasFatalFailure()) return;
  Sweep("mid-run copy", 16);
}

}  // namespace
}  // namespace skerry::engine
