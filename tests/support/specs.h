// Test support: the text of run specs that tests in different files share in
// shape, built from the values each test sets, so that the shape is written
// once. Each test still names its own values; see proto/skerry/v1/spec.proto
// for the fields.
//
// Thread safety: pure functions.
#ifndef SKERRY_TESTS_SUPPORT_SPECS_H_
#define SKERRY_TESTS_SUPPORT_SPECS_H_

#include <cstdint>
#include <string>

#include "absl/strings/str_cat.h"

namespace skerry::testing {

// "trolley-arm": two cart-pole islands of 12 with one elite, migrating one
// genome every 2 generations, with held-out generalisation validation (its
// block reads exactly `validation { generalisation: true }`).
inline std::string CartPoleValidatedSpec(int max_steps, int max_generations) {
  return absl::StrCat(R"(
name: "trolley-arm"
seed: 7
evaluator {
  cart_pole { max_steps: )",
                      max_steps, R"( }
  validation { generalisation: true }
}
ga { population_size: 12 elites: 1 }
islands { count: 2 interval: 2 migrants: 1 }
stop { max_generations: )",
                      max_generations, R"( }
)");
}

// A run of the built-in `function` on islands: `ga` and `islands` are the
// fields inside those blocks, as text.
inline std::string BuiltinIslandSpec(const std::string& name, uint64_t seed,
                                     int genome_length,
                                     const std::string& function,
                                     const std::string& ga,
                                     const std::string& islands,
                                     uint64_t max_generations) {
  return absl::StrCat("name: \"", name, "\"\nseed: ", seed,
                      "\ngenome_length: ", genome_length,
                      "\nevaluator { builtin { function: \"", function,
                      "\" } }\nga { ", ga, " }\nislands { ", islands,
                      " }\nstop { max_generations: ", max_generations, " }\n");
}

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_SUPPORT_SPECS_H_
