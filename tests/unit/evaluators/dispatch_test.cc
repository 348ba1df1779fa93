// Where evaluations run: the worker's dispatch (external and isolate go to a
// child process, the rest in-process), the evaluator host that serves
// built-ins over the protocol, exceptions turned into failed attempts, and the
// spec rules for external evaluators.
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "common/evaluator.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/process.h"
#include "worker/evaluator_host.h"
#include "worker/process_evaluator.h"
#include "worker/task_evaluation.h"

namespace skerry::worker {
namespace {

using skerry::v1::EvaluatorSpec;
using skerry::v1::Task;
using ::testing::HasSubstr;

EvaluatorSpec Sphere() {
  EvaluatorSpec spec;
  spec.mutable_builtin()->set_function("sphere");
  return spec;
}

EvaluatorSpec External(const std::string& mode) {
  EvaluatorSpec spec;
  auto* ext = spec.mutable_external();
  ext->add_argv("python3");
  ext->add_argv(std::string(SKERRY_TEST_PROGRAMS_DIR) + "/behave.py");
  ext->add_argv(mode);
  spec.set_time_limit_seconds(30);
  return spec;
}

Task MakeTask(const EvaluatorSpec& spec, std::vector<double> genes,
              uint64_t id) {
  Task task;
  task.set_task_id(id);
  task.set_attempt(1);
  task.set_eval_seed(5);
  *task.mutable_evaluator() = spec;
  for (double g : genes) task.add_genes(g);
  return task;
}

// ---- The evaluator host ----

TEST(EvaluatorHostTest, AnswersEachRequestWithItsIdAndTheBuiltinsScore) {
  std::istringstream in(
      "{\"id\":\"4\",\"genes\":[1,-2,0.5]}\n"
      "\n"
      "{\"id\":5,\"genes\":[3]}\n");
  std::ostringstream out;
  ASSERT_TRUE(ServeEvaluations(Sphere(), in, out).ok());
  // Sphere: sum x_i^2 (Jamil & Yang 2013); the built-in's metrics travel
  // too: the distance to the minimiser 0 is sqrt(5.25) and 3. (Map order in
  // protobuf's JSON is not fixed: each field is looked for on its own.)
  std::vector<std::string> lines =
      absl::StrSplit(out.str(), '\n', absl::SkipEmpty());
  ASSERT_EQ(lines.size(), 2u) << out.str();
  EXPECT_THAT(
      lines[0],
      ::testing::AllOf(HasSubstr("\"id\":\"4\""), HasSubstr("\"score\":5.25"),
                       HasSubstr("\"distance_to_optimum\":2.29128784747792"),
                       HasSubstr("\"genes_outside_domain\":0"),
                       HasSubstr("\"error\":\"\"")));
  EXPECT_THAT(lines[1], ::testing::AllOf(
                            HasSubstr("\"id\":\"5\""), HasSubstr("\"score\":9"),
                            HasSubstr("\"distance_to_optimum\":3"),
                            HasSubstr("\"genes_outside_domain\":0")));
}

TEST(EvaluatorHostTest, BadLineAndEvaluatorErrorsBecomeResponseErrors) {
  std::istringstream in("not json\n{\"id\":\"2\",\"genes\":[]}\n");
  std::ostringstream out;
  ASSERT_TRUE(ServeEvaluations(Sphere(), in, out).ok());
  const std::string text = out.str();
  EXPECT_THAT(text, HasSubstr("{\"id\":\"0\""));
  EXPECT_THAT(text, HasSubstr("not an EvaluationRequest in JSON"));
  EXPECT_THAT(text, HasSubstr("{\"id\":\"2\""));
  EXPECT_THAT(text, HasSubstr("sphere: genome has no genes"));
}

TEST(EvaluatorHostTest, UnknownBuiltinIsReportedInEveryResponse) {
  EvaluatorSpec spec;
  spec.mutable_builtin()->set_function("no_such_function");
  std::istringstream in("{\"id\":\"1\",\"genes\":[1]}\n");
  std::ostringstream out;
  ASSERT_TRUE(ServeEvaluations(spec, in, out).ok());
  EXPECT_THAT(out.str(), HasSubstr("unknown function"));
}

TEST(EvaluatorHostTest, DecodeHostSpecRejectsBadInput) {
  EXPECT_THAT(std::string(DecodeHostSpec("***").status().message()),
              HasSubstr("not valid base64"));
  EXPECT_THAT(
      std::string(
          DecodeHostSpec(absl::Base64Escape("\xff\xff")).status().message()),
      HasSubstr("not an EvaluatorSpec"));
  EXPECT_THAT(
      std::string(DecodeHostSpec(
                      absl::Base64Escape(External("good").SerializeAsString()))
                      .status()
                      .message()),
      HasSubstr("cannot be hosted"));
  absl::StatusOr<EvaluatorSpec> ok =
      DecodeHostSpec(absl::Base64Escape(Sphere().SerializeAsString()));
  ASSERT_TRUE(ok.ok()) << ok.status();
  EXPECT_EQ(ok->builtin().function(), "sphere");
}

TEST(EvaluatorHostTest, HostModeRefusesBadArgumentsWithExitCode2) {
  testing::CommandResult r =
      testing::RunCommand({SKERRY_WORKER_BIN, "--evaluator-host"});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_THAT(r.output, HasSubstr("--evaluator-spec=BASE64 is required"));
  r = testing::RunCommand(
      {SKERRY_WORKER_BIN, "--evaluator-host", "--evaluator-spec=!!"});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_THAT(r.output, HasSubstr("not valid base64"));
}

// ---- Dispatch ----

TEST(DispatchTest, IsolatedBuiltinRunsInTheHostWithTheSameScore) {
  EvaluatorSpec spec = Sphere();
  spec.set_isolate(true);
  spec.set_time_limit_seconds(30);
  EvaluatorFactory factory =
      WorkerEvaluatorFactory({SKERRY_WORKER_BIN, "--evaluator-host"});
  absl::StatusOr<std::unique_ptr<Evaluator>> e = factory(spec);
  ASSERT_TRUE(e.ok()) << e.status();
  auto* process = dynamic_cast<ProcessEvaluator*>(e->get());
  ASSERT_NE(process, nullptr) << "isolate must run in a child process";
  const std::vector<double> genes = {0.1, -0.25, 3.0};
  absl::StatusOr<double> isolated = (*e)->Evaluate(genes, 9);
  ASSERT_TRUE(isolated.ok()) << isolated.status();
  EXPECT_GT(process->child_pid(), 0);
  // The same bits as in-process: JSON carries doubles exactly.
  EXPECT_EQ(*isolated, FindBuiltin("sphere")->fn(genes));
}

TEST(DispatchTest, PlainBuiltinStaysInProcess) {
  absl::StatusOr<std::unique_ptr<Evaluator>> e =
      WorkerEvaluatorFactory({})(Sphere());
  ASSERT_TRUE(e.ok()) << e.status();
  EXPECT_EQ(dynamic_cast<ProcessEvaluator*>(e->get()), nullptr);
}

TEST(DispatchTest, ProcessOptionsForSpecCarriesArgvEnvAndEpisodes) {
  EvaluatorSpec spec = External("good");
  spec.mutable_external()->set_working_dir("/tmp");
  (*spec.mutable_external()->mutable_env())["A"] = "1";
  spec.mutable_episodes()->set_count(3);
  spec.mutable_episodes()->set_aggregate(skerry::v1::AGGREGATE_MIN);
  absl::StatusOr<ProcessEvaluatorOptions> o = ProcessOptionsForSpec(spec, {});
  ASSERT_TRUE(o.ok()) << o.status();
  EXPECT_EQ(o->argv.size(), 3u);
  EXPECT_EQ(o->working_dir, "/tmp");
  EXPECT_EQ(o->env.at("A"), "1");
  EXPECT_EQ(o->episodes, 3u);
  EXPECT_EQ(o->aggregate, skerry::v1::AGGREGATE_MIN);
  EXPECT_EQ(o->time_limit, absl::Seconds(30));

  EvaluatorSpec isolated = Sphere();
  isolated.set_isolate(true);
  o = ProcessOptionsForSpec(isolated, {"/bin/host", "--evaluator-host"});
  ASSERT_TRUE(o.ok()) << o.status();
  ASSERT_EQ(o->argv.size(), 3u);
  EXPECT_EQ(o->argv[0], "/bin/host");
  EXPECT_EQ(o->episodes, 1u) << "the host runs a built-in's own episodes";
  absl::StatusOr<EvaluatorSpec> passed = DecodeHostSpec(
      o->argv[2].substr(std::string("--evaluator-spec=").size()));
  ASSERT_TRUE(passed.ok()) << passed.status();
  EXPECT_EQ(passed->builtin().function(), "sphere");
  EXPECT_FALSE(passed->isolate());
}

TEST(DispatchTest, ExternalTaskFailuresNeverStopTheNextTasks) {
  EvaluatorCache cache(nullptr);  // the worker's own dispatch
  const EvaluatorSpec spec = External("flaky");
  for (int i = 0; i < 3; ++i) {
    SCOPED_TRACE(absl::StrCat("round ", i));
    skerry::v1::TaskResult bad =
        EvaluateTask(MakeTask(spec, {-1.0}, 10 + i), cache, Clock::Real());
    EXPECT_EQ(bad.task_id(), 10u + i);
    EXPECT_THAT(bad.error(), HasSubstr("simulated crash in the model"));
    skerry::v1::TaskResult good =
        EvaluateTask(MakeTask(spec, {1.0, 2.0}, 20 + i), cache, Clock::Real());
    EXPECT_EQ(good.error(), "");
    EXPECT_DOUBLE_EQ(good.score(), 5.0);
  }
}

TEST(DispatchTest, ExternalProgramNotOnPathFailsTheTaskClearly) {
  EvaluatorCache cache(nullptr);
  EvaluatorSpec spec;
  spec.mutable_external()->add_argv("skerry-no-such-evaluator");
  skerry::v1::TaskResult r =
      EvaluateTask(MakeTask(spec, {1.0}, 1), cache, Clock::Real());
  EXPECT_THAT(r.error(), HasSubstr("\"skerry-no-such-evaluator\" not found on "
                                   "the worker's PATH"));
}

TEST(DispatchTest, InProcessExceptionsBecomeFailedAttempts) {
  class Throwing : public Evaluator {
   public:
    absl::StatusOr<double> Evaluate(absl::Span<const double>,
                                    uint64_t) override {
      throw std::runtime_error("model diverged");
    }
  };
  EvaluatorCache cache(
      [](const EvaluatorSpec&) -> absl::StatusOr<std::unique_ptr<Evaluator>> {
        return std::unique_ptr<Evaluator>(new Throwing);
      });
  skerry::v1::TaskResult r =
      EvaluateTask(MakeTask(Sphere(), {1.0}, 3), cache, Clock::Real());
  EXPECT_EQ(r.task_id(), 3u);
  EXPECT_EQ(r.error(), "evaluator threw: model diverged");

  EvaluatorCache throwing_factory(
      [](const EvaluatorSpec&) -> absl::StatusOr<std::unique_ptr<Evaluator>> {
        throw 42;
      });
  r = EvaluateTask(MakeTask(Sphere(), {1.0}, 4), throwing_factory,
                   Clock::Real());
  EXPECT_EQ(r.error(), "evaluator threw a non-standard exception");
}

TEST(DispatchTest, MakeEvaluatorRefusesExternalInProcess) {
  absl::StatusOr<std::unique_ptr<Evaluator>> e =
      MakeEvaluator(External("good"));
  ASSERT_FALSE(e.ok());
  EXPECT_THAT(std::string(e.status().message()),
              HasSubstr("external evaluators run in a child process of the "
                        "worker"));
}

// ---- Spec rules ----

absl::StatusOr<skerry::v1::RunSpec> Prepare(const std::string& text) {
  absl::StatusOr<skerry::v1::RunSpec> spec = ParseSpecText(text, "t.spec");
  if (!spec.ok()) return spec.status();
  return PrepareSpec(*spec);
}

TEST(ExternalSpecTest, ValidExternalSpecPassesWithoutCheckingThePath) {
  absl::StatusOr<skerry::v1::RunSpec> spec = Prepare(R"pb(
    genome_length: 4
    lower_bound: -2
    upper_bound: 2
    evaluator { external { argv: "not-installed-here" argv: "x" } }
  )pb");
  ASSERT_TRUE(spec.ok()) << spec.status();
  EXPECT_EQ(spec->evaluator().time_limit_seconds(), 60);
  EXPECT_EQ(spec->objective(), skerry::v1::MINIMIZE);
}

TEST(ExternalSpecTest, BadExternalSpecsNameTheField) {
  struct Case {
    std::string text;
    std::string expected;
  };
  for (const Case& c : std::vector<Case>{
           {"genome_length: 4 lower_bound: -2 upper_bound: 2 "
            "evaluator { external { } }",
            "evaluator.external.argv: no program given"},
           {"genome_length: 4 lower_bound: -2 upper_bound: 2 "
            "evaluator { external { argv: \"\" } }",
            "an empty argv[0]"},
           {"genome_length: 4 lower_bound: -2 upper_bound: 2 "
            "evaluator { external { argv: \"p\" env { key: \"A=B\" value: "
            "\"1\" } } }",
            "evaluator.external.env"},
           {"genome_length: 4 lower_bound: -2 upper_bound: 2 "
            "evaluator { external { argv: \"p\" } episodes { count: 1001 } }",
            "evaluator.episodes.count"},
           {"genome_length: 4 evaluator { external { argv: \"p\" } }",
            "lower_bound: not set"},
       }) {
    SCOPED_TRACE(c.text);
    absl::StatusOr<skerry::v1::RunSpec> spec = Prepare(c.text);
    ASSERT_FALSE(spec.ok());
    EXPECT_THAT(std::string(spec.status().message()), HasSubstr(c.expected));
  }
}

}  // namespace
}  // namespace skerry::worker
