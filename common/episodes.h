// Several episodes per evaluation: the random stream of each episode and the
// aggregation of their scores, shared by the built-in pole evaluators and the
// worker's external-program evaluator so both key episodes the same way.
//
// Episode e of an evaluation with seed s draws from the stream (s, island 0,
// generation 0, kEvalSeed, slot e) (common/random.h): a pure function of the
// evaluation seed, whichever worker runs it.
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_EPISODES_H_
#define SKERRY_COMMON_EPISODES_H_

#include <cstdint>
#include <vector>

#include "common/random.h"
#include "skerry/v1/control.pb.h"

namespace skerry {

RandomStream EpisodeStream(uint64_t evaluation_seed, uint32_t episode);

// MEAN, MIN or MEDIAN (mean of the middle two for an even count) of the
// episodes' scores. REQUIRES: scores is not empty.
double AggregateEpisodes(skerry::v1::EpisodeAggregate how,
                         std::vector<double> scores);

}  // namespace skerry

#endif  // SKERRY_COMMON_EPISODES_H_
