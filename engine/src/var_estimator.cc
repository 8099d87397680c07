#include "rimwatch/engine/var_estimator.h"

#include <algorithm>
#include <cmath>
#include <sstream>

namespace rimwatch {
namespace {

std::size_t BufferCapacity(const VarSpec& spec) {
  const WindowOptions& w = spec.window;
  switch (w.kind) {
    case WindowKind::kSliding:
      return std::max<std::size_t>(w.rows, 1);
    case WindowKind::kExpanding:
      return w.robust_row_cap;
    case WindowKind::kForgetting: {
      if (w.lambda >= 1.0) return w.robust_row_cap;
      // Keep rows while lambda^age >= weight_floor.
      const double ages = std::ceil(std::log(w.weight_floor) / std::log(w.lambda)) + 1.0;
      return std::min<std::size_t>(w.robust_row_cap, static_cast<std::size_t>(ages));
    }
  }
  return w.robust_row_cap;
}

}  // namespace

VarEstimator::VarEstimator(VarSpec spec)
    : spec_(std::move(spec)),
      n_(spec_.n()),
      k_(spec_.k()),
      factor_(k_, n_),
      buffer_(k_ + n_, BufferCapacity(spec_)),
      history_(Eigen::MatrixXd::Zero(n_, spec_.lags)),
      z_(k_ + n_) {}

std::int64_t VarEstimator::rows_in_window() const {
  if (spec_.window.kind == WindowKind::kSliding) {
    return std::min<std::int64_t>(rows_estimated_, static_cast<std::int64_t>(spec_.window.rows));
  }
  return rows_estimated_;
}

double VarEstimator::WeightOf(std::int64_t t) const {
  if (spec_.window.kind != WindowKind::kForgetting || spec_.window.lambda == 1.0) return 1.0;
  return std::pow(spec_.window.lambda, static_cast<double>(rows_estimated_ - t));
}

void VarEstimator::BuildRegressors(std::int64_t t, Eigen::Ref<Eigen::VectorXd> x) const {
  int j = 0;
  if (spec_.deterministic != Deterministic::kNone) x[j++] = 1.0;
  if (spec_.deterministic == Deterministic::kTrend) x[j++] = static_cast<double>(t + spec_.lags);
  const int p = spec_.lags;
  for (int lag = 1; lag <= p; ++lag) {
    const int col = ((history_head_ - (lag - 1)) % p + p) % p;
    x.segment(j, n_) = history_.col(col);
    j += n_;
  }
}

bool VarEstimator::NextRegressors(Eigen::VectorXd* x) const {
  if (observations_ < spec_.lags) return false;
  x->resize(k_);
  BuildRegressors(rows_estimated_ + 1, *x);
  return true;
}

UpdateResult VarEstimator::Update(const Eigen::Ref<const Eigen::VectorXd>& y, bool predict) {
  UpdateResult result;
  if (y.size() != n_) {
    result.status =
        Status::InvalidArgument("row has " + std::to_string(y.size()) + " values; the model has " +
                                std::to_string(n_) + " variables");
    return result;
  }
  for (int i = 0; i < n_; ++i) {
    if (!std::isfinite(y[i])) {
      std::ostringstream msg;
      msg << "value of '" << spec_.variables[i] << "' is " << y[i]
          << "; rows must be finite (row refused, state unchanged)";
      result.status = Status::NonFinite(msg.str());
      return result;
    }
  }
  const int p = spec_.lags;
  if (observations_ >= p) {
    const std::int64_t t = rows_estimated_ + 1;
    BuildRegressors(t, z_.head(k_));
    z_.tail(n_) = y;
    if (predict && rows_estimated_ > 0 && factor_.FullColumnRank()) {
      factor_.Predict(z_.head(k_), y, &result.prediction_error, &result.prediction_scale);
      result.has_prediction = true;
    }
    const WindowOptions& w = spec_.window;
    bool refold = false;
    switch (w.kind) {
      case WindowKind::kExpanding:
        factor_.Fold(z_);
        buffer_.Push(z_, t);
        effective_rows_ += 1.0;
        break;
      case WindowKind::kForgetting:
        factor_.Scale(w.lambda);
        factor_.Fold(z_);
        buffer_.Push(z_, t);
        effective_rows_ = w.lambda * effective_rows_ + 1.0;
        break;
      case WindowKind::kSliding: {
        factor_.Fold(z_);
        if (buffer_.full()) {
          // The oldest row, read in place (Push overwrites it only afterwards).
          if (!factor_.Downdate(buffer_.Row(0))) refold = true;
          ++downdates_since_refold_;
        }
        buffer_.Push(z_, t);
        const std::size_t every = w.refold_every == 0 ? w.rows : w.refold_every;
        if (downdates_since_refold_ >= static_cast<std::int64_t>(every)) refold = true;
        effective_rows_ = static_cast<double>(buffer_.size());
        break;
      }
    }
    if (refold) Refold();
    rows_estimated_ = t;
    result.estimated = true;
  }
  if (p > 0) {
    history_head_ = (history_head_ + 1) % p;
    history_.col(history_head_) = y;
  }
  ++observations_;
  return result;
}

void VarEstimator::Refold() {
  factor_.Reset();
  for (std::size_t i = 0; i < buffer_.size(); ++i) factor_.Fold(buffer_.Row(i));
  downdates_since_refold_ = 0;
  ++refolds_;
}

Status VarEstimator::RankStatus() const {
  if (rows_estimated_ == 0) {
    return Status::NotEnoughRows("no estimation rows yet (need " + std::to_string(spec_.lags + 1) +
                                 " observations for lag order " + std::to_string(spec_.lags) + ")");
  }
  if (factor_.FullColumnRank()) return Status::Ok();
  const std::vector<int> bad = factor_.DeficientColumns();
  std::ostringstream msg;
  msg << "regressor matrix of the window has rank below k = " << k_ << " (" << rows_in_window()
      << " rows); no independent information for ";
  for (std::size_t i = 0; i < bad.size(); ++i) {
    if (i) msg << ", ";
    msg << spec_.RegressorName(bad[i]);
  }
  msg << " (a constant or collinear series, or too few rows)";
  return Status::RankDeficient(msg.str());
}

Status VarEstimator::Coefficients(Eigen::MatrixXd* phi) const {
  Status st = RankStatus();
  if (!st.ok()) return st;
  factor_.Coefficients(phi);
  return Status::Ok();
}

Status VarEstimator::SigmaMl(Eigen::MatrixXd* sigma) const {
  if (effective_rows_ <= 0.0) return Status::NotEnoughRows("no estimation rows yet");
  *sigma = factor_.ResidualCrossProduct() / effective_rows_;
  return Status::Ok();
}

Status VarEstimator::SigmaAdjusted(Eigen::MatrixXd* sigma) const {
  const double dof = effective_rows_ - k_;
  if (dof <= 0.0) {
    return Status::NotEnoughRows("residual degrees of freedom T_eff - k = " + std::to_string(dof) +
                                 " <= 0");
  }
  *sigma = factor_.ResidualCrossProduct() / dof;
  return Status::Ok();
}

}  // namespace rimwatch
