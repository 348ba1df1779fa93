// Helpers shared by the strategy tests.
#ifndef SKERRY_TESTS_UNIT_SERVER_STRATEGY_TEST_UTIL_H_
#define SKERRY_TESTS_UNIT_SERVER_STRATEGY_TEST_UTIL_H_

#include <vector>

#include "gtest/gtest.h"
#include "server/engine/strategy.h"
#include "server/store/records.h"

namespace skerry::engine::testing {

// The generation with every sample's genes built (SampleGenes): a strategy
// makes natural ES samples as their recipes alone (records.h), as the engine
// holds them; a test that looks at the genes builds them as a worker would.
inline std::vector<store::GenomeRecord> Built(
    std::vector<store::GenomeRecord> generation) {
  const std::vector<store::GenomeRecord> made = generation;
  for (store::GenomeRecord& g : generation) {
    absl::StatusOr<std::vector<double>> genes = SampleGenes(made, g);
    EXPECT_TRUE(genes.ok()) << genes.status();
    if (genes.ok()) g.genes = *std::move(genes);
  }
  return generation;
}

}  // namespace skerry::engine::testing

#endif  // SKERRY_TESTS_UNIT_SERVER_STRATEGY_TEST_UTIL_H_
