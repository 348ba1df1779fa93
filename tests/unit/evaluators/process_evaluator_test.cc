// ProcessEvaluator against real child processes: a well-behaved program, and
// programs that crash, hang, print garbage, answer with the wrong id, leave
// out the score or exit early. Every misbehaviour must fail that evaluation
// with a clear error quoting the child's stderr, kill the child, and leave the
// evaluator able to go on with a fresh one.
#include "worker/process_evaluator.h"

#include <signal.h>
#include <unistd.h>

#include <fstream>
#include <memory>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "common/clock.h"
#include "common/episodes.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/process.h"

namespace skerry::worker {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

const std::vector<double> kGenes = {1.0, -2.0, 0.5};  // sum of squares 5.25

ProcessEvaluatorOptions Behave(const std::string& mode,
                               std::vector<std::string> extra = {}) {
  ProcessEvaluatorOptions o;
  o.argv = {"python3", std::string(SKERRY_TEST_PROGRAMS_DIR) + "/behave.py",
            mode};
  o.argv.insert(o.argv.end(), extra.begin(), extra.end());
  o.time_limit = absl::Seconds(30);  // generous: 2 shared cores
  return o;
}

std::unique_ptr<ProcessEvaluator> MustCreate(ProcessEvaluatorOptions o) {
  absl::StatusOr<std::unique_ptr<ProcessEvaluator>> e =
      ProcessEvaluator::Create(std::move(o));
  EXPECT_TRUE(e.ok()) << e.status();
  return e.ok() ? *std::move(e) : nullptr;
}

// The message of the failure of one evaluation by a fresh child that behaves
// as `mode` says ("" and a test failure when it did not fail).
std::string FirstFailure(const std::string& mode) {
  auto e = MustCreate(Behave(mode));
  if (e == nullptr) return "";
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  EXPECT_FALSE(score.ok()) << mode << " scored " << *score;
  return score.ok() ? "" : std::string(score.status().message());
}

// True once /proc says pid is gone or a zombie (bounded wait).
bool ProcessGone(pid_t pid) {
  return testing::WaitFor(
      [pid] {
        std::ifstream stat("/proc/" + std::to_string(pid) + "/stat");
        if (!stat) return true;
        std::string text((std::istreambuf_iterator<char>(stat)),
                         std::istreambuf_iterator<char>());
        const size_t paren = text.rfind(')');
        return paren != std::string::npos && paren + 2 < text.size() &&
               text[paren + 2] == 'Z';
      },
      absl::Seconds(20));
}

TEST(ProcessEvaluatorTest, WellBehavedProgramScoresMatchAndOneChildServesAll) {
  auto e = MustCreate(Behave("good"));
  ASSERT_NE(e, nullptr);
  EXPECT_EQ(e->child_pid(), -1) << "no child before the first evaluation";
  for (int i = 0; i < 5; ++i) {
    absl::StatusOr<double> score = e->Evaluate(kGenes, 1000 + i);
    ASSERT_TRUE(score.ok()) << score.status();
    EXPECT_DOUBLE_EQ(*score, 5.25);  // 1 + 4 + 0.25
    EXPECT_EQ(e->last_metrics().at("answered"), i + 1);
    EXPECT_EQ(e->last_metrics().at("seed_low"), 1000 + i);
  }
  EXPECT_EQ(e->starts(), 1);
  EXPECT_EQ(e->failures(), 0);
  EXPECT_GT(e->child_pid(), 0);
}

TEST(ProcessEvaluatorTest, ExchangeAssignsIncreasingIdsAndReturnsMetrics) {
  auto e = MustCreate(Behave("good"));
  ASSERT_NE(e, nullptr);
  skerry::v1::EvaluationRequest request;
  request.add_genes(3.0);
  request.set_seed(7);
  request.set_id(999);  // overwritten
  absl::StatusOr<skerry::v1::EvaluationResponse> first = e->Exchange(request);
  ASSERT_TRUE(first.ok()) << first.status();
  absl::StatusOr<skerry::v1::EvaluationResponse> second = e->Exchange(request);
  ASSERT_TRUE(second.ok()) << second.status();
  EXPECT_EQ(first->id(), 1u);
  EXPECT_EQ(second->id(), 2u);
  EXPECT_DOUBLE_EQ(second->score(), 9.0);
  EXPECT_EQ(second->metrics().at("answered"), 2.0);
}

TEST(ProcessEvaluatorTest, CrashFailsTheAttemptWithExitStatusAndTraceback) {
  auto e = MustCreate(Behave("crash"));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  ASSERT_FALSE(score.ok());
  const std::string message(score.status().message());
  EXPECT_THAT(message, HasSubstr("closed its stdout without answering"));
  EXPECT_THAT(message, HasSubstr("exited with status 1"));
  EXPECT_THAT(message, HasSubstr("stderr tail:"));
  EXPECT_THAT(message, HasSubstr("about to fail on request 1"));
  EXPECT_THAT(message, HasSubstr("RuntimeError: simulated crash in the model"));
  EXPECT_EQ(e->child_pid(), -1);
  EXPECT_EQ(e->failures(), 1);
}

TEST(ProcessEvaluatorTest, SignalDeathIsNamed) {
  ProcessEvaluatorOptions o;
  o.argv = {SKERRY_ABORT_EVALUATOR_BIN};
  o.time_limit = absl::Seconds(30);
  auto e = MustCreate(std::move(o));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  ASSERT_FALSE(score.ok());
  EXPECT_THAT(std::string(score.status().message()),
              HasSubstr("killed by signal 6"));
  EXPECT_THAT(std::string(score.status().message()),
              HasSubstr("abort_evaluator: giving up"));
}

// Regression: under load (two busy loops) the 500 ms limit used to strike
// before Python had even started, so the test raced the clock. Now the limit
// is on a fake clock: the test waits (bounded) until the program hangs with
// its grandchild started, then moves time past the limit.
TEST(ProcessEvaluatorTest, HangPastTheLimitKillsTheWholeProcessGroup) {
  testing::TempDir dir;
  const std::string pid_file = dir.File("grandchild.pid");
  FakeClock clock;
  ProcessEvaluatorOptions o = Behave("hang", {pid_file});
  o.time_limit = absl::Milliseconds(500);
  o.clock = &clock;
  auto e = MustCreate(std::move(o));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score;
  std::thread evaluation([&] { score = e->Evaluate(kGenes, 1); });
  pid_t grandchild = 0;
  const bool hanging = testing::WaitFor(
      [&] {
        std::ifstream f(pid_file);
        return static_cast<bool>(f >> grandchild);
      },
      absl::Seconds(60));
  // Not yet: the fake time has not moved.
  clock.Advance(absl::Milliseconds(499));
  clock.Advance(absl::Milliseconds(2));
  evaluation.join();
  ASSERT_TRUE(hanging) << "behave.py hang never started its grandchild";
  ASSERT_FALSE(score.ok());
  EXPECT_TRUE(absl::IsDeadlineExceeded(score.status())) << score.status();
  const std::string message(score.status().message());
  EXPECT_THAT(message, HasSubstr("no answer to request 1 within the time "
                                 "limit of 500ms"));
  EXPECT_THAT(message, HasSubstr("was killed with SIGKILL"));
  EXPECT_THAT(message, HasSubstr("behave: hanging on request 1"));
  // The grandchild, in the same process group, went too.
  EXPECT_TRUE(ProcessGone(grandchild)) << "grandchild " << grandchild;
}

// The time limit is measured on the evaluator's clock: however long the
// program takes in real time, it is not cut short until the clock says so.
TEST(ProcessEvaluatorTest, TimeLimitIsMeasuredOnTheClock) {
  FakeClock clock;
  ProcessEvaluatorOptions o = Behave("good");
  o.time_limit = absl::Milliseconds(1);
  o.clock = &clock;
  auto e = MustCreate(std::move(o));
  ASSERT_NE(e, nullptr);
  // Starting Python takes far longer than 1 ms of real time.
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  ASSERT_TRUE(score.ok()) << score.status();
  EXPECT_DOUBLE_EQ(*score, 5.25);
}

// Regression: a worker stopping (ChildRegistry::KillAll) ends an evaluation
// in progress at once instead of waiting for its time limit.
TEST(ProcessEvaluatorTest, KillAllEndsAnEvaluationInProgressAndNoChildStarts) {
  testing::TempDir dir;
  const std::string pid_file = dir.File("grandchild.pid");
  ProcessEvaluatorOptions o = Behave("hang", {pid_file});
  o.time_limit = absl::Hours(1);
  o.registry = std::make_shared<child::ChildRegistry>();
  std::shared_ptr<child::ChildRegistry> registry = o.registry;
  auto e = MustCreate(std::move(o));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score;
  std::thread evaluation([&] { score = e->Evaluate(kGenes, 1); });
  pid_t grandchild = 0;
  const bool hanging = testing::WaitFor(
      [&] {
        std::ifstream f(pid_file);
        return static_cast<bool>(f >> grandchild);
      },
      absl::Seconds(60));
  registry->KillAll();
  evaluation.join();
  ASSERT_TRUE(hanging);
  ASSERT_FALSE(score.ok());
  EXPECT_THAT(std::string(score.status().message()), HasSubstr("killed"));
  EXPECT_TRUE(ProcessGone(grandchild));
  absl::StatusOr<double> again = e->Evaluate(kGenes, 1);
  ASSERT_FALSE(again.ok());
  EXPECT_TRUE(absl::IsCancelled(again.status())) << again.status();
  EXPECT_THAT(std::string(again.status().message()),
              HasSubstr("the worker is stopping"));
}

// Every child gets PR_SET_PDEATHSIG: it dies with the thread that started it
// (the worker), even when the worker is killed with SIGKILL.
TEST(ProcessEvaluatorTest, ChildDiesWithTheThreadThatStartedIt) {
  pid_t pid = -1;
  std::unique_ptr<ProcessEvaluator> kept;
  std::thread starter([&] {
    kept = MustCreate(Behave("good"));
    if (kept == nullptr) return;
    ASSERT_TRUE(kept->Evaluate(kGenes, 1).ok());
    pid = kept->child_pid();
  });
  starter.join();
  ASSERT_GT(pid, 0);
  // The thread that forked it has ended: the kernel sent SIGKILL.
  EXPECT_TRUE(ProcessGone(pid));
  kept.reset();
}

TEST(ProcessEvaluatorTest, ChildEnvironmentHoldsNoTokenOfTheWorker) {
  setenv("SKERRY_TOKEN", "skt_not_for_children", 1);
  setenv("SKERRY_TEST_VALUE", "7", 1);  // not passed on: not in the spec
  ProcessEvaluatorOptions o = Behave("env_names");
  auto e = MustCreate(std::move(o));
  unsetenv("SKERRY_TOKEN");
  unsetenv("SKERRY_TEST_VALUE");
  ASSERT_NE(e, nullptr);
  absl::StatusOr<skerry::v1::EvaluationResponse> r =
      e->Exchange(skerry::v1::EvaluationRequest());
  ASSERT_TRUE(r.ok()) << r.status();
  EXPECT_EQ(r->metrics().count("SKERRY_TOKEN"), 0u);
  EXPECT_EQ(r->metrics().count("SKERRY_TEST_VALUE"), 0u);
  EXPECT_EQ(r->metrics().count("PATH"), 1u);
}

TEST(ProcessEvaluatorTest, GarbageLineFailsWithTheLineQuoted) {
  const std::string message = FirstFailure("garbage");
  EXPECT_THAT(message, HasSubstr("not an EvaluationResponse in JSON"));
  EXPECT_THAT(message, HasSubstr("hello, this is not json"));
  EXPECT_THAT(message, HasSubstr("behave: printing garbage"));
}

TEST(ProcessEvaluatorTest, WrongIdFails) {
  const std::string message = FirstFailure("wrong_id");
  EXPECT_THAT(message, HasSubstr("answered request 1 with id 2"));
  EXPECT_THAT(message, HasSubstr("stderr was empty"));
}

TEST(ProcessEvaluatorTest, AnswerWithoutScoreOrErrorFails) {
  EXPECT_THAT(FirstFailure("no_score"),
              HasSubstr("with neither score nor error"));
}

TEST(ProcessEvaluatorTest, PartialLineThenExitFails) {
  EXPECT_THAT(FirstFailure("partial"),
              HasSubstr("after a partial line \"{\\\"id\\\": \""));
}

TEST(ProcessEvaluatorTest, ReportedErrorFailsTheAttemptButKeepsTheChild) {
  auto e = MustCreate(Behave("error"));
  ASSERT_NE(e, nullptr);
  for (int i = 0; i < 2; ++i) {
    absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
    ASSERT_FALSE(score.ok());
    EXPECT_THAT(std::string(score.status().message()),
                HasSubstr("reported: cannot simulate"));
  }
  EXPECT_EQ(e->starts(), 1);
  EXPECT_EQ(e->failures(), 0);
}

TEST(ProcessEvaluatorTest, FlakyProgramIsRestartedAndGoodAnswersGoOn) {
  auto e = MustCreate(Behave("flaky"));
  ASSERT_NE(e, nullptr);
  const std::vector<double> bad = {-1.0, 0.0};
  int ok = 0;
  for (int round = 0; round < 3; ++round) {
    SCOPED_TRACE(absl::StrCat("round ", round));
    absl::StatusOr<double> good = e->Evaluate(kGenes, 1);
    ASSERT_TRUE(good.ok()) << good.status();
    EXPECT_DOUBLE_EQ(*good, 5.25);
    ++ok;
    absl::StatusOr<double> failed = e->Evaluate(bad, 1);
    ASSERT_FALSE(failed.ok());
    EXPECT_THAT(std::string(failed.status().message()),
                HasSubstr("simulated crash"));
  }
  EXPECT_EQ(ok, 3);
  EXPECT_EQ(e->starts(), 3);
  EXPECT_EQ(e->failures(), 3);
}

TEST(ProcessEvaluatorTest, ChildThatExitsBetweenEvaluationsIsRestartedQuietly) {
  auto e = MustCreate(Behave("once"));
  ASSERT_NE(e, nullptr);
  for (int i = 0; i < 3; ++i) {
    absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
    // The exit is seen before the next request is written (it reaps the
    // child), except when the request races the exit; either way no answer is
    // lost silently.
    if (!score.ok()) {
      EXPECT_THAT(std::string(score.status().message()),
                  HasSubstr("exited with status 0"));
      continue;
    }
    EXPECT_DOUBLE_EQ(*score, 5.25);
  }
  EXPECT_GE(e->starts(), 2);
}

TEST(ProcessEvaluatorTest, StderrTailKeepsOnlyTheLastBytes) {
  ProcessEvaluatorOptions o = Behave("crash");
  o.stderr_tail_bytes = 64;
  auto e = MustCreate(std::move(o));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  ASSERT_FALSE(score.ok());
  const std::string message(score.status().message());
  const size_t at = message.find("stderr tail:\n");
  ASSERT_NE(at, std::string::npos) << message;
  EXPECT_LE(message.size() - at - 13, 64u);
  EXPECT_THAT(message, HasSubstr("simulated crash in the model"));
  EXPECT_THAT(message, Not(HasSubstr("about to fail")));
}

TEST(ProcessEvaluatorTest, EpisodesSendOneRequestEachAndAggregate) {
  struct Case {
    skerry::v1::EpisodeAggregate how;
    double expected;  // over episode scores 0, 1, 2, 3
  };
  for (const Case& c : {Case{skerry::v1::AGGREGATE_MEAN, 1.5},
                        Case{skerry::v1::AGGREGATE_MIN, 0.0},
                        Case{skerry::v1::AGGREGATE_MEDIAN, 1.5}}) {
    SCOPED_TRACE(skerry::v1::EpisodeAggregate_Name(c.how));
    ProcessEvaluatorOptions o = Behave("episode");
    o.episodes = 4;
    o.aggregate = c.how;
    auto e = MustCreate(std::move(o));
    ASSERT_NE(e, nullptr);
    absl::StatusOr<double> score = e->Evaluate(kGenes, 42);
    ASSERT_TRUE(score.ok()) << score.status();
    EXPECT_DOUBLE_EQ(*score, c.expected);
    // Each episode got its own seed, not the evaluation seed, and a metric
    // is its mean over the episodes.
    double mean_seed_low = 0;
    for (uint32_t ep = 0; ep < 4; ++ep) {
      mean_seed_low +=
          static_cast<double>(EpisodeStream(42, ep).NextU64() % (1ull << 32)) /
          4;
    }
    EXPECT_NE(e->last_metrics().at("seed_low"), 42.0);
    EXPECT_DOUBLE_EQ(e->last_metrics().at("seed_low"), mean_seed_low);
  }
}

TEST(ProcessEvaluatorTest, ChildHoldsNoDescriptorButItsPipes) {
  auto e = MustCreate(Behave("fds"));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  ASSERT_TRUE(score.ok()) << score.status();
  EXPECT_EQ(*score, 0.0);
}

TEST(ProcessEvaluatorTest, WorkingDirAndEnvironmentReachTheChild) {
  testing::TempDir dir;
  ProcessEvaluatorOptions o = Behave("env", {dir.path()});
  o.working_dir = dir.path();
  o.env["SKERRY_TEST_VALUE"] = "2.5";
  auto e = MustCreate(std::move(o));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  ASSERT_TRUE(score.ok()) << score.status();
  EXPECT_DOUBLE_EQ(*score, 2.5);
}

TEST(ProcessEvaluatorTest, MissingWorkingDirIsAClearError) {
  ProcessEvaluatorOptions o = Behave("good");
  o.working_dir = "/nonexistent/skerry-test";
  auto e = MustCreate(std::move(o));
  ASSERT_NE(e, nullptr);
  absl::StatusOr<double> score = e->Evaluate(kGenes, 1);
  ASSERT_FALSE(score.ok());
  EXPECT_THAT(
      std::string(score.status().message()),
      HasSubstr("cannot enter working_dir \"/nonexistent/skerry-test\""));
}

TEST(ProcessEvaluatorTest, CreateRefusesProgramsItCannotRun) {
  struct Case {
    std::vector<std::string> argv;
    std::string expected;
  };
  for (const Case& c : std::vector<Case>{
           {{}, "evaluator.external.argv: no program given"},
           {{"bin/python3"}, "is a relative path"},
           {{"no-such-program-skerry"}, "not found on the worker's PATH"},
           {{"/nonexistent/evaluate"}, "is not an executable file"},
           {{SKERRY_TEST_PROGRAMS_DIR}, "is not an executable file"}}) {
    SCOPED_TRACE(c.expected);
    ProcessEvaluatorOptions o;
    o.argv = c.argv;
    absl::StatusOr<std::unique_ptr<ProcessEvaluator>> e =
        ProcessEvaluator::Create(o);
    ASSERT_FALSE(e.ok());
    EXPECT_TRUE(absl::IsInvalidArgument(e.status()));
    EXPECT_THAT(std::string(e.status().message()), HasSubstr(c.expected));
  }
}

TEST(ProcessEvaluatorTest, CreateRefusesANonPositiveTimeLimit) {
  ProcessEvaluatorOptions o = Behave("good");
  o.time_limit = absl::ZeroDuration();
  EXPECT_THAT(std::string(ProcessEvaluator::Create(o).status().message()),
              HasSubstr("evaluator.time_limit_seconds"));
}

TEST(ProcessEvaluatorTest, DestructionEndsTheChild) {
  pid_t pid = -1;
  {
    auto e = MustCreate(Behave("good"));
    ASSERT_NE(e, nullptr);
    ASSERT_TRUE(e->Evaluate(kGenes, 1).ok());
    pid = e->child_pid();
    ASSERT_GT(pid, 0);
  }
  EXPECT_TRUE(ProcessGone(pid));
}

}  // namespace
}  // namespace skerry::worker
