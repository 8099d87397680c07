#include "rimwatch/engine/covariance.h"

#include <Eigen/Dense>
#include <cmath>
#include <sstream>

namespace rimwatch {

const char* CovarianceKindName(CovarianceKind kind) {
  switch (kind) {
    case CovarianceKind::kClassical:
      return "classical";
    case CovarianceKind::kHC0:
      return "HC0";
    case CovarianceKind::kHC1:
      return "HC1";
    case CovarianceKind::kHC2:
      return "HC2";
    case CovarianceKind::kHC3:
      return "HC3";
    case CovarianceKind::kHAC:
      return "HAC";
  }
  return "?";
}

bool ParseCovarianceKind(const std::string& text, CovarianceKind* out) {
  static const CovarianceKind kAll[] = {CovarianceKind::kClassical, CovarianceKind::kHC0,
                                        CovarianceKind::kHC1,       CovarianceKind::kHC2,
                                        CovarianceKind::kHC3,       CovarianceKind::kHAC};
  for (CovarianceKind kind : kAll) {
    if (text == CovarianceKindName(kind)) {
      *out = kind;
      return true;
    }
  }
  return false;
}

int NeweyWestLags(std::size_t rows) {
  return static_cast<int>(std::floor(4.0 * std::pow(static_cast<double>(rows) / 100.0, 2.0 / 9.0)));
}

Status CovarianceContext::Create(const VarEstimator& est, const CovarianceOptions& options,
                                 CovarianceContext* out) {
  CovarianceContext c;
  c.options_ = options;
  c.n_ = est.n();
  c.k_ = est.k();
  Status st = est.Coefficients(&c.phi_);
  if (!st.ok()) return st;
  const double dof = est.effective_rows() - c.k_;
  if (dof <= 0.0) {
    return Status::NotEnoughRows("covariance needs T_eff > k; T_eff - k = " + std::to_string(dof));
  }
  st = est.SigmaAdjusted(&c.omega_);
  if (!st.ok()) return st;

  const int k = c.k_;
  const int n = c.n_;
  const RowBuffer& buf = est.buffer();
  const std::size_t rows = buf.size();
  c.info_.rows_used = rows;
  c.info_.truncated = static_cast<std::int64_t>(rows) < est.rows_in_window();
  c.info_.dof = dof;
  c.hc1_scale_ = est.effective_rows() / dof;

  // A = R11^{-1} R11^{-T}.
  const Eigen::MatrixXd& r = est.factor().R();
  const auto r11 = r.topLeftCorner(k, k).triangularView<Eigen::Upper>();
  const Eigen::MatrixXd rinv = r11.solve(Eigen::MatrixXd::Identity(k, k));
  c.a_ = rinv * rinv.transpose();

  Eigen::MatrixXd z = buf.Ordered();
  c.x_ = z.topRows(k);
  Eigen::VectorXd w(static_cast<Eigen::Index>(rows));
  for (std::size_t i = 0; i < rows; ++i)
    w[static_cast<Eigen::Index>(i)] = est.WeightOf(buf.Index(i));
  Eigen::MatrixXd e = z.bottomRows(n) - c.phi_ * c.x_;

  const bool unit_weights = (w.array() == 1.0).all();
  if (options.kind == CovarianceKind::kClassical) {
    if (unit_weights) {
      c.g_ = c.a_;
    } else {
      const Eigen::MatrixXd xw = c.x_ * w.asDiagonal();
      c.g_ = c.a_ * (xw * xw.transpose()) * c.a_;
    }
    *out = std::move(c);
    return Status::Ok();
  }

  Eigen::VectorXd scale = w;
  if (options.kind == CovarianceKind::kHC2 || options.kind == CovarianceKind::kHC3) {
    // h_t = w_t |R11^{-T} x_t|^2, with R11^{-1} already at hand: one matrix product (much faster
    // than a triangular solve with a k x rows right-hand side).
    const Eigen::MatrixXd u = rinv.transpose().triangularView<Eigen::Lower>() * c.x_;
    for (Eigen::Index t = 0; t < static_cast<Eigen::Index>(rows); ++t) {
      const double h = w[t] * u.col(t).squaredNorm();
      if (!(h < 1.0 - 1e-12)) {
        std::ostringstream msg;
        msg << CovarianceKindName(options.kind) << " undefined: row " << buf.Index(t)
            << " has leverage " << h << " (>= 1; the row is fitted exactly)";
        return Status::Numerical(msg.str());
      }
      scale[t] *= options.kind == CovarianceKind::kHC2 ? 1.0 / std::sqrt(1.0 - h) : 1.0 / (1.0 - h);
    }
  }
  c.scaled_e_ = e * scale.asDiagonal();
  if (options.kind == CovarianceKind::kHAC) {
    c.info_.hac_lags = options.hac_lags >= 0 ? options.hac_lags : NeweyWestLags(rows);
  }
  *out = std::move(c);
  return Status::Ok();
}

Eigen::VectorXd CovarianceContext::theta() const {
  const Eigen::MatrixXd phi_t = phi_.transpose();
  return Eigen::Map<const Eigen::VectorXd>(phi_t.data(), phi_t.size());
}

Eigen::MatrixXd CovarianceContext::Meat(const Eigen::Ref<const Eigen::MatrixXd>& s) const {
  Eigen::MatrixXd m = s * s.transpose();
  if (options_.kind == CovarianceKind::kHAC) {
    const Eigen::Index rows = s.cols();
    const int lags = info_.hac_lags;
    for (int l = 1; l <= lags && l < rows; ++l) {
      const double weight = 1.0 - static_cast<double>(l) / (lags + 1.0);
      const Eigen::MatrixXd gamma = s.rightCols(rows - l) * s.leftCols(rows - l).transpose();
      m += weight * (gamma + gamma.transpose());
    }
  }
  if (options_.kind == CovarianceKind::kHC1) m *= hc1_scale_;
  return m;
}

Eigen::MatrixXd CovarianceContext::Full() const {
  const int n = n_;
  const int k = k_;
  if (options_.kind == CovarianceKind::kClassical) {
    Eigen::MatrixXd v(n * k, n * k);
    for (int a = 0; a < n; ++a) {
      for (int b = 0; b < n; ++b) v.block(a * k, b * k, k, k) = omega_(a, b) * g_;
    }
    return v;
  }
  // s_t = (I (x) A) g_t = scaled_e_t (x) (A x_t).
  const Eigen::MatrixXd ax = a_ * x_;
  Eigen::MatrixXd s(n * k, ax.cols());
  for (int i = 0; i < n; ++i) s.middleRows(i * k, k) = ax * scaled_e_.row(i).asDiagonal();
  return Meat(s);
}

Eigen::MatrixXd CovarianceContext::Restricted(const Eigen::Ref<const Eigen::MatrixXd>& r) const {
  const int n = n_;
  const int k = k_;
  const Eigen::Index q = r.rows();
  if (options_.kind == CovarianceKind::kClassical) {
    // R (Omega (x) G) R' = sum_{a,b} Omega_ab R_a G R_b'.
    Eigen::MatrixXd out = Eigen::MatrixXd::Zero(q, q);
    for (int b = 0; b < n; ++b) {
      const Eigen::MatrixXd grb = g_ * r.middleCols(b * k, k).transpose();  // k x q
      for (int a = 0; a < n; ++a) {
        if (omega_(a, b) == 0.0) continue;
        out.noalias() += omega_(a, b) * (r.middleCols(a * k, k) * grb);
      }
    }
    return out;
  }
  // s_t = B g_t = sum_i e~_ti (R_i A) x_t.
  Eigen::MatrixXd s = Eigen::MatrixXd::Zero(q, x_.cols());
  for (int i = 0; i < n; ++i) {
    if (r.middleCols(i * k, k).isZero(0.0)) continue;  // restriction does not touch equation i
    const Eigen::MatrixXd ci = r.middleCols(i * k, k) * a_;  // q x k
    s.noalias() += (ci * x_) * scaled_e_.row(i).asDiagonal();
  }
  return Meat(s);
}

}  // namespace rimwatch
