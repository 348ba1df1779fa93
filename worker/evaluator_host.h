// The evaluator host: skerry-worker --evaluator-host serves a built-in
// evaluator over the external-evaluator protocol (docs/evaluator-protocol.md),
// so that a spec with `isolate: true` runs its built-in in a child process
// that the worker may kill, instead of in the worker itself.
//
//   skerry-worker --evaluator-host --evaluator-spec=<base64 of EvaluatorSpec>
//
// The spec is the binary EvaluatorSpec in standard base64 (the worker passes
// it, see ProcessOptionsForSpec). Then one EvaluationRequest per stdin line,
// one EvaluationResponse per stdout line, until stdin ends.
//
// Invariant: every well-formed request line gets exactly one response line with
// its id; an evaluator error or a C++ exception becomes the response's error.
// A line that is not a request gets a response with id 0 and an error (the
// worker then treats the host as broken and restarts it).
//
// Thread safety: ServeEvaluations uses its streams from the calling thread
// only; call it from one thread per pair of streams.
#ifndef SKERRY_WORKER_EVALUATOR_HOST_H_
#define SKERRY_WORKER_EVALUATOR_HOST_H_

#include <istream>
#include <ostream>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::worker {

// Decodes the --evaluator-spec value. InvalidArgument says what is wrong.
absl::StatusOr<skerry::v1::EvaluatorSpec> DecodeHostSpec(
    const std::string& base64);

// Answers requests from `in` on `out` with MakeEvaluator(spec) until `in`
// ends. A spec MakeEvaluator refuses is reported in every response's error.
// Returns an error only when `out` cannot be written.
absl::Status ServeEvaluations(const skerry::v1::EvaluatorSpec& spec,
                              std::istream& in, std::ostream& out);

// The --evaluator-host mode of skerry-worker; args exclude the program name
// and include "--evaluator-host". Returns the process exit code: 0 at the end
// of stdin, 2 for bad arguments (with a message on stderr).
int EvaluatorHostMain(const std::vector<std::string>& args);

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_EVALUATOR_HOST_H_
