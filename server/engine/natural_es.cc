#include "server/engine/natural_es.h"

#include <algorithm>
#include <cmath>
#include <numeric>

#include "common/sample_recipe.h"

namespace skerry::engine {

std::vector<double> CentredRanks(absl::Span<const double> utilities) {
  const size_t n = utilities.size();
  std::vector<size_t> order(n);
  std::iota(order.begin(), order.end(), size_t{0});
  std::stable_sort(order.begin(), order.end(), [&](size_t a, size_t b) {
    return utilities[a] < utilities[b];
  });
  std::vector<double> out(n, 0.0);
  if (n < 2) return out;
  // A run of equal values [r, e) shares the mean rank (r + e - 1) / 2.
  for (size_t r = 0; r < n;) {
    size_t e = r + 1;
    while (e < n && utilities[order[e]] == utilities[order[r]]) ++e;
    const double rank = 0.5 * static_cast<double>(r + e - 1);
    for (size_t k = r; k < e; ++k) {
      out[order[k]] = rank / static_cast<double>(n - 1) - 0.5;
    }
    r = e;
  }
  return out;
}

std::vector<double> MirroredGradient(
    absl::Span<const double> shaped,
    const std::vector<std::vector<double>>& eps, double sigma) {
  const size_t pairs = eps.size();
  std::vector<double> g(eps.front().size(), 0.0);
  for (size_t i = 0; i < pairs; ++i) {
    const double w = shaped[2 * i] - shaped[2 * i + 1];
    for (size_t j = 0; j < g.size(); ++j) g[j] += w * eps[i][j];
  }
  const double scale = 1.0 / (2.0 * static_cast<double>(pairs) * sigma);
  for (double& x : g) x *= scale;
  return g;
}

void AdamStep(const AdamParameters& p, absl::Span<const double> direction,
              skerry::v1::NaturalEsState* s) {
  s->set_step(s->step() + 1);
  const double t = s->step();
  const double bias1 = 1.0 - std::pow(p.beta1, t);
  const double bias2 = 1.0 - std::pow(p.beta2, t);
  for (size_t j = 0; j < direction.size(); ++j) {
    const int i = static_cast<int>(j);
    const double d = direction[j];
    const double m = p.beta1 * s->adam_m(i) + (1.0 - p.beta1) * d;
    const double v = p.beta2 * s->adam_v(i) + (1.0 - p.beta2) * d * d;
    s->set_adam_m(i, m);
    s->set_adam_v(i, v);
    const double m_hat = m / bias1;
    const double v_hat = v / bias2;
    s->set_centre(i, s->centre(i) - p.learning_rate * m_hat /
                                        (std::sqrt(v_hat) + p.epsilon));
  }
}

std::vector<double> Perturbation(const skerry::v1::RunSpec& spec,
                                 uint32_t island, uint32_t generation,
                                 uint32_t pair) {
  return SamplePerturbation(spec.seed(), island, generation, pair,
                            spec.genome_length());
}

double NaturalEsSigma(const skerry::v1::NaturalEsSpec& es,
                      uint32_t generation) {
  if (!es.has_sigma_decay()) return es.sigma();
  return std::max(
      es.sigma_min(),
      es.sigma() * std::pow(es.sigma_decay(), static_cast<double>(generation)));
}

namespace {

// Weight decay, then one Adam step descending -g + decay theta.
void StepAlong(const skerry::v1::NaturalEsSpec& es,
               std::vector<double> direction,
               skerry::v1::NaturalEsState* state) {
  for (size_t j = 0; j < direction.size(); ++j) {
    direction[j] =
        -direction[j] + es.weight_decay() * state->centre(static_cast<int>(j));
  }
  AdamParameters adam;
  adam.learning_rate = es.learning_rate();
  adam.beta1 = es.beta1();
  adam.beta2 = es.beta2();
  adam.epsilon = es.epsilon();
  AdamStep(adam, direction, state);
}

}  // namespace

void NaturalEsUpdate(const skerry::v1::NaturalEsSpec& es, uint32_t generation,
                     absl::Span<const double> utilities,
                     const std::vector<std::vector<double>>& eps,
                     skerry::v1::NaturalEsState* state) {
  const std::vector<double> shaped = CentredRanks(utilities);
  StepAlong(es, MirroredGradient(shaped, eps, NaturalEsSigma(es, generation)),
            state);
}

void NaturalEsUpdateStreaming(
    const skerry::v1::NaturalEsSpec& es, uint32_t generation,
    absl::Span<const double> utilities,
    const std::function<std::vector<double>(uint32_t pair)>& eps_of,
    skerry::v1::NaturalEsState* state) {
  const std::vector<double> shaped = CentredRanks(utilities);
  const size_t pairs = utilities.size() / 2;
  // MirroredGradient's sum, pair by pair in the same order.
  std::vector<double> g(static_cast<size_t>(state->centre_size()), 0.0);
  for (size_t i = 0; i < pairs; ++i) {
    const std::vector<double> eps = eps_of(static_cast<uint32_t>(i));
    const double w = shaped[2 * i] - shaped[2 * i + 1];
    for (size_t j = 0; j < g.size(); ++j) g[j] += w * eps[j];
  }
  const double scale =
      1.0 / (2.0 * static_cast<double>(pairs) * NaturalEsSigma(es, generation));
  for (double& x : g) x *= scale;
  StepAlong(es, std::move(g), state);
}

}  // namespace skerry::engine
