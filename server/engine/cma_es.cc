#include "server/engine/cma_es.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include "Eigen/Eigenvalues"
#include "absl/strings/str_cat.h"

namespace skerry::engine {
namespace {

Eigen::VectorXd ToVector(const google::protobuf::RepeatedField<double>& r) {
  Eigen::VectorXd v(r.size());
  for (int i = 0; i < r.size(); ++i) v[i] = r[i];
  return v;
}

void FromVector(const Eigen::VectorXd& v,
                google::protobuf::RepeatedField<double>* out) {
  out->Reserve(static_cast<int>(v.size()));
  for (Eigen::Index i = 0; i < v.size(); ++i) out->Add(v[i]);
}

// Row-major, as the proto says.
Eigen::MatrixXd ToMatrix(const google::protobuf::RepeatedField<double>& r,
                         int n) {
  Eigen::MatrixXd m(n, n);
  for (int i = 0; i < n; ++i) {
    for (int j = 0; j < n; ++j) m(i, j) = r[i * n + j];
  }
  return m;
}

void FromMatrix(const Eigen::MatrixXd& m,
                google::protobuf::RepeatedField<double>* out) {
  out->Reserve(static_cast<int>(m.size()));
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) out->Add(m(i, j));
  }
}

}  // namespace

CmaParameters CmaParameters::Defaults(int n, int lambda, bool separable) {
  // Hansen 2016, Table 1 (default strategy parameters).
  CmaParameters p;
  p.n = n;
  p.separable = separable;
  p.lambda =
      lambda > 0 ? lambda : 4 + static_cast<int>(std::floor(3 * std::log(n)));
  p.mu = p.lambda / 2;
  double sum = 0, sum_sq = 0;
  for (int i = 1; i <= p.mu; ++i) {
    const double w = std::log((p.lambda + 1) / 2.0) - std::log(i);
    p.weights.push_back(w);
    sum += w;
  }
  for (double& w : p.weights) {
    w /= sum;
    sum_sq += w * w;
  }
  p.mueff = 1.0 / sum_sq;
  const double dn = n;
  p.c_sigma = (p.mueff + 2) / (dn + p.mueff + 5);
  p.d_sigma = 1 + 2 * std::max(0.0, std::sqrt((p.mueff - 1) / (dn + 1)) - 1) +
              p.c_sigma;
  p.c_c = (4 + p.mueff / dn) / (dn + 4 + 2 * p.mueff / dn);
  constexpr double kAlphaCov = 2;
  p.c1 = kAlphaCov / ((dn + 1.3) * (dn + 1.3) + p.mueff);
  p.c_mu =
      std::min(1 - p.c1, kAlphaCov * (p.mueff - 2 + 1 / p.mueff) /
                             ((dn + 2) * (dn + 2) + kAlphaCov * p.mueff / 2));
  if (separable) {
    // Ros & Hansen 2008: the diagonal learns (n + 2) / 3 times faster.
    const double boost = (dn + 2) / 3;
    p.c1 = std::min(1.0, p.c1 * boost);
    p.c_mu = std::min(1 - p.c1, p.c_mu * boost);
  }
  p.chi_n = std::sqrt(dn) * (1 - 1 / (4 * dn) + 1 / (21 * dn * dn));
  return p;
}

CmaEs::CmaEs(const CmaParameters& params, Eigen::VectorXd mean, double sigma)
    : p_(params), mean_(std::move(mean)), sigma_(sigma), sigma0_(sigma) {
  const int n = p_.n;
  if (p_.separable) {
    diag_ = Eigen::VectorXd::Ones(n);
  } else {
    cov_ = Eigen::MatrixXd::Identity(n, n);
    b_ = Eigen::MatrixXd::Identity(n, n);
  }
  d_ = Eigen::VectorXd::Ones(n);
  path_sigma_ = Eigen::VectorXd::Zero(n);
  path_c_ = Eigen::VectorXd::Zero(n);
  max_d_sigma0_ = sigma;
}

Eigen::VectorXd CmaEs::Sample(const Eigen::VectorXd& z) const {
  if (p_.separable) return mean_ + sigma_ * d_.cwiseProduct(z);
  // The symmetric root C^(1/2) = B D B^T rather than the tutorial's B D: the
  // same distribution, but unaffected by the signs and order the solver gives
  // the eigenvectors, so a rotated problem with rotated z's follows the same
  // path (the invariance test relies on it).
  return mean_ + sigma_ * (b_ * d_.cwiseProduct(b_.transpose() * z));
}

int CmaEs::HistoryLength() const {
  // EqualFunValues and TolFun look back 10 + ceil(30 n / lambda) iterations.
  return 10 + (30 * p_.n + p_.lambda - 1) / p_.lambda;
}

void CmaEs::Tell(const std::vector<Eigen::VectorXd>& points,
                 const std::vector<double>& values) {
  const int n = p_.n;
  std::vector<int> order(values.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(),
                   [&](int a, int b) { return values[a] < values[b]; });

  // Selection and recombination: <y>_w over the mu best.
  std::vector<Eigen::VectorXd> y(p_.mu);
  Eigen::VectorXd yw = Eigen::VectorXd::Zero(n);
  for (int i = 0; i < p_.mu; ++i) {
    y[i] = (points[order[i]] - mean_) / sigma_;
    yw += p_.weights[i] * y[i];
  }
  mean_ += sigma_ * yw;  // c_m = 1

  // Step-size control: the conjugate path uses C^(-1/2) <y>_w.
  Eigen::VectorXd c_inv_sqrt_yw;
  if (p_.separable) {
    c_inv_sqrt_yw = yw.cwiseQuotient(d_);
  } else {
    c_inv_sqrt_yw = b_ * (b_.transpose() * yw).cwiseQuotient(d_);
  }
  const double cs = p_.c_sigma;
  path_sigma_ = (1 - cs) * path_sigma_ +
                std::sqrt(cs * (2 - cs) * p_.mueff) * c_inv_sqrt_yw;
  ++iteration_;
  const double ps_norm = path_sigma_.norm();
  const bool h_sigma =
      ps_norm / std::sqrt(1 - std::pow(1 - cs, 2.0 * iteration_)) <
      (1.4 + 2.0 / (n + 1)) * p_.chi_n;

  // Covariance adaptation: rank-one (evolution path) and rank-mu.
  const double cc = p_.c_c;
  path_c_ = (1 - cc) * path_c_ +
            (h_sigma ? std::sqrt(cc * (2 - cc) * p_.mueff) : 0.0) * yw;
  const double delta_h = h_sigma ? 0.0 : cc * (2 - cc);
  const double keep = 1 + p_.c1 * delta_h - p_.c1 - p_.c_mu;  // sum w = 1
  if (p_.separable) {
    Eigen::VectorXd rank_mu = Eigen::VectorXd::Zero(n);
    for (int i = 0; i < p_.mu; ++i) {
      rank_mu += p_.weights[i] * y[i].cwiseProduct(y[i]);
    }
    diag_ = keep * diag_ + p_.c1 * path_c_.cwiseProduct(path_c_) +
            p_.c_mu * rank_mu;
  } else {
    Eigen::MatrixXd rank_mu = Eigen::MatrixXd::Zero(n, n);
    for (int i = 0; i < p_.mu; ++i) {
      rank_mu.noalias() += p_.weights[i] * y[i] * y[i].transpose();
    }
    cov_ =
        keep * cov_ + p_.c1 * path_c_ * path_c_.transpose() + p_.c_mu * rank_mu;
  }
  sigma_ *= std::exp((cs / p_.d_sigma) * (ps_norm / p_.chi_n - 1));

  // What the stop criteria look at.
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (double v : values) {
    if (!std::isfinite(v)) continue;
    lo = std::min(lo, v);
    hi = std::max(hi, v);
  }
  best_history_.push_back(values[order[0]]);
  if (static_cast<int>(best_history_.size()) > HistoryLength()) {
    best_history_.erase(best_history_.begin());
  }
  last_range_ = hi >= lo ? hi - lo : std::numeric_limits<double>::infinity();

  if (p_.separable) {
    d_ = diag_.cwiseSqrt();
  } else if (iteration_ - eigen_iteration_ >
             p_.lambda / ((p_.c1 + p_.c_mu) * n * 10)) {
    Decompose();
  }
}

void CmaEs::Decompose() {
  // Symmetric by construction up to rounding; make it exactly so.
  cov_ = cov_.triangularView<Eigen::Upper>();
  cov_.triangularView<Eigen::StrictlyLower>() = cov_.transpose();
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(cov_);
  b_ = es.eigenvectors();
  d_ = es.eigenvalues().cwiseMax(0.0).cwiseSqrt();
  eigen_iteration_ = iteration_;
}

std::string CmaEs::StopReason() const {
  const int n = p_.n;
  const double dmax = d_.maxCoeff(), dmin = d_.minCoeff();
  if (!(dmin > 0) || (dmax / dmin) * (dmax / dmin) > 1e14) {
    return "ConditionCov";
  }
  const bool full_history =
      static_cast<int>(best_history_.size()) >= HistoryLength();
  if (full_history) {
    const auto [lo, hi] =
        std::minmax_element(best_history_.begin(), best_history_.end());
    if (std::isfinite(*lo) && std::isfinite(*hi)) {
      if (*hi == *lo) return "EqualFunValues";
      if (*hi - *lo < 1e-12 && last_range_ < 1e-12) return "TolFun";
    }
  }
  bool small = true;
  for (int i = 0; i < n && small; ++i) {
    const double c_ii = p_.separable ? diag_[i] : cov_(i, i);
    small = sigma_ * std::abs(path_c_[i]) < 1e-12 * sigma0_ &&
            sigma_ * std::sqrt(c_ii) < 1e-12 * sigma0_;
  }
  if (small) return "TolX";
  if (sigma_ * dmax > 1e4 * max_d_sigma0_) return "TolXUp";
  for (int i = 0; i < n; ++i) {
    const double c_ii = p_.separable ? diag_[i] : cov_(i, i);
    if (mean_[i] == mean_[i] + 0.2 * sigma_ * std::sqrt(c_ii)) {
      return "NoEffectCoord";
    }
  }
  if (!p_.separable && iteration_ > 0) {
    const int axis = iteration_ % n;
    const Eigen::VectorXd moved =
        mean_ + 0.1 * sigma_ * d_[axis] * b_.col(axis);
    if (moved == mean_) return "NoEffectAxis";
  }
  return "";
}

void CmaEs::ToProto(skerry::v1::CmaState* out) const {
  out->Clear();
  out->set_dimension(static_cast<uint32_t>(p_.n));
  out->set_lambda(static_cast<uint32_t>(p_.lambda));
  out->set_separable(p_.separable);
  FromVector(mean_, out->mutable_mean());
  out->set_sigma(sigma_);
  out->set_sigma0(sigma0_);
  if (p_.separable) {
    FromVector(diag_, out->mutable_cov());
  } else {
    FromMatrix(cov_, out->mutable_cov());
    FromMatrix(b_, out->mutable_eigen_b());
  }
  FromVector(d_, out->mutable_eigen_d());
  FromVector(path_sigma_, out->mutable_path_sigma());
  FromVector(path_c_, out->mutable_path_c());
  out->set_iteration(static_cast<uint32_t>(iteration_));
  out->set_eigen_iteration(static_cast<uint32_t>(eigen_iteration_));
  for (double v : best_history_) out->add_best_history(v);
  out->set_max_d_sigma0(max_d_sigma0_);
  out->set_last_range(last_range_);
}

absl::StatusOr<CmaEs> CmaEs::FromProto(const skerry::v1::CmaState& s) {
  const int n = static_cast<int>(s.dimension());
  const int nn = s.separable() ? n : n * n;
  if (n < 1 || s.lambda() < 2 || s.mean_size() != n || s.cov_size() != nn ||
      s.eigen_d_size() != n || s.path_sigma_size() != n ||
      s.path_c_size() != n || s.eigen_b_size() != (s.separable() ? 0 : nn) ||
      !(s.sigma() > 0)) {
    return absl::InvalidArgumentError(absl::StrCat(
        "CMA-ES state of dimension ", n, " has inconsistent sizes or step"));
  }
  CmaEs c;
  c.p_ =
      CmaParameters::Defaults(n, static_cast<int>(s.lambda()), s.separable());
  c.mean_ = ToVector(s.mean());
  c.sigma_ = s.sigma();
  c.sigma0_ = s.sigma0();
  if (s.separable()) {
    c.diag_ = ToVector(s.cov());
  } else {
    c.cov_ = ToMatrix(s.cov(), n);
    c.b_ = ToMatrix(s.eigen_b(), n);
  }
  c.d_ = ToVector(s.eigen_d());
  c.path_sigma_ = ToVector(s.path_sigma());
  c.path_c_ = ToVector(s.path_c());
  c.iteration_ = static_cast<int>(s.iteration());
  c.eigen_iteration_ = static_cast<int>(s.eigen_iteration());
  c.best_history_.assign(s.best_history().begin(), s.best_history().end());
  c.max_d_sigma0_ = s.max_d_sigma0();
  c.last_range_ = s.last_range();
  return c;
}

}  // namespace skerry::engine
