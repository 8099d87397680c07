#include "rimwatch/engine/diagnostics.h"

#include <Eigen/Cholesky>
#include <Eigen/QR>
#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>
#include <string>

#include "rimwatch/engine/wald.h"

namespace rimwatch {
namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::VectorXd;
using MatrixRef = Eigen::Ref<const MatrixXd>;

constexpr double kEps = std::numeric_limits<double>::epsilon();
// A column counts as constant when its centred root mean square is below this many times
// T eps max|e|: the rounding of the mean alone leaves deviations of that order (naive
// summation), so anything below carries no information.
constexpr double kConstantColumnEps = 8.0;
// Auxiliary regressions run on unit-norm columns; a pivot of the column-pivoted QR below this
// many eps times the largest pivot means the regressors are collinear to working accuracy
// (condition number above about 4.5e11).
constexpr double kRankTolEps = 1e4;
// A covariance counts as singular when some variable keeps less than this many eps of its
// variance after the earlier ones are partialled out (Cholesky pivot^2 / diagonal).
constexpr double kSingularEps = 1e3;

std::string Str(std::int64_t v) { return std::to_string(v); }

Status CheckFinite(const MatrixRef& m, const char* what) {
  for (Index c = 0; c < m.cols(); ++c) {
    for (Index r = 0; r < m.rows(); ++r) {
      if (!std::isfinite(m(r, c))) {
        std::ostringstream msg;
        msg << what << " row " << r + 1 << " column " << c + 1 << " is " << m(r, c)
            << "; diagnostics need finite values";
        return Status::NonFinite(msg.str());
      }
    }
  }
  return Status::Ok();
}

// Shape, finiteness and row count of a residual matrix.
Status CheckResiduals(const MatrixRef& e, std::int64_t min_rows, const char* test) {
  if (e.cols() < 1) {
    return Status::InvalidArgument(std::string(test) + ": residuals have no columns");
  }
  if (e.rows() < min_rows) {
    return Status::NotEnoughRows(std::string(test) + " needs at least " + Str(min_rows) +
                                 " residual rows; have " + Str(e.rows()));
  }
  return CheckFinite(e, "residual");
}

// True when v is constant to working accuracy (see kConstantColumnEps).
bool IsConstant(const VectorXd& v) {
  const double scale = v.cwiseAbs().maxCoeff();
  if (scale == 0.0) return true;
  const Eigen::ArrayXd u = v.array() / scale;  // squares of 1e200 would overflow
  const double rms = std::sqrt((u - u.mean()).square().mean());
  return rms <= kConstantColumnEps * static_cast<double>(v.size()) * kEps;
}

Status ConstantColumns(const MatrixRef& e, const char* test) {
  for (Index i = 0; i < e.cols(); ++i) {
    if (IsConstant(e.col(i))) {
      return Status::Unavailable(std::string(test) + ": residual column " + Str(i + 1) +
                                 " is constant, so its variance is zero");
    }
  }
  return Status::Ok();
}

// Every statistic here is invariant to rescaling a residual column (a diagonal mixing), so each
// column is divided by its largest magnitude first: fourth powers of residuals of order 1e-100
// or 1e100 then neither underflow nor overflow. All-zero columns are left as they are (callers
// reject constant columns).
MatrixXd ScaledColumns(const MatrixRef& e) {
  MatrixXd out = e;
  for (Index j = 0; j < out.cols(); ++j) {
    const double scale = out.col(j).cwiseAbs().maxCoeff();
    if (scale > 0.0) out.col(j) /= scale;
  }
  return out;
}

// Demeaned, column-scaled residuals.
MatrixXd Demeaned(const MatrixRef& e) {
  const MatrixXd s = ScaledColumns(e);
  return s.rowwise() - s.colwise().mean();
}

// Cholesky factor of a covariance, refusing matrices singular to working accuracy.
Status FactorCovariance(const MatrixXd& s, const char* what, Eigen::LLT<MatrixXd>* llt) {
  llt->compute(s);
  if (llt->info() != Eigen::Success) {
    return Status::RankDeficient(std::string(what) + " is not positive definite");
  }
  const MatrixXd& l = llt->matrixLLT();
  for (Index i = 0; i < s.rows(); ++i) {
    if (!(l(i, i) * l(i, i) > kSingularEps * kEps * s(i, i))) {
      return Status::RankDeficient(std::string(what) + " is singular to working accuracy: column " +
                                   Str(i + 1) + " is a linear combination of the earlier ones");
    }
  }
  return Status::Ok();
}

double LogDet(const Eigen::LLT<MatrixXd>& llt) {
  return 2.0 * llt.matrixLLT().diagonal().array().log().sum();
}

// Least-squares fit of y (T x m) on w (T x c), c may be 0: fitted values w b and residuals
// y - w b. Columns of w are scaled to unit norm first so the rank decision does not depend on
// their units (a trend next to a constant).
Status RegressionFit(const MatrixXd& w, const MatrixXd& y, const char* what, MatrixXd* fitted,
                     MatrixXd* resid) {
  if (w.cols() == 0) {
    fitted->setZero(y.rows(), y.cols());
    *resid = y;
    return Status::Ok();
  }
  VectorXd norm = w.colwise().norm().transpose();
  for (Index j = 0; j < norm.size(); ++j) {
    if (norm[j] == 0.0) {
      return Status::RankDeficient(std::string(what) + ": regressor " + Str(j + 1) +
                                   " is zero on every row");
    }
  }
  const MatrixXd ws = w * norm.cwiseInverse().asDiagonal();
  Eigen::ColPivHouseholderQR<MatrixXd> qr(ws);
  qr.setThreshold(kRankTolEps * kEps);
  if (qr.rank() < w.cols()) {
    return Status::RankDeficient(std::string(what) + ": regressor matrix has rank " +
                                 Str(qr.rank()) + " < " + Str(w.cols()) + " columns");
  }
  *fitted = ws * qr.solve(y);
  *resid = y - *fitted;
  return Status::Ok();
}

Status RegressionResiduals(const MatrixXd& w, const MatrixXd& y, const char* what,
                           MatrixXd* resid) {
  MatrixXd fitted;
  return RegressionFit(w, y, what, &fitted, resid);
}

// ARCH-LM for one column (see header).
Status ArchOne(const VectorXd& col, int q, Index eq, ArchLmResult* out) {
  const Index t = col.size();
  const Index rows = t - q;
  const double scale = col.cwiseAbs().maxCoeff();  // R^2 does not depend on the scale of e
  if (scale == 0.0) {
    return Status::Unavailable("ARCH-LM: residual column " + Str(eq + 1) + " is zero");
  }
  const VectorXd s = (col / scale).array().square().matrix();
  // The constant is partialled out by centring s_t and its lags over the test rows, so the
  // explained sum of squares is computed directly and R^2 = ESS / TSS keeps full relative
  // accuracy when it is tiny (1 - RSS / TSS would lose eps / R^2).
  if (IsConstant(s.tail(rows))) {
    return Status::Unavailable("ARCH-LM: squared residuals of column " + Str(eq + 1) +
                               " are constant over the test rows");
  }
  const VectorXd dep = s.tail(rows).array() - s.tail(rows).mean();
  MatrixXd w(rows, q);
  for (int lag = 1; lag <= q; ++lag) {
    const VectorXd v = s.segment(q - lag, rows);
    if (IsConstant(v)) {  // collinear with the constant; centring would leave only rounding
      return Status::RankDeficient("ARCH-LM: lag " + Str(lag) +
                                   " of the squared residuals of column " + Str(eq + 1) +
                                   " is constant over the test rows");
    }
    w.col(lag - 1) = v.array() - v.mean();
  }
  MatrixXd fitted, resid;
  Status st = RegressionFit(w, dep, "ARCH-LM auxiliary regression", &fitted, &resid);
  if (!st.ok()) return st;
  const double rss = resid.squaredNorm();
  const double ess = fitted.squaredNorm();
  const double tss = dep.squaredNorm();
  if (!(rss > kEps * tss)) {
    return Status::Unavailable("ARCH-LM: squared residuals of column " + Str(eq + 1) +
                               " are fitted exactly by their lags");
  }
  const double r2 = ess / tss;
  out->r_squared[eq] = r2;
  out->statistic[eq] = static_cast<double>(rows) * r2;
  out->p_value[eq] = ChiSquaredSurvival(out->statistic[eq], q);
  out->f_statistic[eq] = (ess / q) / (rss / out->f_df2);
  out->f_p_value[eq] = FSurvival(out->f_statistic[eq], q, out->f_df2);
  return Status::Ok();
}

// tr(C_j' C_0^{-1} C_j C_0^{-1}) = ||L^{-1} C_j L^{-T}||_F^2 with C_0 = L L'.
double WhitenedTrace(const Eigen::LLT<MatrixXd>& llt, const MatrixXd& cj) {
  const auto l = llt.matrixL();
  const MatrixXd a = l.solve(cj);                         // L^{-1} C_j
  const MatrixXd d = l.solve(a.transpose()).transpose();  // L^{-1} C_j L^{-T}
  return d.squaredNorm();
}

// Lagged residual block [e_{t-1}, ..., e_{t-h}], zero before the first row.
MatrixXd LaggedResiduals(const MatrixRef& e, int h) {
  const Index t = e.rows(), n = e.cols();
  MatrixXd out = MatrixXd::Zero(t, n * h);
  for (int lag = 1; lag <= h && lag < t; ++lag) {
    out.block(lag, (lag - 1) * n, t - lag, n) = e.topRows(t - lag);
  }
  return out;
}

// Rao's r for Wilks' lambda with K responses and m hypothesis regressors (Rao 1951; the rule
// r = 1 when K^2 + m^2 - 5 <= 0 covers K = 1, m <= 2, where the F form is exact).
double RaoR(double kk, double m) {
  const double den = kk * kk + m * m - 5.0;
  if (den <= 0.0) return 1.0;
  return std::sqrt((kk * kk * m * m - 4.0) / den);
}

}  // namespace

Status ResidualsFromRows(const MatrixRef& rows, const MatrixRef& phi, int lags,
                         ResidualSample* out) {
  const Index n = phi.rows(), k = phi.cols();
  if (rows.rows() != k + n) {
    return Status::InvalidArgument("rows have " + Str(rows.rows()) + " entries; Phi (" + Str(n) +
                                   " x " + Str(k) + ") needs k + n = " + Str(k + n));
  }
  if (lags < 0) return Status::InvalidArgument("lags = " + Str(lags) + " must be >= 0");
  Status st = CheckFinite(phi, "Phi");
  if (!st.ok()) return st;
  st = CheckFinite(rows, "estimation row entry");
  if (!st.ok()) return st;
  out->regressors = rows.topRows(k).transpose();
  out->residuals = rows.bottomRows(n).transpose() - out->regressors * phi.transpose();
  out->lags = lags;
  out->first_index = 0;
  return Status::Ok();
}

Status WindowResiduals(const VarEstimator& est, std::size_t max_rows, ResidualSample* out) {
  MatrixXd phi;
  Status st = est.Coefficients(&phi);
  if (!st.ok()) return st;
  const RowBuffer& buffer = est.buffer();
  if (buffer.size() == 0) return Status::NotEnoughRows("no buffered estimation rows");
  const std::size_t size = max_rows == 0 ? buffer.size() : std::min(max_rows, buffer.size());
  const std::size_t start = buffer.size() - size;
  MatrixXd rows(est.k() + est.n(), static_cast<Index>(size));
  for (std::size_t i = 0; i < size; ++i) rows.col(static_cast<Index>(i)) = buffer.Row(start + i);
  st = ResidualsFromRows(rows, phi, est.spec().lags, out);
  if (!st.ok()) return st;
  out->first_index = buffer.Index(start);
  return Status::Ok();
}

Status ArchLmTest(const MatrixRef& e, int lags, ArchLmResult* out) {
  if (lags < 1) return Status::InvalidArgument("ARCH-LM lags = " + Str(lags) + " must be >= 1");
  Status st = CheckResiduals(e, 2 * static_cast<std::int64_t>(lags) + 2, "ARCH-LM");
  if (!st.ok()) return st;
  const Index n = e.cols();
  *out = ArchLmResult();
  out->lags = lags;
  out->df = lags;
  out->rows_used = e.rows() - lags;
  out->f_df1 = lags;
  out->f_df2 = static_cast<int>(e.rows() - 2 * lags - 1);
  for (VectorXd* v :
       {&out->r_squared, &out->statistic, &out->p_value, &out->f_statistic, &out->f_p_value}) {
    v->setZero(n);
  }
  for (Index i = 0; i < n; ++i) {
    st = ArchOne(e.col(i), lags, i, out);
    if (!st.ok()) return st;
  }
  return Status::Ok();
}

Status LjungBoxTest(const MatrixRef& e, int lags, int model_df, LjungBoxResult* out) {
  if (lags < 1) return Status::InvalidArgument("Ljung-Box lags = " + Str(lags) + " must be >= 1");
  if (model_df < 0 || model_df >= lags) {
    return Status::InvalidArgument("Ljung-Box model_df = " + Str(model_df) +
                                   " must lie in 0..lags-1 = " + Str(lags - 1));
  }
  Status st = CheckResiduals(e, static_cast<std::int64_t>(lags) + 1, "Ljung-Box");
  if (!st.ok()) return st;
  st = ConstantColumns(e, "Ljung-Box");
  if (!st.ok()) return st;
  const MatrixXd u = Demeaned(e);
  const Index t = u.rows();
  const double td = static_cast<double>(t);
  *out = LjungBoxResult();
  out->lags = lags;
  out->model_df = model_df;
  out->df = lags - model_df;
  out->rows = t;
  out->statistic.setZero(u.cols());
  out->p_value.setZero(u.cols());
  for (Index i = 0; i < u.cols(); ++i) {
    const double c0 = u.col(i).squaredNorm();
    double sum = 0.0;
    for (int j = 1; j <= lags; ++j) {
      const double r = u.col(i).tail(t - j).dot(u.col(i).head(t - j)) / c0;  // the 1/T cancels
      sum += r * r / (td - j);
    }
    out->statistic[i] = td * (td + 2.0) * sum;
    out->p_value[i] = ChiSquaredSurvival(out->statistic[i], out->df);
  }
  return Status::Ok();
}

Status PortmanteauTest(const MatrixRef& e, int lags, int var_lags, PortmanteauResult* out) {
  if (var_lags < 0 || lags <= var_lags) {
    return Status::InvalidArgument("portmanteau lags h = " + Str(lags) +
                                   " must exceed the VAR order p = " + Str(var_lags) +
                                   " (the reference chi2 has n^2 (h - p) degrees of freedom)");
  }
  Status st = CheckResiduals(e, std::max<std::int64_t>(lags, e.cols()) + 1, "portmanteau");
  if (!st.ok()) return st;
  st = ConstantColumns(e, "portmanteau");
  if (!st.ok()) return st;
  const MatrixXd u = Demeaned(e);
  const Index t = u.rows(), n = u.cols();
  const double td = static_cast<double>(t);
  Eigen::LLT<MatrixXd> llt;
  st = FactorCovariance(u.transpose() * u / td, "portmanteau: residual covariance C_0", &llt);
  if (!st.ok()) return st;
  double adjusted = 0.0, plain = 0.0;
  for (int j = 1; j <= lags; ++j) {
    const MatrixXd cj = u.bottomRows(t - j).transpose() * u.topRows(t - j) / td;
    const double tr = WhitenedTrace(llt, cj);
    plain += tr;
    adjusted += tr / (td - j);
  }
  *out = PortmanteauResult();
  out->lags = lags;
  out->var_lags = var_lags;
  out->rows = t;
  out->df = static_cast<int>(n * n * (lags - var_lags));
  out->statistic = td * td * adjusted;
  out->p_value = ChiSquaredSurvival(out->statistic, out->df);
  out->unadjusted_statistic = td * plain;
  out->unadjusted_p_value = ChiSquaredSurvival(out->unadjusted_statistic, out->df);
  return Status::Ok();
}

Status BreuschGodfreyTest(const MatrixRef& e, const MatrixRef& x, int lags,
                          BreuschGodfreyResult* out) {
  if (lags < 1) {
    return Status::InvalidArgument("Breusch-Godfrey lags = " + Str(lags) + " must be >= 1");
  }
  const Index n = e.cols(), k = x.cols(), t = e.rows();
  if (x.rows() != t) {
    return Status::InvalidArgument("Breusch-Godfrey: regressors have " + Str(x.rows()) +
                                   " rows, residuals " + Str(t));
  }
  const Index aux = k + n * lags;
  // The auxiliary residuals have T - k - n h degrees of freedom; S_U is singular below n.
  Status st = CheckResiduals(e, aux + n, "Breusch-Godfrey (T >= k + n (h + 1))");
  if (!st.ok()) return st;
  st = CheckFinite(x, "regressor");
  if (!st.ok()) return st;
  st = ConstantColumns(e, "Breusch-Godfrey");
  if (!st.ok()) return st;
  const double td = static_cast<double>(t);
  const double kk = static_cast<double>(n), m = kk * lags;
  const double r = RaoR(kk, m);
  const double q = kk * m / 2.0 - 1.0;
  const double big_n = td - static_cast<double>(k) - m - (kk - m + 1.0) / 2.0;
  const double df2 = big_n * r - q;
  if (!(df2 > 0.0)) {  // defensive: T >= k + n (h + 1) gives N r - q >= 1 (checked for K, h <= 100)
    return Status::NotEnoughRows("Breusch-Godfrey F form: N r - q = " + std::to_string(df2) +
                                 " <= 0 (too few rows for h = " + Str(lags) + ")");
  }
  const MatrixXd y = ScaledColumns(e);
  MatrixXd w(t, aux);
  w << x, LaggedResiduals(y, lags);
  MatrixXd ru, rr;
  st = RegressionResiduals(w, y, "Breusch-Godfrey unrestricted auxiliary regression", &ru);
  if (!st.ok()) return st;
  st = RegressionResiduals(MatrixXd(x), y, "Breusch-Godfrey restricted auxiliary regression", &rr);
  if (!st.ok()) return st;
  const MatrixXd su = ru.transpose() * ru / td, sr = rr.transpose() * rr / td;
  Eigen::LLT<MatrixXd> llt_r, llt_u;
  st = FactorCovariance(sr, "Breusch-Godfrey: restricted residual covariance", &llt_r);
  if (!st.ok()) return st;
  st = FactorCovariance(su, "Breusch-Godfrey: auxiliary residual covariance", &llt_u);
  if (!st.ok()) return st;
  *out = BreuschGodfreyResult();
  out->lags = lags;
  out->rows = t;
  out->regressors = static_cast<int>(k);
  out->lm_df = static_cast<int>(lags * n * n);
  out->lm_statistic = td * (kk - llt_r.solve(su).trace());
  out->lm_p_value = ChiSquaredSurvival(out->lm_statistic, out->lm_df);
  const double log_ratio = LogDet(llt_u) - LogDet(llt_r);  // ln(1 - R_r^2)
  out->wilks_ratio = std::exp(log_ratio);
  out->rao_r = r;
  out->f_df1 = out->lm_df;
  out->f_df2 = df2;
  // (1 - R_r^2)^{-1/r} - 1 = expm1(-ln(1 - R_r^2) / r), accurate when the ratio is near 1.
  out->f_statistic = std::expm1(-log_ratio / r) * df2 / (kk * m);
  out->f_p_value = FSurvival(out->f_statistic, out->f_df1, df2);
  return Status::Ok();
}

Status JarqueBeraTest(const MatrixRef& e, JarqueBeraResult* out) {
  Status st = CheckResiduals(e, 2, "Jarque-Bera");
  if (!st.ok()) return st;
  st = ConstantColumns(e, "Jarque-Bera");
  if (!st.ok()) return st;
  const MatrixXd u = Demeaned(e);
  const Index n = u.cols();
  const double td = static_cast<double>(u.rows());
  *out = JarqueBeraResult();
  out->rows = u.rows();
  for (VectorXd* v : {&out->skewness, &out->kurtosis, &out->statistic, &out->p_value}) {
    v->setZero(n);
  }
  for (Index i = 0; i < n; ++i) {
    const auto d = u.col(i).array();
    const double m2 = d.square().mean();
    const double m3 = d.cube().mean();
    const double m4 = d.square().square().mean();
    const double skew = m3 / std::pow(m2, 1.5);
    const double kurt = m4 / (m2 * m2);
    out->skewness[i] = skew;
    out->kurtosis[i] = kurt;
    out->statistic[i] = td / 6.0 * (skew * skew + 0.25 * (kurt - 3.0) * (kurt - 3.0));
    out->p_value[i] = ChiSquaredSurvival(out->statistic[i], 2.0);
  }
  return Status::Ok();
}

Status MultivariateNormalityTest(const MatrixRef& e, MultivariateNormalityResult* out) {
  Status st = CheckResiduals(e, e.cols() + 1, "multivariate normality (T > n)");
  if (!st.ok()) return st;
  st = ConstantColumns(e, "multivariate normality");
  if (!st.ok()) return st;
  const MatrixXd u = Demeaned(e);
  const Index n = u.cols();
  const double td = static_cast<double>(u.rows());
  Eigen::LLT<MatrixXd> llt;
  st =
      FactorCovariance(u.transpose() * u / td, "multivariate normality: residual covariance", &llt);
  if (!st.ok()) return st;
  const MatrixXd w = llt.matrixL().solve(u.transpose());  // n x T, w_t = P^{-1} u_t
  *out = MultivariateNormalityResult();
  out->rows = u.rows();
  out->skewness = w.array().cube().rowwise().mean().matrix();
  out->excess_kurtosis = (w.array().square().square().rowwise().mean() - 3.0).matrix();
  const int dn = static_cast<int>(n);
  out->skewness_statistic = td * out->skewness.squaredNorm() / 6.0;
  out->skewness_df = dn;
  out->skewness_p_value = ChiSquaredSurvival(out->skewness_statistic, dn);
  out->kurtosis_statistic = td * out->excess_kurtosis.squaredNorm() / 24.0;
  out->kurtosis_df = dn;
  out->kurtosis_p_value = ChiSquaredSurvival(out->kurtosis_statistic, dn);
  out->statistic = out->skewness_statistic + out->kurtosis_statistic;
  out->df = 2 * dn;
  out->p_value = ChiSquaredSurvival(out->statistic, out->df);
  return Status::Ok();
}

ResidualDiagnostics RunResidualDiagnostics(const ResidualSample& sample,
                                           const DiagnosticOptions& options) {
  const MatrixXd& e = sample.residuals;
  ResidualDiagnostics d;
  d.arch_status = ArchLmTest(e, options.arch_lags, &d.arch);
  d.ljung_box_status =
      LjungBoxTest(e, options.ljung_box_lags, options.ljung_box_model_df, &d.ljung_box);
  d.portmanteau_status = PortmanteauTest(e, options.portmanteau_lags, sample.lags, &d.portmanteau);
  d.breusch_godfrey_status =
      BreuschGodfreyTest(e, sample.regressors, options.breusch_godfrey_lags, &d.breusch_godfrey);
  d.jarque_bera_status = JarqueBeraTest(e, &d.jarque_bera);
  d.normality_status = MultivariateNormalityTest(e, &d.normality);
  return d;
}

}  // namespace rimwatch
