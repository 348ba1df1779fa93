// ProcessOptionsForSpec (process_evaluator.h): how a run's evaluator spec
// becomes the options of a child-process evaluator.
#include <unistd.h>

#include <algorithm>
#include <cmath>

#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "worker/process_evaluator.h"

namespace skerry::worker {

absl::StatusOr<ProcessEvaluatorOptions> ProcessOptionsForSpec(
    const skerry::v1::EvaluatorSpec& spec,
    const std::vector<std::string>& host_command) {
  ProcessEvaluatorOptions o;
  const double limit =
      spec.time_limit_seconds() == 0 ? 60.0 : spec.time_limit_seconds();
  if (!(limit > 0) || !std::isfinite(limit)) {
    return absl::InvalidArgumentError(absl::StrCat(
        "evaluator.time_limit_seconds: must be positive and finite (got ",
        limit, ")"));
  }
  o.time_limit = absl::Seconds(limit);
  if (spec.kind_case() == skerry::v1::EvaluatorSpec::kExternal) {
    const skerry::v1::ExternalEvaluator& ext = spec.external();
    o.argv.assign(ext.argv().begin(), ext.argv().end());
    o.working_dir = ext.working_dir();
    o.env.insert(ext.env().begin(), ext.env().end());
    o.network = ext.network();
    o.memory_limit_mb = ext.memory_limit_mb();
    o.episodes = std::max<uint32_t>(1, spec.episodes().count());
    if (spec.episodes().aggregate() != skerry::v1::AGGREGATE_UNSPECIFIED) {
      o.aggregate = spec.episodes().aggregate();
    }
    return o;
  }
  // A built-in in skerry-worker --evaluator-host; it runs its own episodes.
  if (host_command.empty()) {
    char self[4096];
    const ssize_t n = readlink("/proc/self/exe", self, sizeof self - 1);
    if (n <= 0) {
      return absl::InternalError(
          "isolate: cannot find this program's path in /proc/self/exe");
    }
    o.argv = {std::string(self, static_cast<size_t>(n)), "--evaluator-host"};
  } else {
    o.argv = host_command;
  }
  skerry::v1::EvaluatorSpec inner = spec;
  inner.set_isolate(false);
  o.argv.push_back(absl::StrCat("--evaluator-spec=",
                                absl::Base64Escape(inner.SerializeAsString())));
  return o;
}

}  // namespace skerry::worker
