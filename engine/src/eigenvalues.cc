#include "rimwatch/engine/eigenvalues.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <vector>

namespace rimwatch {
namespace {

constexpr int kMaxSteps = 30;  // QR steps per eigenvalue (EISPACK's limit)

// Row-major view of the scratch matrix.
class Square {
 public:
  Square(double* data, int m) : data_(data), m_(m) {}
  double& operator()(int i, int j) { return data_[static_cast<std::size_t>(i) * m_ + j]; }

 private:
  double* data_;
  int m_;
};

// Reduces h to upper Hessenberg form by Householder reflections P_k = I - tau v v' (v_0 = 1)
// applied from both sides: a similarity, so the eigenvalues are unchanged. Entries below the
// subdiagonal are set to zero exactly.
void ReduceToHessenberg(Square& h, int m, std::vector<double>* v) {
  v->resize(static_cast<std::size_t>(m));
  for (int k = 0; k + 2 < m; ++k) {
    double tail = 0.0;  // |x_{1:}|^2 of x = h(k+1:m, k)
    for (int i = k + 2; i < m; ++i) tail += h(i, k) * h(i, k);
    if (tail == 0.0) continue;  // already zero below the subdiagonal
    const double x0 = h(k + 1, k);
    const double beta = -std::copysign(std::sqrt(x0 * x0 + tail), x0);
    const double tau = (beta - x0) / beta;
    const double inv = 1.0 / (x0 - beta);
    const int len = m - k - 1;
    (*v)[0] = 1.0;
    for (int i = 1; i < len; ++i) (*v)[i] = h(k + 1 + i, k) * inv;
    // From the left, on rows k+1.. and columns k+1.. (column k becomes beta e_1).
    for (int j = k + 1; j < m; ++j) {
      double s = 0.0;
      for (int i = 0; i < len; ++i) s += (*v)[i] * h(k + 1 + i, j);
      s *= tau;
      for (int i = 0; i < len; ++i) h(k + 1 + i, j) -= s * (*v)[i];
    }
    h(k + 1, k) = beta;
    for (int i = k + 2; i < m; ++i) h(i, k) = 0.0;
    // From the right, on every row and columns k+1..
    for (int i = 0; i < m; ++i) {
      double s = 0.0;
      for (int j = 0; j < len; ++j) s += h(i, k + 1 + j) * (*v)[j];
      s *= tau;
      for (int j = 0; j < len; ++j) h(i, k + 1 + j) -= s * (*v)[j];
    }
  }
}

// Francis double-shift QR on the upper Hessenberg h (EISPACK HQR, eigenvalues only). The active
// block is rows and columns l..nn; a negligible subdiagonal entry splits it, and each converged
// 1 x 1 or 2 x 2 trailing block gives one real eigenvalue or a pair.
// shifts (may be null): approximate eigenvalues of the unscaled matrix, in out's order, for the
// first step of each deflation (see RealEigenvalues); scale: what h was divided by.
bool HessenbergEigenvalues(Square& h, int m, const Eigen::VectorXcd* shifts, double scale,
                           Eigen::VectorXcd* out) {
  double norm = 0.0;  // of the Hessenberg part: the yardstick for an all-zero diagonal pair
  for (int i = 0; i < m; ++i) {
    for (int j = std::max(i - 1, 0); j < m; ++j) norm += std::abs(h(i, j));
  }
  int nn = m - 1;
  double shift_total = 0.0;  // exceptional shifts subtracted from the diagonal so far
  while (nn >= 0) {
    int steps = 0;
    int l = 0;
    do {
      // The lowest l such that h(l, l-1) is negligible against its diagonal neighbours.
      for (l = nn; l >= 1; --l) {
        double s = std::abs(h(l - 1, l - 1)) + std::abs(h(l, l));
        if (s == 0.0) s = norm;
        if (std::abs(h(l, l - 1)) + s == s) {
          h(l, l - 1) = 0.0;
          break;
        }
      }
      double x = h(nn, nn);
      if (l == nn) {  // a 1 x 1 block: one real eigenvalue
        (*out)[nn] = x + shift_total;
        --nn;
        continue;
      }
      double y = h(nn - 1, nn - 1);
      double w = h(nn, nn - 1) * h(nn - 1, nn);
      if (l == nn - 1) {  // a 2 x 2 block: a real pair or a complex conjugate pair
        const double p = 0.5 * (y - x);
        const double q = p * p + w;
        double z = std::sqrt(std::abs(q));
        x += shift_total;
        if (q >= 0.0) {
          z = p + std::copysign(z, p);
          (*out)[nn - 1] = x + z;
          (*out)[nn] = z != 0.0 ? x - w / z : x + z;
        } else {
          (*out)[nn - 1] = std::complex<double>(x + p, z);
          (*out)[nn] = std::complex<double>(x + p, -z);
        }
        nn -= 2;
        continue;
      }
      if (steps == kMaxSteps) return false;
      if (steps == 0 && shifts != nullptr) {
        // The given pair for positions nn-1, nn as the double shift: with sum sigma and product
        // pi, x = y = sigma / 2 and w = sigma^2 / 4 - pi give the same first column
        // (x - z)(y - z) - w = z^2 - sigma z + pi as a pair taken from the trailing block.
        const std::complex<double> g1 = (*shifts)[nn - 1] / scale - shift_total;
        const std::complex<double> g2 = (*shifts)[nn] / scale - shift_total;
        double sigma = 0.0, pi = 0.0;
        bool usable = std::isfinite(std::abs(g1)) && std::isfinite(std::abs(g2));
        if (usable && g1.imag() == 0.0 && g2.imag() == 0.0) {
          sigma = g1.real() + g2.real();
          pi = g1.real() * g2.real();
        } else if (usable && g1 == std::conj(g2)) {
          sigma = 2.0 * g1.real();
          pi = std::norm(g1);
        } else {
          usable = false;  // not a real pair or a conjugate pair: the block's own shifts
        }
        if (usable) {
          x = y = 0.5 * sigma;
          w = 0.25 * sigma * sigma - pi;
        }
      }
      if (steps == 10 || steps == 20) {  // exceptional shift, to break a cycle
        shift_total += x;
        for (int i = 0; i <= nn; ++i) h(i, i) -= x;
        const double s = std::abs(h(nn, nn - 1)) + std::abs(h(nn - 1, nn - 2));
        x = y = 0.75 * s;
        w = -0.4375 * s * s;
      }
      ++steps;
      // The double shift's first column, and the highest mm >= l from which the bulge can start
      // (two consecutive small subdiagonal entries make the rows above irrelevant).
      int mm = nn - 2;
      double p = 0.0, q = 0.0, r = 0.0;
      for (; mm >= l; --mm) {
        const double z = h(mm, mm);
        const double rr = x - z;
        const double ss = y - z;
        p = (rr * ss - w) / h(mm + 1, mm) + h(mm, mm + 1);
        q = h(mm + 1, mm + 1) - z - rr - ss;
        r = h(mm + 2, mm + 1);
        const double s = std::abs(p) + std::abs(q) + std::abs(r);
        p /= s;
        q /= s;
        r /= s;
        if (mm == l) break;
        const double u = std::abs(h(mm, mm - 1)) * (std::abs(q) + std::abs(r));
        const double v =
            std::abs(p) * (std::abs(h(mm - 1, mm - 1)) + std::abs(z) + std::abs(h(mm + 1, mm + 1)));
        if (u + v == v) break;
      }
      for (int i = mm + 2; i <= nn; ++i) {
        h(i, i - 2) = 0.0;
        if (i != mm + 2) h(i, i - 3) = 0.0;
      }
      // Chase the bulge down with 3 x 3 (last one 2 x 2) reflections.
      for (int k = mm; k <= nn - 1; ++k) {
        if (k != mm) {
          p = h(k, k - 1);
          q = h(k + 1, k - 1);
          r = k != nn - 1 ? h(k + 2, k - 1) : 0.0;
          x = std::abs(p) + std::abs(q) + std::abs(r);
          if (x != 0.0) {
            p /= x;
            q /= x;
            r /= x;
          }
        }
        const double s = std::copysign(std::sqrt(p * p + q * q + r * r), p);
        if (s == 0.0) continue;
        if (k == mm) {
          if (l != mm) h(k, k - 1) = -h(k, k - 1);
        } else {
          h(k, k - 1) = -s * x;
        }
        p += s;
        x = p / s;
        y = q / s;
        const double z = r / s;
        q /= p;
        r /= p;
        for (int j = k; j <= nn; ++j) {  // rows k, k+1, k+2
          double t = h(k, j) + q * h(k + 1, j);
          if (k != nn - 1) {
            t += r * h(k + 2, j);
            h(k + 2, j) -= t * z;
          }
          h(k + 1, j) -= t * y;
          h(k, j) -= t * x;
        }
        const int last = std::min(nn, k + 3);
        for (int i = l; i <= last; ++i) {  // columns k, k+1, k+2
          double t = x * h(i, k) + y * h(i, k + 1);
          if (k != nn - 1) {
            t += z * h(i, k + 2);
            h(i, k + 2) -= t * r;
          }
          h(i, k + 1) -= t * q;
          h(i, k) -= t;
        }
      }
    } while (l < nn - 1);
  }
  return true;
}

}  // namespace

bool RealEigenvalues(const Eigen::Ref<const Eigen::MatrixXd>& a, Eigen::VectorXcd* out,
                     const Eigen::VectorXcd* shifts) {
  const int m = static_cast<int>(a.rows());
  if (shifts != nullptr && shifts->size() != m) shifts = nullptr;
  out->resize(m);
  if (m == 0) return true;
  if (!a.allFinite()) return false;
  const double scale = a.cwiseAbs().maxCoeff();
  if (scale == 0.0) {
    out->setZero();
    return true;
  }
  thread_local std::vector<double> buffer;
  thread_local std::vector<double> reflector;
  buffer.resize(static_cast<std::size_t>(m) * m);
  Square h(buffer.data(), m);
  for (int i = 0; i < m; ++i) {
    for (int j = 0; j < m; ++j) h(i, j) = a(i, j) / scale;
  }
  ReduceToHessenberg(h, m, &reflector);
  if (!HessenbergEigenvalues(h, m, shifts, scale, out)) return false;
  *out *= scale;
  return true;
}

}  // namespace rimwatch
