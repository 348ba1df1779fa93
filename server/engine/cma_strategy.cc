// CMA-ES and sep-CMA-ES behind the strategy interface (strategy.h).
//
// Generation g of an island is lambda samples x_k = m + sigma C^(1/2) z_k,
// z_k drawn from stream (seed, island, g, kSample, k); each genome holds x_k
// clamped to [lower_bound, upper_bound] and is evaluated there. Tell ranks the
// generation by score (a failed evaluation ranks last) and updates the
// search from the clamped points (repair, used as the new points: the bounds
// become part of the problem; Hansen 2016, Appendix B.1, from memory). When a
// stop criterion of the tutorial holds, the island starts a new search with
// sigma0 from a new uniform start (stream (seed, island, restart, kStart, 0)):
// with the same lambda, or with IPOP (Auger & Hansen 2005) with lambda times
// the increase factor, up to max_increases times.
//
// An island's generation is always population_size (lambda_0) genomes, so the
// engine, the store and the budget see a fixed population. An update of a
// search whose lambda is lambda_0 x f^k spans f^k generations: Tell holds the
// samples of the generations told so far (saved in the state) and updates the
// search when it has lambda of them. Every generation of the update samples
// the same distribution, each from its own streams.
//
// Migration: a migrant better than every sample of the completed generation
// becomes the mean of the search (step size and covariance kept); other
// migrants, and migrants that arrive in a generation that does not complete
// an update, are ignored.
//
// With distribution genomes (the default; strategy.h DistributionGenomes)
// slot 0 holds the mean the generation samples from (clamped to the bounds)
// and the samples follow at slots 1..lambda_0, each naming it as its parent;
// the mean's score takes no part in the update, but a migrant must beat it
// too to move the mean. A restart's first mean has no parent. Without them
// (runs stored before), a sample has no parents.
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
        separable_(StrategyOf(spec) == StrategyKind::kSepCmaEs),
        distribution_(spec) {}

  absl::StatusOr<std::vector<GenomeRecord>> Start() override {
    restarts_ = 0;
    last_stop_.clear();
    held_genes_.clear();
    held_values_.clear();
    search_ = NewSearch(0);
    generation_ = 0;
    distribution_.Clear();
    return Samples();
  }

  absl::Status Tell(absl::Span<const GenomeRecord> completed,
                    absl::Span<const GenomeRecord* const> migrants) override {
    if (!search_.has_value()) {
      return absl::FailedPreconditionError(
          absl::StrCat("island ", island_, ": told before started"));
    }
    const uint32_t batch = CmaSpecOf(spec_).population_size();
    const size_t expected = distribution_.GenerationSize(batch);
    if (completed.size() != expected) {
      return absl::InvalidArgumentError(
          absl::StrCat("island ", island_, " generation ", generation_, ": ",
                       completed.size(), " genomes, expected ", expected));
    }
    const bool maximize = spec_.objective() == skerry::v1::MAXIMIZE;
    auto value = [maximize](const GenomeRecord& g) {
      if (g.state != skerry::v1::EVALUATED) {
        return std::numeric_limits<double>::infinity();
      }
      return maximize ? -g.score : g.score;
    };
    for (const GenomeRecord& g : distribution_.Samples(completed)) {
      held_genes_.insert(held_genes_.end(), g.genes.begin(), g.genes.end());
      held_values_.push_back(value(g));
    }
    generation_ = completed.front().generation + 1;
    const int lambda = search_->params().lambda;
    if (held_values_.size() < static_cast<size_t>(lambda)) {
      // IPOP: the update needs more generations
      distribution_.Told(completed, nullptr, /*restarted=*/false);
      return absl::OkStatus();
    }
    const int n = search_->params().n;
    std::vector<Eigen::VectorXd> points;
    double best = std::numeric_limits<double>::infinity();
    for (int k = 0; k < lambda; ++k) {
      points.push_back(Eigen::Map<const Eigen::VectorXd>(
          held_genes_.data() + static_cast<size_t>(k) * n, n));
      best = std::min(best, held_values_[k]);
    }
    // A migrant must beat the mean's own score too.
    if (completed.size() > batch) best = std::min(best, value(completed[0]));
    search_->Tell(points, held_values_);
    held_genes_.clear();
    held_values_.clear();
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
    distribution_.Told(completed, better, /*restarted=*/!stop.empty());
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
    for (double v : held_genes_) c->add_held_genes(v);
    for (double v : held_values_) c->add_held_values(v);
    distribution_.Save(&s);
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
    const uint32_t batch = CmaSpecOf(spec_).population_size();
    const size_t held = static_cast<size_t>(c.held_values_size());
    if (c.search().lambda() !=
            CmaPopulationAfter(CmaSpecOf(spec_), c.restarts()) ||
        held % batch != 0 || held >= c.search().lambda() ||
        static_cast<size_t>(c.held_genes_size()) !=
            held * spec_.genome_length()) {
      return absl::InvalidArgumentError(absl::StrCat(
          "island ", island_, ": the saved CMA-ES state's population (",
          c.search().lambda(), " after ", c.restarts(), " restarts, ", held,
          " samples held) does not fit the spec"));
    }
    search_ = std::move(*search);
    held_genes_.assign(c.held_genes().begin(), c.held_genes().end());
    held_values_.assign(c.held_values().begin(), c.held_values().end());
    restarts_ = c.restarts();
    last_stop_ = c.last_stop();
    generation_ = state.generation();
    distribution_.Restore(state);
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
    return CmaEs(
        CmaParameters::Defaults(
            static_cast<int>(n),
            static_cast<int>(CmaPopulationAfter(cs, restart)), separable_),
        std::move(mean), cs.sigma());
  }

  std::vector<GenomeRecord> Samples() const {
    const int n = search_->params().n;
    std::vector<GenomeRecord> out;
    const int batch = static_cast<int>(CmaSpecOf(spec_).population_size());
    for (int k = 0; k < batch; ++k) {
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
    const Eigen::VectorXd& mean = search_->mean();
    distribution_.Add(island_, generation_,
                      absl::MakeConstSpan(mean.data(), mean.size()),
                      spec_.lower_bound(), spec_.upper_bound(), &out);
    return out;
  }

  const RunSpec spec_;
  const uint32_t island_;
  const bool separable_;
  std::optional<CmaEs> search_;
  uint32_t restarts_ = 0;
  std::string last_stop_;
  std::vector<double> held_genes_;  // IPOP: see the top of this file
  std::vector<double> held_values_;
  DistributionGenomes distribution_;
  uint32_t generation_ = 0;
};

}  // namespace

std::unique_ptr<Strategy> MakeCmaStrategy(const RunSpec& spec,
                                          uint32_t island) {
  return std::make_unique<CmaStrategy>(spec, island);
}

}  // namespace skerry::engine
