#include "cli/validate.h"

#include <memory>
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "cli/client.h"
#include "cli/format.h"
#include "cli/handlers.h"
#include "cli/lineage.h"
#include "grpcpp/client_context.h"

namespace skerry::cli {
namespace {

using skerry::v1::Validation;

const FlagSpec kJsonFlag = {"json", nullptr,
                            "print protobuf's JSON mapping of the answer"};

std::string KeyText(const skerry::v1::GenomeKey& k) {
  return absl::StrCat(k.run_id(), "/", k.island(), "/", k.generation(), "/",
                      k.slot());
}

std::string ReasonName(skerry::v1::ValidationReason reason) {
  return reason == skerry::v1::GENERATION_CHAMPION ? "champion" : "requested";
}

std::string StateName(skerry::v1::ValidationState state) {
  switch (state) {
    case skerry::v1::VALIDATION_DONE:
      return "done";
    case skerry::v1::VALIDATION_FAILED:
      return "failed";
    default:
      return "pending";
  }
}

std::string TrainingText(const Validation& v) {
  switch (v.training_state()) {
    case skerry::v1::EVALUATED:
      return FormatScore(v.training_score());
    case skerry::v1::FAILED:
      return "failed";
    default:
      return "pending";
  }
}

class Calls {
 public:
  Calls(skerry::v1::ValidationService::StubInterface& stub, std::string target)
      : stub_(stub), target_(std::move(target)) {}

  absl::StatusOr<Validation> Validate(const skerry::v1::GenomeRef& ref) {
    skerry::v1::ValidateRequest request;
    *request.mutable_genome() = ref;
    Validation v;
    grpc::ClientContext ctx;
    Deadline(&ctx);
    return Check(stub_.Validate(&ctx, request, &v), "Validate", v);
  }
  absl::StatusOr<Validation> Get(const skerry::v1::GenomeRef& ref) {
    Validation v;
    grpc::ClientContext ctx;
    Deadline(&ctx);
    return Check(stub_.GetValidation(&ctx, ref, &v), "GetValidation", v);
  }
  absl::StatusOr<skerry::v1::ListValidationsResponse> List(uint64_t run_id,
                                                           uint32_t limit) {
    skerry::v1::ListValidationsRequest request;
    request.set_run_id(run_id);
    request.set_limit(limit);
    skerry::v1::ListValidationsResponse response;
    grpc::ClientContext ctx;
    Deadline(&ctx);
    return Check(stub_.ListValidations(&ctx, request, &response),
                 "ListValidations", response);
  }

 private:
  static void Deadline(grpc::ClientContext* ctx) {
    ctx->set_deadline(
        absl::ToChronoTime(absl::Now() + CallDeadline(absl::Seconds(30))));
  }
  template <typename T>
  absl::StatusOr<T> Check(const grpc::Status& s, absl::string_view call,
                          T& value) {
    if (!s.ok()) return FromGrpc(s, call, target_);
    return std::move(value);
  }

  skerry::v1::ValidationService::StubInterface& stub_;
  const std::string target_;
};

int ValidateCommand(const ParsedArgs& args, Calls& calls, Io& io) {
  absl::StatusOr<skerry::v1::GenomeRef> ref =
      ParseGenomeRef(args.positionals[0]);
  if (!ref.ok()) return UsageFailure(ref.status(), args.command, io);
  uint32_t timeout = kDefaultValidateTimeoutSeconds;
  if (args.Has("timeout")) {
    absl::StatusOr<uint32_t> t =
        ParseBoundedUint("--timeout", args.Get("timeout"), 1, 7 * 24 * 3600);
    if (!t.ok()) return UsageFailure(t.status(), args.command, io);
    timeout = *t;
  }
  absl::StatusOr<Validation> v = calls.Validate(*ref);
  if (!v.ok()) return ReportError(v.status(), io);
  // Ask by id from here on: a run's champion may change while we wait.
  skerry::v1::GenomeRef by_id;
  by_id.set_id(v->genome_id());
  const absl::Time give_up = absl::Now() + absl::Seconds(timeout);
  while (!args.Has("no-wait") && v->state() == skerry::v1::VALIDATION_PENDING &&
         absl::Now() < give_up) {
    if (io.sleep) {
      io.sleep(kValidatePollInterval);
    } else {
      absl::SleepFor(kValidatePollInterval);
    }
    v = calls.Get(by_id);
    if (!v.ok()) return ReportError(v.status(), io);
  }
  if (args.Has("json")) return PrintJson(*v, io);
  *io.out << FormatValidation(*v, io.zone);
  if (v->state() == skerry::v1::VALIDATION_FAILED) return kExitFailure;
  if (v->state() == skerry::v1::VALIDATION_PENDING && !args.Has("no-wait")) {
    *io.err << "skerry: validation of genome " << v->genome_id()
            << " still pending after " << timeout
            << " s (are workers connected?); it stays queued: ask again "
               "later with the same command\n";
    return kExitFailure;
  }
  return kExitOk;
}

int ListCommand(const ParsedArgs& args, Calls& calls, Io& io) {
  absl::StatusOr<uint64_t> run = ParseRunId(args.positionals[0]);
  if (!run.ok()) return UsageFailure(run.status(), args.command, io);
  uint32_t limit = 100;
  if (args.Has("limit")) {
    absl::StatusOr<uint32_t> n =
        ParseBoundedUint("--limit", args.Get("limit"), 1, 10000);
    if (!n.ok()) return UsageFailure(n.status(), args.command, io);
    limit = *n;
  }
  absl::StatusOr<skerry::v1::ListValidationsResponse> list =
      calls.List(*run, limit);
  if (!list.ok()) return ReportError(list.status(), io);
  if (args.Has("json")) return PrintJson(*list, io);
  *io.out << FormatValidationList(
      {list->validations().begin(), list->validations().end()});
  return kExitOk;
}

}  // namespace

std::vector<CommandSpec> ValidationCommandSpecs() {
  return {
      {"validate",
       {"GENOME"},
       {{"no-wait", nullptr, "ask, print the state and return at once"},
        {"timeout", "SECONDS",
         "wait at most this long for the fleet (default 300)"},
        kJsonFlag},
       "score a genome on its run's held-out validation cases",
       "Asks the fleet to score GENOME on the held-out validation cases its "
       "run declares (evaluator.validation in the spec), waits for the "
       "answer and prints it beside the training score. GENOME is ID, #ID, "
       "RUN/ISLAND/GENERATION/SLOT or RUN/best. A genome is validated once; "
       "asking again prints the stored validation. Exit 1 when the "
       "validation failed or is still pending at the timeout.",
       ValidateHandler},
      {"validations",
       {"RUN"},
       {{"limit", "N", "at most N, newest first (default 100)"}, kJsonFlag},
       "list a run's validations, newest first",
       "Lists the held-out validations of a run: each generation's champion "
       "(as the spec's validation.champions says) and the genomes people "
       "asked for, with training and validation scores.",
       ValidationsHandler},
  };
}

int ValidateGenomeCommand(const ParsedArgs& args,
                          skerry::v1::ValidationService::StubInterface& stub,
                          Io& io) {
  Calls calls(stub, args.coordinator);
  return ValidateCommand(args, calls, io);
}

int ValidationsCommand(const ParsedArgs& args,
                       skerry::v1::ValidationService::StubInterface& stub,
                       Io& io) {
  Calls calls(stub, args.coordinator);
  return ListCommand(args, calls, io);
}

std::string FormatValidation(const Validation& v, absl::TimeZone zone) {
  std::vector<std::vector<std::string>> fields = {
      {"genome", absl::StrCat(v.genome_id(), " (", KeyText(v.key()), ")")},
      {"training", TrainingText(v)},
      {"validation", FormatValidationState(v)},
      {"reason", ReasonName(v.reason())},
      {"requested", FormatTimestamp(v.requested_unix_ms(), zone)},
  };
  if (!v.requested_by().empty()) fields.push_back({"by", v.requested_by()});
  if (v.completed_unix_ms() != 0) {
    fields.push_back(
        {"completed", FormatTimestamp(v.completed_unix_ms(), zone)});
  }
  if (v.copied_from() != 0) {
    fields.push_back(
        {"copied from", absl::StrCat("validation ", v.copied_from(),
                                     " (same genes, one generation earlier)")});
  }
  std::string out;
  for (const auto& f : fields) {
    absl::StrAppend(&out, f[0], ":", std::string(13 - f[0].size(), ' '), f[1],
                    "\n");
  }
  return out;
}

std::string FormatValidationList(const std::vector<Validation>& list) {
  if (list.empty()) return "no validations yet\n";
  std::vector<std::vector<std::string>> rows;
  for (const Validation& v : list) {
    rows.push_back(
        {absl::StrCat(v.id()), absl::StrCat(v.genome_id()), KeyText(v.key()),
         ReasonName(v.reason()), StateName(v.state()), TrainingText(v),
         v.state() == skerry::v1::VALIDATION_DONE ? FormatScore(v.score())
                                                  : "-",
         absl::StrCat(v.cases())});
  }
  return FormatTable({"ID", "GENOME", "KEY", "REASON", "STATE", "TRAINING",
                      "VALIDATION", "CASES"},
                     rows, {0, 1, 5, 6, 7});
}

}  // namespace skerry::cli
