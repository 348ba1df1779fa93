// skerry-pole-solve-check: the published success test of double pole balancing
// without velocities (Gruau, Whitley & Pyeatt 1996, as Stanley & Miikkulainen
// 2002 use it; from memory): a controller solves the task when it balances
// 100,000 steps from the standard start (long pole at 4.5 degrees) and then
// balances from at least 200 of the 625 generalisation starts for 1,000 steps.
// The search itself is driven by the damping fitness, which only looks at
// 1,000 steps; this test is applied afterwards to each generation's best.
//
//   skerry-pole-solve-check SPEC < candidates
//
// SPEC is a run spec whose evaluator is double_pole (its network decodes the
// genes). Each input line is "KEY g1 g2 ... gn"; for each, in order, the tool
// prints "KEY STEPS GENERAL" (GENERAL is -1 when STEPS < 100,000: the
// generalisation test is skipped) and flushes, and it stops at the first
// candidate that solves, so a caller may feed candidates in the order they
// were found and read the first success. Used by scripts/strategy-evidence.
//
// Thread safety: single-threaded program.
#include <fstream>
#include <iostream>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "common/evaluator.h"
#include "common/pole.h"
#include "common/spec.h"

namespace {

constexpr uint64_t kSolvedSteps = 100000;  // Gruau et al. 1996 (from memory)

int Run(const std::string& spec_path) {
  std::ifstream in(spec_path);
  std::stringstream text;
  text << in.rdbuf();
  absl::StatusOr<skerry::v1::RunSpec> spec =
      skerry::ParseSpecText(text.str(), spec_path);
  if (!spec.ok()) {
    std::cerr << spec.status() << "\n";
    return 2;
  }
  skerry::NormalizeSpec(&*spec);
  if (spec->evaluator().kind_case() != skerry::v1::EvaluatorSpec::kDoublePole) {
    std::cerr << spec_path << ": evaluator: not double_pole\n";
    return 2;
  }
  // The long balance: the same task and network, scored in steps.
  skerry::v1::EvaluatorSpec balance = spec->evaluator();
  balance.mutable_double_pole()->set_fitness(skerry::v1::BALANCE_STEPS);
  balance.mutable_double_pole()->set_max_steps(kSolvedSteps);
  absl::StatusOr<std::unique_ptr<skerry::Evaluator>> evaluator =
      skerry::pole::MakePoleEvaluator(balance);
  if (!evaluator.ok()) {
    std::cerr << evaluator.status() << "\n";
    return 2;
  }
  std::string line;
  while (std::getline(std::cin, line)) {
    std::istringstream fields(line);
    std::string key;
    if (!(fields >> key)) continue;
    std::vector<double> genes;
    for (double g; fields >> g;) genes.push_back(g);
    absl::StatusOr<double> steps = (*evaluator)->Evaluate(genes, 0);
    if (!steps.ok()) {
      std::cerr << key << ": " << steps.status() << "\n";
      return 2;
    }
    int64_t general = -1;
    if (*steps >= kSolvedSteps) {
      absl::StatusOr<uint32_t> g =
          skerry::pole::GeneralisationTest(balance, genes);
      if (!g.ok()) {
        std::cerr << key << ": " << g.status() << "\n";
        return 2;
      }
      general = *g;
    }
    std::cout << key << " " << static_cast<uint64_t>(*steps) << " " << general
              << std::endl;
    if (general >= skerry::pole::kGeneralisationPass) return 0;
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::cerr << "usage: skerry-pole-solve-check SPEC < candidates\n";
    return 2;
  }
  return Run(argv[1]);
}
