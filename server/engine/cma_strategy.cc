// CMA-ES and sep-CMA-ES behind the strategy interface (strategy.h).
//
// Generation g of an island is lambda samples x_k = m + sigma C^(1/2) z_k,
// z_k drawn from stream (seed, island, g, kSample, k); each genome holds x_k
// clamped to [lower_bound, upper_bound] and is evaluated there. Tell ranks the
// generation by score (a failed evaluation ranks last) and updates the
// search from the clamped points (repair, used as the new points: the bounds
// become part of the problem; Hansen 2016, Appendix B.1, from memory). When a
// stop criterion of the tutorial holds, the island starts a new search with
// the same lambda and sigma0 from a new uniform start (stream (seed, island,
// restart, kStart, 0)); restarts with an increasing population (IPOP) are not
// done yet.
//
// Migration: a migrant better than every sample of the completed generation
// becomes the mean of the search (step size and covariance kept); other
// migrants are ignored. A sample's parent links are empty (origin SAMPLED).
#include "server/engine/cma_strategy.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>

#include "absl/strings/str_cat.h"
#include "common/random.h"
#include "common/strategy_spec.h"
#include "server/engine/breeder.h"
#include "server/engine/cma_es.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;
using store::GenomeRecord;

RandomStream Stream(const RunSpec& spec, uint32_t island, uint32_t generation,
                    StreamPurpose purpose, uint32_t slot) {
  StreamKey key;
  key.run_seed = spec.seed();
  key.island = island;
  key.generation = generation;
  key.purpose = purpose;
  key.slot = slot;
  return RandomStream(key);
}

class CmaStrategy : public Strategy {
 public:
  CmaStrategy(const RunSpec& spec, uint32_t island)
      : spec_(spec),
        island_(island),
        separable_(StrategyOf(spec) == StrategyKind::kSepCmaEs) {}

  absl::StatusOr<std::vector<GenomeRecord>> Start() override {
    restarts_ = 0;
    last_stop_.clear();
    search_ = NewSearch(0);
    generation_ = 0;
    return Samples();
  }

  absl::Status Tell(absl::Span<const GenomeRecord> completed,
                    absl::Span<const GenomeRecord* const> migrants) override {
    if (!search_.has_value()) {
      return absl::FailedPreconditionError(
          absl::StrCat("island ", island_, ": told before started"));
    }
    const int lambda = search_->params().lambda;
    if (completed.size() != static_cast<size_t>(lambda)) {
      return absl::InvalidArgumentError(
          absl::StrCat("island ", island_, " generation ", generation_, ": ",
                       completed.size(), " samples, expected ", lambda));
    }
    const bool maximize = spec_.objective() == skerry::v1::MAXIMIZE;
    auto value = [maximize](const GenomeRecord& g) {
      if (g.state != skerry::v1::EVALUATED) {
        return std::numeric_limits<double>::infinity();
      }
      return maximize ? -g.score : g.score;
    };
    std::vector<Eigen::VectorXd> points;
    std::vector<double> values;
    double best = std::numeric_limits<double>::infinity();
    for (const GenomeRecord& g : completed) {
      points.push_back(Eigen::Map<const Eigen::VectorXd>(
          g.genes.data(), static_cast<Eigen::Index>(g.genes.size())));
      values.push_back(value(g));
      best = std::min(best, values.back());
    }
    search_->Tell(points, values);
    // A better migrant moves the mean; the first of the best wins ties.
    const GenomeRecord* better = nullptr;
    for (const GenomeRecord* m : migrants) {
      if (value(*m) < best) {
        best = value(*m);
        better = m;
      }
    }
    if (better != nullptr) {
      skerry::v1::CmaState s;
      search_->ToProto(&s);
      for (size_t i = 0; i < better->genes.size(); ++i) {
        s.set_mean(static_cast<int>(i), better->genes[i]);
      }
      absl::StatusOr<CmaEs> moved = CmaEs::FromProto(s);
      if (!moved.ok()) return moved.status();
      search_ = std::move(*moved);
    }
    const std::string stop = search_->StopReason();
    if (!stop.empty()) {
      ++restarts_;
      last_stop_ = stop;
      search_ = NewSearch(restarts_);
    }
    generation_ = completed.front().generation + 1;
    return absl::OkStatus();
  }

  absl::StatusOr<std::vector<GenomeRecord>> Ask() override {
    if (!search_.has_value()) {
      return absl::FailedPreconditionError(
          absl::StrCat("island ", island_, ": asked before started"));
    }
    return Samples();
  }

  skerry::v1::StrategyState Save() const override {
    skerry::v1::StrategyState s;
    s.set_generation(generation_);
    skerry::v1::CmaStrategyState* c = s.mutable_cma_es();
    if (search_.has_value()) search_->ToProto(c->mutable_search());
    c->set_restarts(restarts_);
    c->set_last_stop(last_stop_);
    return s;
  }

  absl::Status Restore(const skerry::v1::StrategyState& state) override {
    if (state.kind_case() != skerry::v1::StrategyState::kCmaEs) {
      return absl::InvalidArgumentError(absl::StrCat(
          "island ", island_, ": the saved state is not a CMA-ES state"));
    }
    const skerry::v1::CmaStrategyState& c = state.cma_es();
    if (c.search().separable() != separable_ ||
        c.search().dimension() != spec_.genome_length()) {
      return absl::InvalidArgumentError(
          absl::StrCat("island ", island_,
                       ": the saved CMA-ES state does not fit the spec"));
    }
    absl::StatusOr<CmaEs> search = CmaEs::FromProto(c.search());
    if (!search.ok()) {
      return absl::InvalidArgumentError(
          absl::StrCat("island ", island_, ": ", search.status().message()));
    }
    search_ = std::move(*search);
    restarts_ = c.restarts();
    last_stop_ = c.last_stop();
    generation_ = state.generation();
    return absl::OkStatus();
  }

 private:
  CmaEs NewSearch(uint32_t restart) const {
    const uint32_t n = spec_.genome_length();
    const skerry::v1::CmaEsSpec& cs = CmaSpecOf(spec_);
    RandomStream rng =
        Stream(spec_, island_, restart, StreamPurpose::kStart, 0);
    Eigen::VectorXd mean(n);
    for (uint32_t i = 0; i < n; ++i) {
      mean[i] = rng.Uniform(spec_.init_lower(), spec_.init_upper());
    }
    return CmaEs(CmaParameters::Defaults(static_cast<int>(n),
                                         static_cast<int>(cs.population_size()),
                                         separable_),
                 std::move(mean), cs.sigma());
  }

  std::vector<GenomeRecord> Samples() const {
    const int n = search_->params().n;
    std::vector<GenomeRecord> out;
    for (int k = 0; k < search_->params().lambda; ++k) {
      RandomStream rng =
          Stream(spec_, island_, generation_, StreamPurpose::kSample,
                 static_cast<uint32_t>(k));
      Eigen::VectorXd z(n);
      for (int i = 0; i < n; ++i) z[i] = rng.Normal();
      const Eigen::VectorXd x = search_->Sample(z);
      GenomeRecord g;
      g.island = island_;
      g.generation = generation_;
      g.slot = static_cast<uint32_t>(k);
      g.origin = skerry::v1::SAMPLED;
      g.state = skerry::v1::PENDING;
      g.genes.resize(n);
      for (int i = 0; i < n; ++i) {
        g.genes[i] = std::clamp(x[i], spec_.lower_bound(), spec_.upper_bound());
      }
      out.push_back(std::move(g));
    }
    return out;
  }

  const RunSpec spec_;
  const uint32_t island_;
  const bool separable_;
  std::optional<CmaEs> search_;
  uint32_t restarts_ = 0;
  std::string last_stop_;
  uint32_t generation_ = 0;
};

}  // namespace

std::unique_ptr<Strategy> MakeCmaStrategy(const RunSpec& spec,
                                          uint32_t island) {
  return std::make_unique<CmaStrategy>(spec, island);
}

}  // namespace skerry::engine
