#include "common/episodes.h"

#include <algorithm>

namespace skerry {

RandomStream EpisodeStream(uint64_t evaluation_seed, uint32_t episode) {
  StreamKey key;
  key.run_seed = evaluation_seed;
  key.purpose = StreamPurpose::kEvalSeed;
  key.slot = episode;
  return RandomStream(key);
}

double AggregateEpisodes(skerry::v1::EpisodeAggregate how,
                         std::vector<double> scores) {
  if (how == skerry::v1::AGGREGATE_MIN) {
    return *std::min_element(scores.begin(), scores.end());
  }
  if (how == skerry::v1::AGGREGATE_MEDIAN) {
    std::sort(scores.begin(), scores.end());
    const size_t n = scores.size();
    return n % 2 == 1 ? scores[n / 2]
                      : 0.5 * (scores[n / 2 - 1] + scores[n / 2]);
  }
  double sum = 0.0;
  for (double x : scores) sum += x;
  return sum / static_cast<double>(scores.size());
}

}  // namespace skerry
