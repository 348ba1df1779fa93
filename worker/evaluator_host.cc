#include "worker/evaluator_host.h"

#include <cmath>
#include <cstdio>
#include <exception>
#include <iostream>
#include <map>
#include <memory>
#include <utility>

#include "absl/strings/escaping.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/evaluator.h"
#include "google/protobuf/util/json_util.h"
#include "skerry/v1/evaluator.pb.h"

namespace skerry::worker {
namespace {

using skerry::v1::EvaluationRequest;
using skerry::v1::EvaluationResponse;

constexpr char kSpecFlag[] = "--evaluator-spec=";

// Evaluates one request; never throws.
EvaluationResponse Answer(
    const absl::StatusOr<std::unique_ptr<Evaluator>>& evaluator,
    const EvaluationRequest& request) {
  EvaluationResponse response;
  response.set_id(request.id());
  if (!evaluator.ok()) {
    response.set_error(std::string(evaluator.status().message()));
    return response;
  }
  absl::StatusOr<double> score;
  try {
    const auto genes =
        absl::MakeConstSpan(request.genes().data(), request.genes().size());
    score =
        request.case_name().empty()
            ? (*evaluator)->Evaluate(genes, request.seed())
            : (*evaluator)
                  ->EvaluateCase(genes, request.case_name(), request.seed());
  } catch (const std::exception& e) {
    score = absl::InternalError(absl::StrCat("evaluator threw: ", e.what()));
  } catch (...) {
    score = absl::InternalError("evaluator threw a non-standard exception");
  }
  if (!score.ok()) {
    response.set_error(score.status().message().empty()
                           ? score.status().ToString()
                           : std::string(score.status().message()));
  } else {
    response.set_score(*score);
    // A built-in's metrics (Evaluator::LastMetrics) travel as an external
    // program's do.
    if (request.case_name().empty()) {
      const std::map<std::string, double>& metrics =
          (*evaluator)->LastMetrics();
      response.mutable_metrics()->insert(metrics.begin(), metrics.end());
    }
  }
  return response;
}

}  // namespace

absl::StatusOr<skerry::v1::EvaluatorSpec> DecodeHostSpec(
    const std::string& base64) {
  std::string bytes;
  if (!absl::Base64Unescape(base64, &bytes)) {
    return absl::InvalidArgumentError(
        "--evaluator-spec: not valid base64 (expected the binary EvaluatorSpec "
        "in standard base64)");
  }
  skerry::v1::EvaluatorSpec spec;
  if (!spec.ParseFromString(bytes)) {
    return absl::InvalidArgumentError(
        "--evaluator-spec: the decoded bytes are not an EvaluatorSpec");
  }
  if (spec.kind_case() == skerry::v1::EvaluatorSpec::kExternal) {
    return absl::InvalidArgumentError(
        "--evaluator-spec: an external evaluator cannot be hosted; the worker "
        "runs it directly");
  }
  return spec;
}

absl::Status ServeEvaluations(const skerry::v1::EvaluatorSpec& spec,
                              std::istream& in, std::ostream& out) {
  absl::StatusOr<std::unique_ptr<Evaluator>> evaluator;
  try {
    evaluator = MakeEvaluator(spec);
  } catch (const std::exception& e) {
    evaluator = absl::InternalError(
        absl::StrCat("making the evaluator threw: ", e.what()));
  }
  google::protobuf::util::JsonPrintOptions print;
  print.always_print_primitive_fields = true;
  print.preserve_proto_field_names = true;
  google::protobuf::util::JsonParseOptions parse;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line == "\r") continue;
    EvaluationRequest request;
    EvaluationResponse response;
    const auto parsed =
        google::protobuf::util::JsonStringToMessage(line, &request, parse);
    if (parsed.ok()) {
      response = Answer(evaluator, request);
    } else {
      response.set_error(
          absl::StrCat("evaluator host: not an EvaluationRequest in JSON: ",
                       std::string(parsed.message())));
    }
    std::string json;
    if (!google::protobuf::util::MessageToJsonString(response, &json, print)
             .ok()) {
      return absl::InternalError("evaluator host: cannot print a response");
    }
    out << json << '\n';
    out.flush();
    if (!out) return absl::UnavailableError("evaluator host: stdout closed");
  }
  return absl::OkStatus();
}

int EvaluatorHostMain(const std::vector<std::string>& args) {
  std::string encoded;
  bool have_spec = false;
  for (const std::string& arg : args) {
    if (arg == "--evaluator-host") continue;
    if (absl::StartsWith(arg, kSpecFlag)) {
      encoded = arg.substr(sizeof kSpecFlag - 1);
      have_spec = true;
      continue;
    }
    std::fprintf(stderr,
                 "skerry-worker --evaluator-host: unknown argument \"%s\" "
                 "(usage: skerry-worker --evaluator-host "
                 "--evaluator-spec=BASE64)\n",
                 arg.c_str());
    return 2;
  }
  if (!have_spec) {
    std::fputs(
        "skerry-worker --evaluator-host: --evaluator-spec=BASE64 is required\n",
        stderr);
    return 2;
  }
  absl::StatusOr<skerry::v1::EvaluatorSpec> spec = DecodeHostSpec(encoded);
  if (!spec.ok()) {
    std::fprintf(stderr, "skerry-worker --evaluator-host: %s\n",
                 std::string(spec.status().message()).c_str());
    return 2;
  }
  std::ios::sync_with_stdio(false);
  absl::Status served = ServeEvaluations(*spec, std::cin, std::cout);
  if (!served.ok()) {
    std::fprintf(stderr, "skerry-worker --evaluator-host: %s\n",
                 std::string(served.message()).c_str());
    return 1;
  }
  return 0;
}

}  // namespace skerry::worker
