// CMA-ES, the covariance matrix adaptation evolution strategy, as written in
// Hansen's tutorial (N. Hansen, "The CMA Evolution Strategy: A Tutorial",
// arXiv:1604.00772, 2016): weighted recombination of the mu best of lambda
// samples, cumulative step-size adaptation (CSA), rank-one and rank-mu updates
// of the covariance, with the default parameters of its Table 1 (positive
// weights only: the optional negative weights of active CMA are not used).
// With `separable`, the covariance is kept diagonal and its learning rates are
// raised by (n + 2) / 3 (sep-CMA-ES: R. Ros and N. Hansen, "A simple
// modification in CMA-ES achieving linear time and space complexity", PPSN
// 2008), for networks of tens of thousands of weights.
//
// This class is the algorithm alone, minimising f: the caller draws each
// sample's standard-normal vector z from its own random stream, calls
// Sample(z) for the point, evaluates it and hands every point and value back
// to Tell(). It holds no randomness, so it is deterministic given the z's;
// ToProto/FromProto save and restore it bit for bit.
//
// The eigendecomposition of C (Eigen's SelfAdjointEigenSolver) is renewed
// lazily, when more than lambda / ((c1 + c_mu) n 10) iterations passed since
// the last (tutorial, Appendix B.2), so an iteration costs O(n^2) amortised.
//
// StopReason() applies the tutorial's termination criteria (Appendix B.3,
// from memory): NoEffectAxis, NoEffectCoord, ConditionCov (1e14),
// EqualFunValues, TolFun (1e-12), TolX (1e-12 sigma0), TolXUp (1e4).
//
// Thread safety: none; one owner.
#ifndef SKERRY_SERVER_ENGINE_CMA_ES_H_
#define SKERRY_SERVER_ENGINE_CMA_ES_H_

#include <string>
#include <vector>

#include "Eigen/Dense"
#include "absl/status/statusor.h"
#include "skerry/v1/strategy.pb.h"

namespace skerry::engine {

// The strategy parameters of the tutorial's Table 1.
struct CmaParameters {
  int n = 0;
  int lambda = 0;
  int mu = 0;
  std::vector<double> weights;  // mu positive weights summing to 1
  double mueff = 0;
  double c_sigma = 0;
  double d_sigma = 0;
  double c_c = 0;
  double c1 = 0;
  double c_mu = 0;
  double chi_n = 0;  // E||N(0, I)||
  bool separable = false;

  // lambda 0: the default 4 + floor(3 ln n).
  static CmaParameters Defaults(int n, int lambda = 0, bool separable = false);
};

class CmaEs {
 public:
  CmaEs(const CmaParameters& params, Eigen::VectorXd mean, double sigma);

  const CmaParameters& params() const { return p_; }
  const Eigen::VectorXd& mean() const { return mean_; }
  double sigma() const { return sigma_; }
  int iteration() const { return iteration_; }

  // The point m + sigma C^(1/2) z for a standard-normal z of length n
  // (C^(1/2) = B D B^T; separable: D).
  Eigen::VectorXd Sample(const Eigen::VectorXd& z) const;

  // One update from lambda points and their values (lower is better; a
  // failed evaluation is +infinity). Ties rank by index.
  void Tell(const std::vector<Eigen::VectorXd>& points,
            const std::vector<double>& values);

  // Empty while the search should go on; else the criterion that holds.
  std::string StopReason() const;

  void ToProto(skerry::v1::CmaState* out) const;
  // InvalidArgument when the state is inconsistent (sizes, values).
  static absl::StatusOr<CmaEs> FromProto(const skerry::v1::CmaState& state);

 private:
  CmaEs() = default;
  void Decompose();
  int HistoryLength() const;

  CmaParameters p_;
  Eigen::VectorXd mean_;
  double sigma_ = 0;
  double sigma0_ = 0;
  Eigen::MatrixXd cov_;   // full; empty when separable
  Eigen::VectorXd diag_;  // separable: the diagonal of C
  Eigen::MatrixXd b_;     // eigenvectors; empty when separable
  Eigen::VectorXd d_;     // square roots of the eigenvalues
  Eigen::VectorXd path_sigma_;
  Eigen::VectorXd path_c_;
  int iteration_ = 0;
  int eigen_iteration_ = 0;
  std::vector<double> best_history_;
  double max_d_sigma0_ = 0;
  double last_range_ = 0;
};

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_CMA_ES_H_
