#include "ident/fftw_lock.h"
#include "fit/replay.h"

#include <Eigen/Dense>
#include <fftw3.h>
#include <algorithm>
#include <cmath>
#include <sstream>

#include "fit/detail/hold.h"
#include "fit/detail/replay.h"
#include "ident/error.h"

namespace benchid::fit {

using Mat = Eigen::MatrixXd;
using Vec = Eigen::VectorXd;

namespace {

std::vector<double> correlation(const std::vector<double>& a, const std::vector<double>& b, long lag_lo, long lag_hi) {
  // rho_ab(tau) = sum_t a(t) b(t - tau) / sqrt(sum a^2 sum b^2)
  double aa = 0, bb = 0;
  for (double v : a) aa += v * v;
  for (double v : b) bb += v * v;
  const double norm = std::sqrt(aa * bb);
  const long n = static_cast<long>(a.size());
  std::vector<double> r;
  for (long tau = lag_lo; tau <= lag_hi; ++tau) {
    double s = 0;
    for (long t = std::max(0L, tau); t < n && t - tau < n; ++t) s += a[static_cast<std::size_t>(t)] * b[static_cast<std::size_t>(t - tau)];
    r.push_back(norm > 0 ? s / norm : 0.0);
  }
  return r;
}

}  // namespace

namespace detail {
void judge(CorrelationTest& c, double practical) {
  c.threshold = std::max(c.bound, practical);
  c.failing = 0;
  for (double v : c.rho) c.failing += std::fabs(v) > c.threshold;
  c.allowed = std::max<std::size_t>(1, c.rho.size() / 100);
  c.pass = c.failing <= c.allowed;
}
}  // namespace detail

namespace detail {

ZohSimulator::ZohSimulator(const RationalModel& m, double rate_hz) {
  if (m.domain != Domain::s) throw InputError("replay of a z-domain model is not supported yet; expected an s-domain model");
  if (m.proportional != 0) throw InputError("replay of an improper model (a term in s) is not possible: it differentiates the held input");
  const double ts = 1.0 / rate_hz;
  const EigenStateSpace ss = to_eigen(m.state_space());
  const Eigen::Index n = ss.a.rows();
  const double samples_delay = m.delay_s * rate_hz;
  whole_ = static_cast<std::size_t>(std::floor(samples_delay + 1e-12));
  frac_ = samples_delay - static_cast<double>(whole_);
  auto [ad, bfull] = hold(ss.a, ss.b, ts);
  ad_ = std::move(ad);
  b1_ = bfull;
  b2_ = Vec::Zero(n);
  if (frac_ > 1e-12) {
    const auto [ea, i1] = hold(ss.a, ss.b, (1 - frac_) * ts);
    const auto [unused, i2] = hold(ss.a, ss.b, frac_ * ts);
    (void)unused;
    b1_ = i1;
    b2_ = ea * i2;
  }
  c_ = ss.c;
  d_ = ss.d;
  x_ = Vec::Zero(n);
  line_.assign(whole_ + 2, 0.0);
}

double ZohSimulator::step(double u) {
  // line_ holds the last whole_ + 2 inputs (zeros before the start), newest at head_
  head_ = head_ + 1 == line_.size() ? 0 : head_ + 1;
  line_[head_] = u;
  const auto back = [&](std::size_t j) { return line_[(head_ + line_.size() - j) % line_.size()]; };
  const double uk = back(whole_), uk1 = back(whole_ + 1);
  // output at t_k: the direct term sees the input delayed by the whole delay
  const double ud = frac_ > 1e-12 ? uk1 : uk;
  const double y = c_.dot(x_) + d_ * ud;
  x_ = ad_ * x_ + b1_ * uk + b2_ * uk1;
  return y;
}

}  // namespace detail

std::vector<double> simulate(const RationalModel& m, const std::vector<double>& u, double rate_hz) {
  detail::ZohSimulator sim(m, rate_hz);
  std::vector<double> y(u.size());
  for (std::size_t k = 0; k < u.size(); ++k) y[k] = sim.step(u[k]);
  return y;
}

std::vector<double> simulate_as_measured(const RationalModel& m, const std::vector<double>& u, double rate_hz) {
  std::size_t len = 1;
  while (len < 2 * u.size()) len *= 2;
  std::vector<double> in(len, 0.0), out(len);
  std::copy(u.begin(), u.end(), in.begin());
  std::vector<std::complex<double>> spec(len / 2 + 1);
  fftw_plan fwd = locked_plan_dft_r2c_1d(static_cast<int>(len), in.data(), reinterpret_cast<fftw_complex*>(spec.data()),
                                       FFTW_ESTIMATE);
  fftw_execute(fwd);
  locked_destroy_plan(fwd);
  for (std::size_t k = 0; k < spec.size(); ++k) {
    const double f = static_cast<double>(k) * rate_hz / static_cast<double>(len);
    cplx h = m.response(f);
    if (k == 0 || k == spec.size() - 1) h = h.real();  // a real signal's DC and Nyquist lines
    spec[k] *= h / static_cast<double>(len);
  }
  fftw_plan inv = locked_plan_dft_c2r_1d(static_cast<int>(len), reinterpret_cast<fftw_complex*>(spec.data()), out.data(),
                                       FFTW_ESTIMATE);
  fftw_execute(inv);
  locked_destroy_plan(inv);
  out.resize(u.size());
  return out;
}

ReplayResult replay(const RationalModel& m, const std::vector<double>& u_in, const std::vector<double>& y_in,
                    double rate_hz, const ReplayOptions& o) {
  if (u_in.size() != y_in.size() || u_in.size() < 4 * o.lags + 16)
    throw InputError("replay needs at least " + std::to_string(4 * o.lags + 16) + " samples of input and output");
  double mu = 0, my = 0;
  for (double v : u_in) mu += v;
  for (double v : y_in) my += v;
  mu /= static_cast<double>(u_in.size());
  my /= static_cast<double>(y_in.size());
  std::vector<double> u(u_in), y(y_in);
  for (double& v : u) v -= mu;
  for (double& v : y) v -= my;
  ReplayResult r;
  r.hold = o.hold == Hold::as_measured && m.integrators == 0 ? Hold::as_measured : Hold::zoh;
  std::vector<double> ys = r.hold == Hold::as_measured ? simulate_as_measured(m, u, rate_hz) : simulate(m, u, rate_hz);
  r.settle = detail::settle_samples(m, u.size(), rate_hz, o);
  std::vector<double> e, ue, yv;
  double ee = 0, yy = 0, ym = 0;
  for (std::size_t k = r.settle; k < u.size(); ++k) ym += y[k];
  ym /= static_cast<double>(u.size() - r.settle);
  for (std::size_t k = r.settle; k < u.size(); ++k) {
    e.push_back(y[k] - ys[k]);
    ue.push_back(u[k]);
    ee += e.back() * e.back();
    yy += (y[k] - ym) * (y[k] - ym);
  }
  r.samples = e.size();
  r.match_pct = yy > 0 ? 100.0 * (1.0 - std::sqrt(ee / yy)) : 0.0;
  const auto lags = static_cast<long>(o.lags);
  const double sq = std::sqrt(static_cast<double>(r.samples));
  r.whiteness.rho = correlation(e, e, 1, lags);
  r.whiteness.bound = 2.576 / sq;
  detail::judge(r.whiteness, o.practical);
  r.cross.rho = correlation(e, ue, -lags, lags);
  const std::vector<double> re = correlation(e, e, -lags, lags), ru = correlation(ue, ue, -lags, lags);
  double p = 0;
  for (std::size_t i = 0; i < re.size(); ++i) p += re[i] * ru[i];
  r.cross.bound = 2.576 * std::sqrt(std::max(p, 1e-12)) / sq;
  detail::judge(r.cross, o.practical);
  r.simulated = ys;
  for (double& v : r.simulated) v += my;
  detail::set_verdict(r);
  return r;
}

namespace detail {

std::size_t settle_samples(const RationalModel& m, std::size_t n, double rate_hz, const ReplayOptions& o) {
  // leave out the start: the model starts at rest
  double slowest = 0;
  for (const cplx& p : m.poles) slowest = std::max(slowest, p.real() < 0 ? 1.0 / -p.real() : 0.0);
  const double settle_s = std::max(o.settle_fraction * static_cast<double>(n) / rate_hz,
                                   o.settle_time_constants * slowest + m.delay_s);
  std::size_t settle = std::min(n / 2, static_cast<std::size_t>(std::ceil(settle_s * rate_hz)));
  if (o.holdout_fraction > 0) {
    if (!(o.holdout_fraction <= 0.9)) throw InputError("split: the held-out fraction must be in (0, 0.9]");
    // the simulation still runs from the start, so the state is right where scoring begins
    settle = std::max(settle, static_cast<std::size_t>(std::floor((1 - o.holdout_fraction) * static_cast<double>(n))));
  }
  return settle;
}

void set_verdict(ReplayResult& r) {
  std::ostringstream s;
  s.precision(4);
  s << "match " << r.match_pct << " % on " << r.samples << " samples; residual independence: "
    << (r.whiteness.pass && r.cross.pass ? "pass" : "FAIL") << " (whiteness " << r.whiteness.failing << " of "
    << r.whiteness.rho.size() << " lags over " << r.whiteness.threshold << ", input cross-correlation "
    << r.cross.failing << " of " << r.cross.rho.size() << " over " << r.cross.threshold << ")";
  r.verdict = s.str();
}

}  // namespace detail

}  // namespace benchid::fit
