// The request bounds (server/api/request_bounds.h), the bounded error
// messages (server/api/grpc_status.h, common/quote.h) and the spec budgets
// (common/spec.h SpecBudgets) with the coordinator flags that set them.
#include "server/api/request_bounds.h"

#include <set>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/quote.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/api/grpc_status.h"
#include "server/coordinator_flags.h"
#include "skerry/v1/access.pb.h"
#include "skerry/v1/fleet.pb.h"
#include "skerry/v1/runs.pb.h"
#include "tests/unit/common/host_port_cases.h"

namespace skerry::api {
namespace {

using google::protobuf::Descriptor;
using google::protobuf::FieldDescriptor;
using ::testing::HasSubstr;

// Every string, bytes and repeated field reachable from `d`, except inside
// messages whose field is bounded elsewhere (the run spec).
void Collect(const Descriptor* d, std::set<const Descriptor*>* seen,
             std::vector<const FieldDescriptor*>* out) {
  if (!seen->insert(d).second) return;
  for (int i = 0; i < d->field_count(); ++i) {
    const FieldDescriptor* f = d->field(i);
    const bool text = f->type() == FieldDescriptor::TYPE_STRING ||
                      f->type() == FieldDescriptor::TYPE_BYTES;
    if (f->is_repeated() || text) out->push_back(f);
    const FieldBound* b = FindBound(f);
    if (b != nullptr && b->elsewhere[0] != '\0') continue;
    if (f->cpp_type() == FieldDescriptor::CPPTYPE_MESSAGE) {
      Collect(f->message_type(), seen, out);
    }
  }
}

TEST(RequestBoundsTest, EveryStringAndListOfEveryRequestHasABound) {
  const auto* pool = google::protobuf::DescriptorPool::generated_pool();
  std::set<const Descriptor*> seen;
  std::vector<const FieldDescriptor*> fields;
  int methods = 0;
  for (const char* service :
       {"skerry.v1.FleetService", "skerry.v1.RunService",
        "skerry.v1.LineageService", "skerry.v1.AdminService",
        "skerry.v1.ValidationService", "skerry.v1.AccessService"}) {
    const google::protobuf::ServiceDescriptor* s =
        pool->FindServiceByName(service);
    ASSERT_NE(s, nullptr) << service;
    for (int i = 0; i < s->method_count(); ++i, ++methods) {
      Collect(s->method(i)->input_type(), &seen, &fields);
    }
  }
  EXPECT_GE(methods, 25);
  EXPECT_GE(fields.size(), 10u);
  for (const FieldDescriptor* f : fields) {
    EXPECT_NE(FindBound(f), nullptr)
        << f->full_name()
        << " has no row in server/api/request_bounds.cc (and "
           "docs/protocol.md, Bounds)";
  }
}

// The one rule for client-chosen request ids of SubmitRun, ForkRun and
// SubmitSeries (each of them used to spell it out).
TEST(RequestBoundsTest, RequestIdsArePrintableWithoutSpacesAndBounded) {
  EXPECT_TRUE(CheckRequestId("").ok());
  EXPECT_TRUE(CheckRequestId(std::string(kMaxRequestIdBytes, 'a')).ok());
  for (const std::string& bad :
       {std::string(kMaxRequestIdBytes + 1, 'a'), std::string("a b"),
        std::string("tab\there"), std::string("\xc3\xa9")}) {
    absl::Status s = CheckRequestId(bad);
    EXPECT_TRUE(absl::IsInvalidArgument(s)) << bad;
    EXPECT_THAT(s.message(), HasSubstr("request_id"));
  }
}

TEST(RequestBoundsTest, EveryRowNamesARealField) {
  const auto* pool = google::protobuf::DescriptorPool::generated_pool();
  for (const FieldBound& b : RequestBounds()) {
    SCOPED_TRACE(b.field);
    const FieldDescriptor* f = pool->FindFieldByName(b.field);
    ASSERT_NE(f, nullptr);
    if (b.elsewhere[0] != '\0') continue;
    EXPECT_EQ(f->is_repeated(), b.max_entries > 0);
  }
}

TEST(RequestBoundsTest, FieldsAtTheirBoundPassAndOneMoreIsRefusedByName) {
  skerry::v1::JoinRequest join;
  join.set_name(std::string(256, 'n'));
  for (int i = 0; i < 1000; ++i) join.add_evaluators(std::string(256, 'e'));
  EXPECT_TRUE(CheckRequestBounds(join).ok());
  join.set_name(std::string(257, 'n'));
  absl::Status s = CheckRequestBounds(join);
  EXPECT_TRUE(absl::IsInvalidArgument(s));
  EXPECT_THAT(std::string(s.message()), HasSubstr("name: at most 256 bytes"));
  join.set_name("n");
  join.set_evaluators(999, std::string(257, 'e'));
  s = CheckRequestBounds(join);
  EXPECT_THAT(std::string(s.message()), HasSubstr("evaluators[999]"));
  join.set_evaluators(999, "e");
  join.add_evaluators("one too many");
  s = CheckRequestBounds(join);
  EXPECT_THAT(std::string(s.message()),
              HasSubstr("evaluators: at most 1000 entries, got 1001"));
}

TEST(RequestBoundsTest, ResultErrorTextAndTheSpecAreLeftToTheirHandlers) {
  skerry::v1::ReportRequest report;
  report.add_results()->set_error(std::string(2 << 20, 'x'));
  EXPECT_TRUE(CheckRequestBounds(report).ok())
      << "FleetService.Report rejects that result alone";
  skerry::v1::SubmitRunRequest submit;
  submit.mutable_spec()->set_name(std::string(1 << 20, 'n'));
  EXPECT_TRUE(CheckRequestBounds(submit).ok()) << "the budgets' job";
}

TEST(RequestBoundsTest, UnknownFieldsAreBounded) {
  skerry::v1::LeaseRequest lease;
  lease.GetReflection()->MutableUnknownFields(&lease)->AddLengthDelimited(
      99, std::string(kMaxUnknownBytes, 'u'));
  absl::Status s = CheckRequestBounds(lease);
  EXPECT_TRUE(absl::IsInvalidArgument(s));
  EXPECT_THAT(std::string(s.message()), HasSubstr("unknown fields"));
  skerry::v1::LeaseRequest small;
  small.GetReflection()->MutableUnknownFields(&small)->AddVarint(99, 1);
  EXPECT_TRUE(CheckRequestBounds(small).ok()) << "a newer client's field";
}

// ---- Error messages stay short ----

TEST(QuoteTest, LongInputIsQuotedAsAPrefixWithItsLength) {
  EXPECT_EQ(QuotePrefix("sphere"), "\"sphere\"");
  const std::string quoted = QuotePrefix(std::string(1 << 20, 'f'));
  EXPECT_EQ(quoted,
            absl::StrCat("\"", std::string(64, 'f'), "...\" (1048576 bytes)"));
  // Never cut inside a UTF-8 sequence: "é" is C3 A9.
  std::string accents;
  for (int i = 0; i < 40; ++i) accents += "\xc3\xa9";
  EXPECT_EQ(Utf8Prefix(accents, 65).size(), 64u);
  EXPECT_EQ(Utf8Prefix(accents, 64).size(), 64u);
}

TEST(QuoteTest, GrpcStatusMessageIsCappedAtAUtf8Boundary) {
  std::string message = "x";
  for (int i = 0; i < 1 << 19; ++i) message += "\xc3\xa9";
  grpc::Status s = ToGrpc(absl::InvalidArgumentError(message));
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_LE(s.error_message().size(), kMaxStatusMessageBytes + 40);
  EXPECT_THAT(s.error_message(), HasSubstr("more bytes cut]"));
  EXPECT_EQ(ToGrpc(absl::NotFoundError("short")).error_message(), "short");
}

// ---- Spec budgets and their flags ----

skerry::v1::RunSpec Spec(uint32_t population, uint32_t length,
                         uint32_t islands) {
  skerry::v1::RunSpec spec;
  spec.set_genome_length(length);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(population);
  spec.mutable_islands()->set_count(islands);
  spec.mutable_stop()->set_max_generations(2);
  return spec;
}

TEST(SpecBudgetTest, GenerationAtTheBudgetPassesAndOneGenomeMoreIsRefused) {
  SpecBudgets b;
  b.max_generation_genes = 4 * 100 * 50;  // 4 islands of 100 x 50 genes
  EXPECT_TRUE(PrepareSpec(Spec(100, 50, 4), b).ok());
  skerry::v1::RunSpec bigger = Spec(100, 50, 4);
  bigger.mutable_islands()->add_population_sizes(100);
  bigger.mutable_islands()->add_population_sizes(100);
  bigger.mutable_islands()->add_population_sizes(100);
  bigger.mutable_islands()->add_population_sizes(101);
  absl::StatusOr<skerry::v1::RunSpec> s = PrepareSpec(bigger, b);
  ASSERT_FALSE(s.ok());
  EXPECT_TRUE(absl::IsInvalidArgument(s.status()));
  EXPECT_THAT(std::string(s.status().message()),
              HasSubstr("20050 exceeds the coordinator's budget of 20000 "
                        "(--max-generation-genes)"));
}

// Regression (issue 14): a natural ES run of 10^6 genes and 200 samples was
// refused as 201 x 10^6 genes per generation, though the coordinator holds
// its samples as recipes: it holds 4 vectors per island (the centre, its
// genome, Adam's two moments). Without distribution genomes (runs stored
// before them) the samples are genes, and counted so.
TEST(SpecBudgetTest, NaturalEsSamplesHeldAsRecipesCountAsTheirIslandsVectors) {
  SpecBudgets b;
  b.max_generation_genes = 2 * 4 * 1000000;  // 2 islands' 4 vectors
  skerry::v1::RunSpec es = Spec(2, 1000000, 2);
  es.clear_ga();
  es.mutable_strategy()->mutable_natural_es()->set_population_size(200);
  EXPECT_TRUE(PrepareSpec(es, b).ok());
  b.max_generation_genes -= 1;
  absl::StatusOr<skerry::v1::RunSpec> over = PrepareSpec(es, b);
  ASSERT_FALSE(over.ok());
  EXPECT_THAT(std::string(over.status().message()),
              HasSubstr("genes held per generation (2 islands x 4 vectors"));
  b.max_generation_genes = 2 * 4 * 1000000;
  es.mutable_strategy()->set_distribution_genomes(false);
  absl::StatusOr<skerry::v1::RunSpec> as_genes = PrepareSpec(es, b);
  ASSERT_FALSE(as_genes.ok());
  EXPECT_THAT(std::string(as_genes.status().message()),
              HasSubstr("genes per generation (400 genomes over all islands"));
}

TEST(SpecBudgetTest, EachBudgetNamesItsFlagAndZeroMeansNone) {
  const SpecBudgets none;
  skerry::v1::RunSpec huge = Spec(1000000, 1000000, 1);
  EXPECT_TRUE(PrepareSpec(huge, none).ok()) << "no budget: ranges only";
  const SpecBudgets machine = DefaultSpecBudgets(uint64_t{8} << 30);
  EXPECT_EQ(machine.max_generation_genes, uint64_t{8} << 20);
  EXPECT_THAT(std::string(PrepareSpec(huge, machine).status().message()),
              HasSubstr("--max-generation-genes"));
  EXPECT_EQ(DefaultSpecBudgets(0).max_generation_genes, uint64_t{1} << 20)
      << "a floor for machines that do not say";

  skerry::v1::RunSpec named = Spec(10, 3, 1);
  named.set_name(std::string(257, 'n'));
  EXPECT_THAT(std::string(PrepareSpec(named, machine).status().message()),
              HasSubstr("name bytes: 257 exceeds the coordinator's budget of "
                        "256 (--max-name-bytes)"));
  skerry::v1::RunSpec external = Spec(10, 3, 1);
  external.mutable_evaluator()->mutable_external()->add_argv(
      std::string(1 << 20, 'a'));
  EXPECT_THAT(std::string(PrepareSpec(external, machine).status().message()),
              HasSubstr("(--max-evaluator-bytes)"));
  skerry::v1::RunSpec crowd = Spec(1000000, 1, 2);  // 2 islands of 10^6
  EXPECT_THAT(std::string(PrepareSpec(crowd, machine).status().message()),
              HasSubstr("genomes per generation (over all islands): 2000000 "
                        "exceeds the coordinator's budget of 1000000 "
                        "(--max-generation-genomes)"));
  EXPECT_TRUE(PrepareSpec(Spec(1000000, 1, 1), machine).ok())
      << "one island of the largest population";
  SpecBudgets small_tasks;
  small_tasks.max_task_bytes = 8 * 1000;
  EXPECT_THAT(
      std::string(
          PrepareSpec(Spec(10, 1000, 1), small_tasks).status().message()),
      HasSubstr("(--max-task-bytes)"));
}

absl::StatusOr<server::CoordinatorFlags> Parse(std::vector<const char*> args) {
  args.insert(args.begin(), "skerry-coordinator");
  return server::ParseCoordinatorFlags(static_cast<int>(args.size()),
                                       args.data());
}

TEST(SpecBudgetTest, BudgetFlagsSetTheCoordinatorsBudgets) {
  absl::StatusOr<server::CoordinatorFlags> f =
      Parse({"--db", "x.db", "--max-generation-genes", "5000",
             "--max-evaluator-bytes", "4096", "--max-name-bytes", "32",
             "--max-task-bytes", "65536", "--max-generation-genomes", "77"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->options.budgets.max_generation_genes, 5000u);
  EXPECT_EQ(f->options.budgets.max_evaluator_bytes, 4096u);
  EXPECT_EQ(f->options.budgets.max_name_bytes, 32u);
  EXPECT_EQ(f->options.budgets.max_task_bytes, 65536u);
  EXPECT_EQ(f->options.budgets.max_generation_genomes, 77u);
  absl::StatusOr<server::CoordinatorFlags> defaults = Parse({"--db", "x.db"});
  ASSERT_TRUE(defaults.ok());
  EXPECT_GE(defaults->options.budgets.max_generation_genes, uint64_t{1} << 20);
  EXPECT_EQ(defaults->options.budgets.max_name_bytes, 256u);
  for (std::vector<const char*> bad :
       {std::vector<const char*>{"--max-name-bytes", "0"},
        {"--max-name-bytes", "-3"},
        {"--max-generation-genes", "lots"},
        {"--max-task-bytes", "67108865"}}) {
    SCOPED_TRACE(absl::StrCat(bad[0], " ", bad[1]));
    bad.insert(bad.begin(), {"--db", "x.db"});
    absl::StatusOr<server::CoordinatorFlags> refused = Parse(bad);
    ASSERT_FALSE(refused.ok());
    EXPECT_THAT(std::string(refused.status().message()), HasSubstr(bad[2]));
  }
}

// Regression: the coordinator took --listen unchecked (gRPC failed later
// with no word on the flag); it now follows the same HOST:PORT rule as the
// worker and the CLI, with port 0 for a free port.
TEST(CoordinatorFlagsTest, ListenIsCheckedAsHostPort) {
  for (const char* good : {"127.0.0.1:0", "[::1]:7431", "0.0.0.0:7431"}) {
    SCOPED_TRACE(good);
    absl::StatusOr<server::CoordinatorFlags> f =
        Parse({"--db", "x.db", "--listen", good});
    ASSERT_TRUE(f.ok()) << f.status();
    EXPECT_EQ(f->options.listen_address, good);
  }
  for (const char* bad : {"::1:7431", "a b:1", "h:65536", "nohost", "h:"}) {
    SCOPED_TRACE(bad);
    absl::StatusOr<server::CoordinatorFlags> f =
        Parse({"--db", "x.db", "--listen", bad});
    ASSERT_FALSE(f.ok());
    EXPECT_THAT(std::string(f.status().message()), HasSubstr("--listen"));
    EXPECT_THAT(std::string(f.status().message()), HasSubstr(bad));
  }
  absl::StatusOr<server::CoordinatorFlags> http =
      Parse({"--db", "x.db", "--http", "a b:80"});
  ASSERT_FALSE(http.ok());
  EXPECT_THAT(std::string(http.status().message()), HasSubstr("--http"));
}

// Regression: the coordinator refused --name=value, which the worker and
// the CLI take.
TEST(CoordinatorFlagsTest, NameEqualsValueIsAccepted) {
  absl::StatusOr<server::CoordinatorFlags> f =
      Parse({"--db=x.db", "--listen=127.0.0.1:0", "--lease-seconds=2.5",
             "--max-name-bytes=32"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->options.db_path, "x.db");
  EXPECT_EQ(f->options.listen_address, "127.0.0.1:0");
  EXPECT_EQ(f->options.lease, absl::Seconds(2.5));
  EXPECT_EQ(f->options.budgets.max_name_bytes, 32u);
}

TEST(CoordinatorFlagsTest, FlagWithoutValueRefusesEqualsValue) {
  absl::StatusOr<server::CoordinatorFlags> f =
      Parse({"--db", "x.db", "--version=yes"});
  ASSERT_FALSE(f.ok());
  EXPECT_THAT(std::string(f.status().message()), HasSubstr("takes no value"));
}

// The shared HOST:PORT table (tests/unit/common/host_port_cases.h) through
// --listen and --http: a listener may ask for port 0.
TEST(CoordinatorFlagsTest, ListenAndHttpFollowTheSharedHostPortTable) {
  for (const skerry::testdata::HostPortCase& c :
       skerry::testdata::HostPortCases()) {
    for (const char* flag : {"--listen", "--http"}) {
      SCOPED_TRACE(absl::StrCat(flag, " ", c.text));
      absl::StatusOr<server::CoordinatorFlags> f =
          Parse({"--db", "x.db", flag, c.text});
      ASSERT_EQ(f.ok(), c.listener_ok) << f.status();
      if (f.ok()) {
        EXPECT_EQ(std::string(flag) == "--listen" ? f->options.listen_address
                                                  : f->options.http_address,
                  c.text);
      } else {
        EXPECT_THAT(std::string(f.status().message()),
                    HasSubstr(absl::StrCat(flag, ": expected HOST:PORT")));
        EXPECT_THAT(std::string(f.status().message()), HasSubstr(c.why));
      }
    }
  }
}

}  // namespace
}  // namespace skerry::api
