#include "ident/fftw_lock.h"
#include "loop/step.h"

#include <fftw3.h>

#include <algorithm>
#include <cmath>

#include "ident/error.h"

namespace benchid::loop {

namespace {

std::vector<double> step_of(const std::function<cplx(double)>& h_of_f, std::size_t n, double fs) {
  std::vector<cplx> spec(n / 2 + 1);
  for (std::size_t k = 0; k < spec.size(); ++k) spec[k] = h_of_f(static_cast<double>(k) * fs / static_cast<double>(n));
  spec.back() = spec.back().real();
  std::vector<double> imp(n);
  fftw_plan p = locked_plan_dft_c2r_1d(static_cast<int>(n), reinterpret_cast<fftw_complex*>(spec.data()), imp.data(),
                                     FFTW_ESTIMATE);
  fftw_execute(p);
  locked_destroy_plan(p);
  std::vector<double> y(n);
  double acc = 0;
  for (std::size_t i = 0; i < n; ++i) {
    acc += imp[i] / static_cast<double>(n);
    y[i] = acc;
  }
  return y;
}

// first time (interpolated) at which y reaches level, moving from 0 towards
// it (upward for a positive level, downward for a negative one); 0 when the
// response starts at or beyond it (a loop with feedthrough jumps at t = 0);
// NaN for level 0 or when it is never reached
double crossing(const std::vector<double>& y, double dt, double level) {
  if (level == 0 || y.empty()) return std::numeric_limits<double>::quiet_NaN();
  const double sg = level > 0 ? 1.0 : -1.0;
  if (sg * y[0] >= sg * level) return 0.0;
  for (std::size_t i = 1; i < y.size(); ++i)
    if (sg * y[i - 1] < sg * level && sg * y[i] >= sg * level)
      return dt * (static_cast<double>(i - 1) + (level - y[i - 1]) / (y[i] - y[i - 1]));
  return std::numeric_limits<double>::quiet_NaN();
}

// last time (interpolated) at which |y - target| exceeds band
double last_outside(const std::vector<double>& y, double dt, double target, double band, std::size_t upto) {
  for (std::size_t i = upto; i-- > 1;) {
    if (std::fabs(y[i] - target) > band) {
      if (i + 1 >= y.size()) return dt * static_cast<double>(i);
      const double a = std::fabs(y[i] - target) - band, b = std::fabs(y[i + 1] - target) - band;
      return dt * (static_cast<double>(i) + a / (a - b));
    }
  }
  return 0.0;
}

}  // namespace

StepMetrics step_metrics(const LoopFn& loop, double f_scale_hz, double low_hz, const LoopFn& reference) {
  if (!(f_scale_hz > 0) || !(low_hz > 0)) throw InputError("step metrics need positive time scales");
  const double fs = 400 * f_scale_hz;
  const double duration = std::max(60.0 / (2 * M_PI * low_hz), 60.0 / f_scale_hz);
  std::size_t n = 1024;
  while (static_cast<double>(n) / fs < 2 * duration && n < (std::size_t{1} << 24)) n *= 2;
  auto t_of = [&](double f) {
    const double fe = f == 0 ? 1e-9 * f_scale_hz : f;  // the DC limit (integrators make L infinite at 0)
    const cplx l = loop(fe);
    const cplx n = reference ? reference(fe) : l;
    if (!std::isfinite(std::abs(l))) return cplx(1.0);
    const cplx t = n / (1.0 + l);
    return f == 0 ? cplx(t.real()) : t;
  };
  auto s_of = [&](double f) {
    const cplx l = loop(f == 0 ? 1e-9 * f_scale_hz : f);
    return std::isfinite(std::abs(l)) ? 1.0 / (1.0 + l) : cplx(0.0);
  };
  StepMetrics m;
  m.dt_s = 1 / fs;
  // the first half of the circular record is used (the second half would wrap)
  std::vector<double> y = step_of(t_of, n, fs), d = step_of(s_of, n, fs);
  const std::size_t use = n / 2;
  const double final = t_of(0).real();
  m.steady_state_error = 1 - final;
  m.rise_time_s = crossing(y, m.dt_s, 0.9 * final) - crossing(y, m.dt_s, 0.1 * final);
  double peak = final;
  for (std::size_t i = 0; i < use; ++i) peak = std::max(peak, y[i]);
  m.overshoot_pct = final != 0 ? 100 * (peak - final) / std::fabs(final) : 0;
  m.settling_time_s = last_outside(y, m.dt_s, final, 0.02 * std::fabs(final), use);
  const double d_final = s_of(0).real();
  double dpeak = 0;
  for (std::size_t i = 0; i < use; ++i) dpeak = std::max(dpeak, std::fabs(d[i]));
  m.disturbance_peak = dpeak;
  m.disturbance_recovery_s = last_outside(d, m.dt_s, d_final, 0.02, use);
  const std::size_t keep = std::min(use, static_cast<std::size_t>(std::ceil(3 * std::max(m.settling_time_s, 1 / f_scale_hz) * fs)));
  for (std::size_t i = 0; i < keep; i += std::max<std::size_t>(1, keep / 2000)) {
    m.t.push_back(static_cast<double>(i) * m.dt_s);
    m.y.push_back(y[i]);
  }
  return m;
}

}  // namespace benchid::loop
