#include "ident/sine_fit.h"

#include <Eigen/Dense>
#include <cmath>
#include <numbers>

namespace benchid::ident {

namespace {
// Residual and total rms of y against A cos(w t + th) + C.
void finish(SineFit& f, const double* y, std::size_t n, double w, double rate_hz, double t0_s) {
  double mean = 0;
  for (std::size_t i = 0; i < n; ++i) mean += y[i];
  mean /= static_cast<double>(n);
  double rr = 0, tt = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double t = t0_s + static_cast<double>(i) / rate_hz;
    const double r = y[i] - (f.amplitude * std::cos(w * t + f.phase_rad) + f.offset);
    rr += r * r;
    tt += (y[i] - mean) * (y[i] - mean);
  }
  f.residual_rms = std::sqrt(rr / static_cast<double>(n));
  f.total_rms = std::sqrt(tt / static_cast<double>(n));
  f.samples = n;
}

// Solves the (3 or 4)-column normal equations; columns cos, sin, 1[, dw].
Eigen::VectorXd solve(const double* y, std::size_t n, double w, double rate_hz, double t0_s, bool with_w, double a,
                      double b, double t_mid) {
  const int m = with_w ? 4 : 3;
  Eigen::MatrixXd ata = Eigen::MatrixXd::Zero(m, m);
  Eigen::VectorXd aty = Eigen::VectorXd::Zero(m);
  Eigen::VectorXd row(m);
  for (std::size_t i = 0; i < n; ++i) {
    const double t = t0_s + static_cast<double>(i) / rate_hz;
    const double c = std::cos(w * t), s = std::sin(w * t);
    row(0) = c;
    row(1) = s;
    row(2) = 1.0;
    // the frequency column uses time from the window's middle: the same
    // model, better conditioned
    if (with_w) row(3) = (t - t_mid) * (-a * s + b * c);
    ata.noalias() += row * row.transpose();
    aty.noalias() += row * y[i];
  }
  return ata.ldlt().solve(aty);
}
}  // namespace

SineFit fit_sine3(const double* y, std::size_t n, double freq_hz, double rate_hz, double t0_s) {
  SineFit f;
  f.freq_hz = freq_hz;
  const double w = 2 * std::numbers::pi * freq_hz;
  const Eigen::VectorXd x = solve(y, n, w, rate_hz, t0_s, false, 0, 0, 0);
  f.amplitude = std::hypot(x(0), x(1));
  f.phase_rad = std::atan2(-x(1), x(0));
  f.offset = x(2);
  finish(f, y, n, w, rate_hz, t0_s);
  return f;
}

SineFit fit_sine4(const double* y, std::size_t n, double freq_hz, double rate_hz, double t0_s, int max_iter) {
  double w = 2 * std::numbers::pi * freq_hz;
  Eigen::VectorXd x = solve(y, n, w, rate_hz, t0_s, false, 0, 0, 0);
  const double t_mid = t0_s + 0.5 * static_cast<double>(n - 1) / rate_hz;
  SineFit f;
  f.converged = false;
  for (int it = 0; it < max_iter; ++it) {
    // Linearise around w: a cos((w+dw)t) + b sin((w+dw)t) ~ ... + dw t (-a sin + b cos).
    // Time is measured from the window's middle in the extra column, so the
    // phase reference shifts by dw*t_mid; the next pass re-solves a, b at
    // the new w, which absorbs it.
    const Eigen::VectorXd z = solve(y, n, w, rate_hz, t0_s, true, x(0), x(1), t_mid);
    w += z(3);
    x = solve(y, n, w, rate_hz, t0_s, false, 0, 0, 0);
    f.iterations = it + 1;
    if (std::fabs(z(3)) < 1e-12 * w) {
      f.converged = true;
      break;
    }
  }
  f.freq_hz = w / (2 * std::numbers::pi);
  f.amplitude = std::hypot(x(0), x(1));
  f.phase_rad = std::atan2(-x(1), x(0));
  f.offset = x(2);
  finish(f, y, n, w, rate_hz, t0_s);
  return f;
}

}  // namespace benchid::ident
