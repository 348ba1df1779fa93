#include "worker/task_evaluation.h"

#include <cmath>
#include <utility>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/types/span.h"

namespace skerry::worker {
namespace {

std::string ErrorText(const absl::Status& status) {
  if (status.message().empty()) return status.ToString();
  return std::string(status.message());
}

}  // namespace

EvaluatorCache::EvaluatorCache(EvaluatorFactory factory)
    : factory_(std::move(factory)) {
  if (!factory_) factory_ = &MakeEvaluator;
}

absl::StatusOr<Evaluator*> EvaluatorCache::Get(
    const skerry::v1::EvaluatorSpec& spec) {
  std::string key = spec.SerializeAsString();
  auto it = by_spec_.find(key);
  if (it == by_spec_.end()) {
    it = by_spec_.emplace(std::move(key), factory_(spec)).first;
  }
  if (!it->second.ok()) return it->second.status();
  if (*it->second == nullptr) {
    return absl::InternalError("evaluator factory returned no evaluator");
  }
  return it->second->get();
}

skerry::v1::TaskResult EvaluateTask(const skerry::v1::Task& task,
                                    EvaluatorCache& cache, Clock* clock) {
  skerry::v1::TaskResult result;
  result.set_task_id(task.task_id());
  result.set_attempt(task.attempt());
  const absl::Time start = clock->Now();
  absl::StatusOr<double> score;
  absl::StatusOr<Evaluator*> evaluator = cache.Get(task.evaluator());
  if (evaluator.ok()) {
    // The time-limit seam: a later issue runs this under a watchdog and turns
    // an overrun into a failed attempt.
    score = (*evaluator)
                ->Evaluate(absl::MakeConstSpan(task.genes().data(),
                                               task.genes().size()),
                           task.eval_seed());
  } else {
    score = evaluator.status();
  }
  result.set_eval_seconds(absl::ToDoubleSeconds(clock->Now() - start));
  if (!score.ok()) {
    result.set_error(ErrorText(score.status()));
  } else if (!std::isfinite(*score)) {
    result.set_error(
        absl::StrCat("evaluator returned a non-finite score (", *score, ")"));
  } else {
    result.set_score(*score);
  }
  return result;
}

}  // namespace skerry::worker
