// Many watchers on one run (server/api/watch_hub.h), with the real
// skerry-coordinator binary on a loopback port, a real SQLite file and a real
// skerry-worker: 49 watchers that read, one that reads nothing until the run
// has finished (on a channel with a small receive window, so the coordinator
// cannot push its updates past it); a client-paced follower (FollowRun) that
// reads nothing on a default channel; the watcher limit, and an unknown run.
// No time is asserted; every wait is bounded.
#include <csignal>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using skerry::v1::RunSummary;
using ::testing::HasSubstr;

// 128 islands make a summary of at least 800 bytes, larger than the silent
// watcher's receive window (kSilentWindow), and an update per generation of
// any island: plenty of updates for the watchers.
constexpr char kWatchedSpec[] = R"pb(
  name: "watched"
  seed: 77
  genome_length: 4
  evaluator { builtin { function: "sphere" } }
  ga { population_size: 4 elites: 1 }
  islands { count: 128 topology: RING interval: 5 migrants: 1 }
  stop { max_generations: 15 }
)pb";

// The silent watcher's HTTP/2 receive window. A summary larger than it cannot
// be taken until the watcher reads, so its very first write stays in flight:
// every later change is then due while a write is outstanding, and is dropped
// whatever the machine's speed (the earlier form of this test relied on the
// run outlasting a few writes, which a faster machine may not do).
constexpr int kSilentWindow = 512;

constexpr int kReaders = 49;

std::chrono::system_clock::time_point In(absl::Duration d) {
  return absl::ToChronoTime(absl::Now() + d);
}

struct Watched {
  std::vector<RunSummary> updates;
  grpc::Status status;
};

// Reads a watch stream to its end (bounded by the call's deadline).
Watched ReadToEnd(grpc::ClientReaderInterface<RunSummary>& reader) {
  Watched w;
  RunSummary s;
  while (reader.Read(&s)) w.updates.push_back(s);
  w.status = reader.Finish();
  return w;
}

class WatchTest : public ::testing::Test {
 protected:
  void Start(const std::vector<std::string>& flags = {}) {
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, dir_.File("skerry.db"),
        dir_.File("coordinator.log"), flags);
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
    channel_ = grpc::CreateChannel(coordinator_->address(),
                                   grpc::InsecureChannelCredentials());
    stub_ = skerry::v1::RunService::NewStub(channel_);
  }

  uint64_t Submit() {
    skerry::v1::SubmitRunRequest req;
    EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(
        kWatchedSpec, req.mutable_spec()));
    skerry::v1::SubmitRunResponse resp;
    grpc::ClientContext ctx;
    ctx.set_deadline(In(absl::Seconds(30)));
    grpc::Status s = stub_->SubmitRun(&ctx, req, &resp);
    EXPECT_TRUE(s.ok()) << s.error_message();
    return resp.run().id();
  }

  void StartWorker() {
    absl::StatusOr<testing::Process> w = testing::Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", coordinator_->address(),
         "--threads", "2", "--name", "w0"},
        dir_.File("worker.log"));
    ASSERT_TRUE(w.ok()) << w.status();
    worker_ = std::make_unique<testing::Process>(std::move(*w));
  }

  skerry::v1::WatchRunRequest Request(uint64_t run_id) {
    skerry::v1::WatchRunRequest req;
    req.set_run_id(run_id);
    req.set_interval_ms(50);
    return req;
  }

  // A FollowRun stream whose first request (naming the run) is written.
  std::unique_ptr<
      grpc::ClientReaderWriter<skerry::v1::FollowRunRequest, RunSummary>>
  Follow(grpc::ClientContext* ctx, uint64_t run_id, uint32_t interval_ms) {
    auto follower = stub_->FollowRun(ctx);
    skerry::v1::FollowRunRequest first;
    first.set_run_id(run_id);
    first.set_interval_ms(interval_ms);
    EXPECT_TRUE(follower->Write(first));
    return follower;
  }

  testing::TempDir dir_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<skerry::v1::RunService::Stub> stub_;
  std::unique_ptr<testing::Process> worker_;
};

TEST_F(WatchTest,
       FiftyWatchersSeeTheEndAndTheOneThatNeverReadsIsToldWhatItMissed) {
  Start();
  const uint64_t run_id = Submit();
  ASSERT_NE(run_id, 0u);

  // The silent watcher: its own connection with a small receive window that
  // is only replenished as it reads (no bandwidth probing).
  grpc::ChannelArguments small_window;
  small_window.SetInt(GRPC_ARG_HTTP2_BDP_PROBE, 0);
  small_window.SetInt(GRPC_ARG_HTTP2_STREAM_LOOKAHEAD_BYTES, kSilentWindow);
  auto silent_stub = skerry::v1::RunService::NewStub(grpc::CreateCustomChannel(
      coordinator_->address(), grpc::InsecureChannelCredentials(),
      small_window));
  grpc::ClientContext silent_ctx;
  silent_ctx.set_deadline(In(absl::Seconds(400)));
  std::unique_ptr<grpc::ClientReader<RunSummary>> silent =
      silent_stub->WatchRun(&silent_ctx, Request(run_id));

  std::vector<Watched> seen(kReaders);
  std::vector<std::thread> readers;
  for (int i = 0; i < kReaders; ++i) {
    readers.emplace_back([&, i] {
      grpc::ClientContext ctx;
      ctx.set_deadline(In(absl::Seconds(300)));
      auto reader = stub_->WatchRun(&ctx, Request(run_id));
      seen[i] = ReadToEnd(*reader);
    });
  }
  StartWorker();
  for (std::thread& t : readers) t.join();
  skerry::v1::GetRunResponse stored;
  {
    grpc::ClientContext ctx;
    ctx.set_deadline(In(absl::Seconds(30)));
    skerry::v1::RunRef ref;
    ref.set_run_id(run_id);
    ASSERT_TRUE(stub_->GetRun(&ctx, ref, &stored).ok());
  }
  ASSERT_EQ(stored.run().state(), skerry::v1::FINISHED);

  for (int i = 0; i < kReaders; ++i) {
    SCOPED_TRACE(absl::StrCat("watcher ", i));
    EXPECT_TRUE(seen[i].status.ok()) << seen[i].status.error_message();
    ASSERT_FALSE(seen[i].updates.empty());
    EXPECT_EQ(seen[i].updates.back().state(), skerry::v1::FINISHED)
        << coordinator_->process.Log();
    EXPECT_EQ(seen[i].updates.back().evaluations(), stored.run().evaluations())
        << "the final summary";
  }
  // The precondition of the silent watcher's case (kSilentWindow).
  ASSERT_GT(seen[0].updates.front().ByteSizeLong(),
            static_cast<size_t>(kSilentWindow));

  // Now the silent watcher reads: the update the coordinator was stuck on,
  // then the latest (final) one, which says how many it missed.
  Watched late = ReadToEnd(*silent);
  EXPECT_TRUE(late.status.ok()) << late.status.error_message();
  ASSERT_FALSE(late.updates.empty());
  const RunSummary& last = late.updates.back();
  EXPECT_EQ(last.state(), skerry::v1::FINISHED);
  EXPECT_GT(last.dropped_updates(), 0u);
  // Its first write never completed until it read: it gets that summary, then
  // the newest (final) one with the count, and nothing in between.
  // That it was not sent every update is what dropped_updates() > 0 says.
  // (The readers may be coalesced down to two updates as well when 49
  // threads share two cores, so their counts are no yardstick for it.)
  EXPECT_EQ(late.updates.size(), 2u);
  for (const RunSummary& s : late.updates) {
    EXPECT_LE(s.dropped_updates(), last.dropped_updates()) << "counts grow";
  }
}

// A WatchRun watcher that reads nothing got a backlog of stale summaries
// whenever its HTTP/2 window was the default (it grows to megabytes): the
// coordinator's writes completed into the window. FollowRun sends only what
// was asked for, so the same silent watcher, on a channel with default
// settings, holds one summary and is then sent the newest with the count.
TEST_F(WatchTest, SilentFollowerOnADefaultChannelGetsTheNewestAndWhatItMissed) {
  Start();
  const uint64_t run_id = Submit();
  ASSERT_NE(run_id, 0u);
  grpc::ClientContext ctx;
  ctx.set_deadline(In(absl::Seconds(400)));
  auto follower = Follow(&ctx, run_id, 50);
  StartWorker();
  const bool finished = testing::WaitFor(
      [&] {
        grpc::ClientContext get_ctx;
        get_ctx.set_deadline(In(absl::Seconds(30)));
        skerry::v1::RunRef ref;
        ref.set_run_id(run_id);
        skerry::v1::GetRunResponse got;
        return stub_->GetRun(&get_ctx, ref, &got).ok() &&
               got.run().state() == skerry::v1::FINISHED;
      },
      absl::Seconds(300));
  ASSERT_TRUE(finished) << coordinator_->process.Log();
  // An update is due one interval (50 ms) after the last one sent; let a few
  // pass so that the final one is due while nothing is asked for.
  absl::SleepFor(absl::Milliseconds(200));

  std::vector<RunSummary> got;
  RunSummary s;
  while (got.size() < 10 && follower->Read(&s)) {
    got.push_back(s);
    if (!follower->Write(skerry::v1::FollowRunRequest())) break;
  }
  follower->WritesDone();
  grpc::Status status = follower->Finish();
  EXPECT_TRUE(status.ok()) << status.error_message();
  ASSERT_FALSE(got.empty());
  EXPECT_LE(got.size(), 2u) << "a backlog of stale summaries";
  EXPECT_EQ(got.back().state(), skerry::v1::FINISHED);
  EXPECT_GT(got.back().dropped_updates(), 0u);
}

// A follower is sent one summary per request: with the first request only,
// it gets one, and closing its side ends the stream (OK).
TEST_F(WatchTest, FollowerGetsOneSummaryPerRequestAndEndsWhenItCloses) {
  Start();
  const uint64_t run_id = Submit();
  ASSERT_NE(run_id, 0u);
  grpc::ClientContext ctx;
  ctx.set_deadline(In(absl::Seconds(60)));
  auto follower = Follow(&ctx, run_id, 0);
  ASSERT_TRUE(follower->WritesDone());
  std::vector<RunSummary> got;
  RunSummary s;
  while (got.size() < 10 && follower->Read(&s)) got.push_back(s);
  EXPECT_TRUE(follower->Finish().ok());
  ASSERT_EQ(got.size(), 1u);
  EXPECT_EQ(got[0].id(), run_id);
}

TEST_F(WatchTest, WatchersOverTheLimitAreRefusedWithResourceExhausted) {
  Start({"--max-watchers", "3"});
  const uint64_t run_id = Submit();  // no worker: the run stays running
  ASSERT_NE(run_id, 0u);
  std::vector<std::unique_ptr<grpc::ClientContext>> contexts;
  std::vector<std::unique_ptr<grpc::ClientReader<RunSummary>>> open;
  for (int i = 0; i < 3; ++i) {
    contexts.push_back(std::make_unique<grpc::ClientContext>());
    contexts.back()->set_deadline(In(absl::Seconds(120)));
    open.push_back(stub_->WatchRun(contexts.back().get(), Request(run_id)));
    RunSummary first;
    ASSERT_TRUE(open.back()->Read(&first)) << "watcher " << i;
    EXPECT_EQ(first.state(), skerry::v1::RUNNING);
  }
  {
    grpc::ClientContext ctx;
    ctx.set_deadline(In(absl::Seconds(30)));
    auto refused = stub_->WatchRun(&ctx, Request(run_id));
    Watched w = ReadToEnd(*refused);
    EXPECT_TRUE(w.updates.empty());
    EXPECT_EQ(w.status.error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED);
    EXPECT_THAT(w.status.error_message(), HasSubstr("--max-watchers 3"));
  }
  // One watcher leaves: a new one is let in (once the coordinator has seen
  // the cancellation).
  contexts[0]->TryCancel();
  EXPECT_EQ(open[0]->Finish().error_code(), grpc::StatusCode::CANCELLED);
  bool admitted = testing::WaitFor(
      [&] {
        grpc::ClientContext ctx;
        ctx.set_deadline(In(absl::Seconds(30)));
        auto again = stub_->WatchRun(&ctx, Request(run_id));
        RunSummary first;
        const bool got = again->Read(&first);
        ctx.TryCancel();
        again->Finish().IgnoreError();
        return got;
      },
      absl::Seconds(60));
  EXPECT_TRUE(admitted);
  for (size_t i = 1; i < contexts.size(); ++i) contexts[i]->TryCancel();
  for (size_t i = 1; i < open.size(); ++i) open[i]->Finish().IgnoreError();
}

TEST_F(WatchTest, WatchingAnUnknownRunIsNotFound) {
  Start();
  grpc::ClientContext ctx;
  ctx.set_deadline(In(absl::Seconds(30)));
  auto reader = stub_->WatchRun(&ctx, Request(12345));
  Watched w = ReadToEnd(*reader);
  EXPECT_TRUE(w.updates.empty());
  EXPECT_EQ(w.status.error_code(), grpc::StatusCode::NOT_FOUND)
      << w.status.error_message();
}

TEST_F(WatchTest, CoordinatorShutdownEndsWatchesWithUnavailable) {
  Start();
  const uint64_t run_id = Submit();
  grpc::ClientContext ctx;
  ctx.set_deadline(In(absl::Seconds(60)));
  auto reader = stub_->WatchRun(&ctx, Request(run_id));
  RunSummary first;
  ASSERT_TRUE(reader->Read(&first));
  coordinator_->process.Signal(SIGTERM);
  Watched rest = ReadToEnd(*reader);
  EXPECT_EQ(rest.status.error_code(), grpc::StatusCode::UNAVAILABLE)
      << rest.status.error_message();
  absl::StatusOr<int> code = coordinator_->process.Wait(absl::Seconds(60));
  ASSERT_TRUE(code.ok()) << code.status();
  EXPECT_EQ(*code, 0) << coordinator_->process.Log();
}

}  // namespace
}  // namespace skerry
