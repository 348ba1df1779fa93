// The natural-gradient evolution strategy of T. Salimans, J. Ho, X. Chen,
// S. Sidor and I. Sutskever, "Evolution Strategies as a Scalable Alternative
// to Reinforcement Learning" (arXiv:1703.03864, 2017), as pure functions:
//
//   - a search centre theta and P mirrored pairs of samples theta +/- sigma
//     eps_i, eps_i ~ N(0, I), with sigma fixed (antithetic sampling, their
//     section 2.3);
//   - fitness shaping by centred ranks: the 2P utilities are ranked, rank r
//     of 0..2P-1 (0 the worst) becomes r / (2P - 1) - 0.5, in [-0.5, 0.5]
//     (their section 2.3 and their released code's compute_centered_ranks,
//     from memory); ties share their mean rank (our choice, below);
//   - the gradient estimate of E[F(theta + sigma eps)]:
//     g = 1 / (2 P sigma) sum_i (F+_i - F-_i) eps_i (their Algorithm 1 with
//     mirrored pairs);
//   - Adam on the direction d = -g + weight_decay theta (ascending g, with L2
//     decay toward 0), as in D. P. Kingma and J. Ba, "Adam: A Method for
//     Stochastic Optimization" (arXiv:1412.6980), Algorithm 1:
//       m <- b1 m + (1 - b1) d;  v <- b2 v + (1 - b2) d^2;
//       m^ = m / (1 - b1^t);     v^ = v / (1 - b2^t);
//       theta <- theta - alpha m^ / (sqrt(v^) + eps).
//
// Pair i of generation g of an island is rebuilt from its key alone:
// Perturbation() draws eps_i from stream (run seed, island, g,
// kPerturbation, i), so a sample can be regenerated from (seed, island,
// generation, pair) without storing it.
//
// Thread safety: pure functions.
#ifndef SKERRY_SERVER_ENGINE_NATURAL_ES_H_
#define SKERRY_SERVER_ENGINE_NATURAL_ES_H_

#include <cstdint>
#include <functional>
#include <vector>

#include "absl/types/span.h"
#include "skerry/v1/spec.pb.h"
#include "skerry/v1/strategy.pb.h"

namespace skerry::engine {

// Centred ranks of `utilities` (higher is better): r / (n - 1) - 0.5 for the
// value of rank r, 0 the lowest. Equal values share the mean of their ranks
// (so a mirrored pair of equal values cancels exactly, and a constant
// function gives a zero gradient); the values still sum to 0. n = 1 gives 0.
std::vector<double> CentredRanks(absl::Span<const double> utilities);

// g = 1 / (2 P sigma) sum_i (shaped[2i] - shaped[2i+1]) eps[i], where
// shaped[2i] is the utility of theta + sigma eps[i] and shaped[2i+1] that of
// theta - sigma eps[i]. REQUIRES: shaped.size() == 2 eps.size(), eps non-empty,
// every eps[i] of one length.
std::vector<double> MirroredGradient(
    absl::Span<const double> shaped,
    const std::vector<std::vector<double>>& eps, double sigma);

struct AdamParameters {
  double learning_rate = 0.001;  // alpha; Kingma & Ba 2014, Algorithm 1
  double beta1 = 0.9;
  double beta2 = 0.999;
  double epsilon = 1e-8;
};

// One Adam step (Algorithm 1 of Kingma & Ba) descending `direction`: updates
// the state's centre, moments and step count in place. REQUIRES: the state's
// vectors and `direction` of one length.
void AdamStep(const AdamParameters& params, absl::Span<const double> direction,
              skerry::v1::NaturalEsState* state);

// eps of pair `pair` of `generation` on `island`: n standard normals from
// stream (spec.seed(), island, generation, kPerturbation, pair).
std::vector<double> Perturbation(const skerry::v1::RunSpec& spec,
                                 uint32_t island, uint32_t generation,
                                 uint32_t pair);

// The sigma generation `generation` samples with: es.sigma() when
// sigma_decay is unset, else max(sigma_min, sigma x sigma_decay^generation)
// (std::pow, so like the normal variates it depends on libm: reproducible
// per platform).
double NaturalEsSigma(const skerry::v1::NaturalEsSpec& es, uint32_t generation);

// The update of one generation from its 2P utilities (slot order: pair i's
// plus sample at 2i, minus at 2i+1; higher is better, a failed evaluation
// -infinity): centred ranks, mirrored gradient, weight decay, one Adam step.
// `generation` is the one the utilities are of: the gradient divides by the
// sigma it sampled with (NaturalEsSigma).
// REQUIRES: a validated natural_es spec; eps as MirroredGradient.
void NaturalEsUpdate(const skerry::v1::NaturalEsSpec& es, uint32_t generation,
                     absl::Span<const double> utilities,
                     const std::vector<std::vector<double>>& eps,
                     skerry::v1::NaturalEsState* state);

// The same update with each pair's eps drawn once, when the update needs it,
// and not kept: the coordinator's memory for it is one vector of the genome's
// length, not one per pair. Bit for bit NaturalEsUpdate (the sum is taken in
// the same order). `eps_of(i)` returns pair i's eps (Perturbation), and is
// called once per pair in pair order, so a caller can use the same draw for
// something else (NaturalEsStrategy, the generation's diversity).
// REQUIRES: utilities.size() even and >= 2; every eps of the state's length.
void NaturalEsUpdateStreaming(
    const skerry::v1::NaturalEsSpec& es, uint32_t generation,
    absl::Span<const double> utilities,
    const std::function<std::vector<double>(uint32_t pair)>& eps_of,
    skerry::v1::NaturalEsState* state);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_NATURAL_ES_H_
