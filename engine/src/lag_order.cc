#include "rimwatch/engine/lag_order.h"

#include <Eigen/Dense>
#include <cmath>

#include "rimwatch/engine/var_estimator.h"

namespace rimwatch {

Status LagOrderCriteria(const Eigen::Ref<const Eigen::MatrixXd>& data, Deterministic deterministic,
                        int pmax, std::vector<LagCriteria>* out) {
  out->clear();
  if (pmax < 0) return Status::InvalidArgument("criteria: pmax must be >= 0");
  const Eigen::Index rows = data.rows();
  const int n = static_cast<int>(data.cols());
  const double t = static_cast<double>(rows - pmax);
  if (t <= 0.0) {
    return Status::NotEnoughRows("criteria: " + std::to_string(rows) + " rows leave none after " +
                                 std::to_string(pmax) + " presample rows");
  }
  VarSpec spec;
  for (int i = 0; i < n; ++i)
    spec.variables.push_back(std::string(1, 'y').append(std::to_string(i + 1)));
  spec.deterministic = deterministic;
  for (int p = 0; p <= pmax; ++p) {
    spec.lags = p;
    if (spec.k() == 0) continue;
    LagCriteria c;
    c.lags = p;
    VarEstimator est(spec);
    // Start p rows before the common sample, so the first estimation row is data row pmax.
    // (The trend origin then moves with p; only the constant absorbs that, not |Omega_p|.)
    for (Eigen::Index r = pmax - p; r < rows; ++r) {
      UpdateResult u = est.Update(data.row(r).transpose());
      if (!u.status.ok()) return u.status;
    }
    const double k = spec.k();
    const Status rank = est.RankStatus();
    if (!rank.ok()) {
      c.status = rank;
    } else if (t - k <= 0.0) {
      c.status = Status::NotEnoughRows("criteria: p = " + std::to_string(p) + " leaves T - k <= 0");
    } else {
      const Eigen::MatrixXd omega = est.ResidualCrossProduct() / t;
      Eigen::LLT<Eigen::MatrixXd> llt(omega);
      if (llt.info() != Eigen::Success) {
        c.status = Status::RankDeficient("criteria: p = " + std::to_string(p) +
                                         " gives a singular residual covariance");
      } else {
        const double logdet = 2.0 * llt.matrixL().toDenseMatrix().diagonal().array().log().sum();
        const double m = static_cast<double>(p) * n * n + n * spec.num_deterministic();
        c.aic = logdet + 2.0 * m / t;
        c.hq = logdet + 2.0 * std::log(std::log(t)) * m / t;
        c.bic = logdet + std::log(t) * m / t;
        c.fpe = std::pow((t + k) / (t - k), n) * std::exp(logdet);
      }
    }
    out->push_back(c);
  }
  return Status::Ok();
}

}  // namespace rimwatch
