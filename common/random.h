// Counter-based random streams: the only source of randomness in a run.
//
// A stream is named by (run seed, island, generation, purpose, slot). Its n-th
// 128-bit block is Philox4x32-10 (Salmon, Moraes, Dror & Shaw 2011, "Parallel
// random numbers: as easy as 1, 2, 3") of the counter
//     c0 = n, c1 = slot, c2 = generation, c3 = (purpose << 16) | island
// under the 64-bit key = run seed (k0 = low 32 bits, k1 = high 32 bits).
// Nothing depends on which thread, process or machine draws, nor on the order
// in which streams are used: the same name always yields the same numbers. That
// is what makes a run a pure function of (spec, seed). The integer words are
// exact everywhere; Normal() goes through libm (log, sqrt, sin, cos), whose
// last bit may differ between C libraries, so a run is reproducible per
// platform (docs/user-guide.md, "Reproducibility").
//
// Thread safety: a RandomStream is a small value; use one per thread.
#ifndef SKERRY_COMMON_RANDOM_H_
#define SKERRY_COMMON_RANDOM_H_

#include <array>
#include <cstdint>

namespace skerry {

// What a stream is for. Values are part of the reproducibility contract: never
// renumber them.
enum class StreamPurpose : uint16_t {
  kSeedGenes = 1,      // generation 0 genes, per slot
  kSelection = 2,      // the mating pool of a generation, slot 0
  kBreed = 3,          // crossover and mutation of one child, per slot
  kImmigrant = 4,      // genes of a random immigrant, per slot
  kMigration = 5,      // emigrant choice and replacement, slot = source island
  kEvalSeed = 6,       // the seed handed to the evaluator, per slot
  kTopology = 7,       // random topology of a migration epoch, slot 0
  kValidation = 8,     // the seed of held-out validation case `slot`
  kSample = 9,         // an ES sample's standard-normal vector, per slot
  kStart = 10,         // an ES search's start (generation = restart number)
  kPerturbation = 11,  // natural ES: pair `slot`'s perturbation vector
};

struct StreamKey {
  uint64_t run_seed = 0;
  uint32_t island = 0;  // < 65536
  uint32_t generation = 0;
  StreamPurpose purpose = StreamPurpose::kSeedGenes;
  uint32_t slot = 0;
};

// One Philox4x32 block with 10 rounds.
std::array<uint32_t, 4> Philox4x32_10(std::array<uint32_t, 4> counter,
                                      std::array<uint32_t, 2> key);

class RandomStream {
 public:
  explicit RandomStream(const StreamKey& key);

  // Uniform 64-bit word.
  uint64_t NextU64();
  // Uniform in [0, 1) with 53 random bits.
  double Uniform01();
  // Uniform in [lo, hi).
  double Uniform(double lo, double hi);
  // Uniform integer in [0, n), unbiased (rejection). REQUIRES: n > 0.
  uint64_t Below(uint64_t n);
  // Standard normal (Box-Muller; caches the second value).
  double Normal();
  // True with probability p.
  bool Bernoulli(double p);

 private:
  std::array<uint32_t, 2> key_;
  std::array<uint32_t, 4> base_;  // c1..c3 fixed, c0 = block index
  uint32_t block_ = 0;
  std::array<uint32_t, 4> buffer_{};
  int used_ = 4;  // 32-bit words of buffer_ consumed
  bool has_spare_normal_ = false;
  double spare_normal_ = 0.0;
};

}  // namespace skerry

#endif  // SKERRY_COMMON_RANDOM_H_
