#include "loop/margins.h"

#include <algorithm>
#include <cmath>
#include <numbers>

#include "ident/error.h"

namespace benchid::loop {

namespace {

double grid_frequency(double lo, double hi, std::size_t points, std::size_t i) {
  return lo * std::pow(hi / lo, static_cast<double>(i) / static_cast<double>(points - 1));
}

// bisection in log f on a sign change of g between f0 and f1
double refine(const std::function<double(double)>& g, double f0, double f1) {
  double a = std::log(f0), b = std::log(f1), ga = g(f0);
  for (int i = 0; i < 80; ++i) {
    const double m = 0.5 * (a + b), gm = g(std::exp(m));
    if ((gm < 0) == (ga < 0)) a = m, ga = gm;
    else b = m;
  }
  return std::exp(0.5 * (a + b));
}

// golden-section maximum of h in log f on [f0, f1]
double peak(const std::function<double(double)>& h, double f0, double f1) {
  const double g = (std::sqrt(5.0) - 1) / 2;
  double a = std::log(f0), b = std::log(f1);
  double x1 = b - g * (b - a), x2 = a + g * (b - a), h1 = h(std::exp(x1)), h2 = h(std::exp(x2));
  for (int i = 0; i < 80; ++i) {
    if (h1 > h2) b = x2, x2 = x1, h2 = h1, x1 = b - g * (b - a), h1 = h(std::exp(x1));
    else a = x1, x1 = x2, h1 = h2, x2 = a + g * (b - a), h2 = h(std::exp(x2));
  }
  return std::exp(0.5 * (a + b));
}

}  // namespace

Margins margins(const LoopFn& loop, double f_lo, double f_hi, std::size_t points) {
  if (!(f_lo > 0 && f_hi > f_lo) || points < 10) throw InputError("margins: expected 0 < f_lo < f_hi and >= 10 points");
  Margins m;
  m.f_lo_hz = f_lo;
  m.f_hi_hz = f_hi;
  std::vector<double> f(points);
  std::vector<cplx> l(points);
  for (std::size_t i = 0; i < points; ++i) {
    f[i] = grid_frequency(f_lo, f_hi, points, i);
    l[i] = loop(f[i]);
  }
  auto lnmag = [&](double fr) { return std::log(std::abs(loop(fr))); };
  auto imag = [&](double fr) { return loop(fr).imag(); };
  for (std::size_t i = 0; i + 1 < points; ++i) {
    const double a = std::log(std::abs(l[i])), b = std::log(std::abs(l[i + 1]));
    if ((a < 0) != (b < 0) && std::isfinite(a) && std::isfinite(b)) {
      const double fc = refine(lnmag, f[i], f[i + 1]);
      const double a = std::arg(loop(fc)) * 180.0 / std::numbers::pi;  // (-180, 180]
      // phase margin: the smallest rotation (lag or lead) that puts L on -1 at
      // this crossover; the delay margin needs the lag, which a delay adds
      const double pm = 180.0 - std::fabs(a), lag = 180.0 + a;
      m.crossings.push_back({Crossing::Kind::gain, fc, pm});
      if (pm < m.phase_margin_deg) m.phase_margin_deg = pm, m.crossover_hz = fc;
      m.delay_margin_s = std::min(m.delay_margin_s, lag * std::numbers::pi / 180.0 / (2 * std::numbers::pi * fc));
    }
    const double ia = l[i].imag(), ib = l[i + 1].imag();
    if ((ia < 0) != (ib < 0) && (l[i].real() < 0 || l[i + 1].real() < 0)) {
      const double fp = refine(imag, f[i], f[i + 1]);
      const cplx lp = loop(fp);
      if (lp.real() < 0) {
        const double gm = -20.0 * std::log10(std::abs(lp));
        m.crossings.push_back({Crossing::Kind::phase, fp, gm});
        if (gm > 0 && gm < m.gain_margin_db) m.gain_margin_db = gm, m.gain_margin_hz = fp;
        if (gm < 0 && !(-gm >= m.lower_gain_margin_db)) m.lower_gain_margin_db = -gm;
      }
    }
  }
  // a crossing met from two grid intervals (a kink of an interpolated FRF) is one crossing
  std::vector<Crossing> unique;
  for (const Crossing& x : m.crossings)
    if (unique.empty() || unique.back().kind != x.kind || std::fabs(unique.back().freq_hz - x.freq_hz) > 1e-6 * x.freq_hz)
      unique.push_back(x);
  m.crossings = unique;
  if (m.crossings.empty() || m.phase_margin_deg == std::numeric_limits<double>::infinity()) m.delay_margin_s = std::numeric_limits<double>::infinity();
  // peaks of |S| and |T|
  auto s_mag = [&](double fr) { return 1.0 / std::abs(1.0 + loop(fr)); };
  auto t_mag = [&](double fr) {
    const cplx x = loop(fr);
    return std::abs(x / (1.0 + x));
  };
  std::size_t is = 0, it = 0;
  for (std::size_t i = 0; i < points; ++i) {
    if (1.0 / std::abs(1.0 + l[i]) > 1.0 / std::abs(1.0 + l[is])) is = i;
    if (std::abs(l[i] / (1.0 + l[i])) > std::abs(l[it] / (1.0 + l[it]))) it = i;
  }
  auto around = [&](std::size_t i) { return std::pair{f[i == 0 ? 0 : i - 1], f[i + 1 < points ? i + 1 : i]}; };
  {
    const auto [a, b] = around(is);
    m.ms_hz = a < b ? peak(s_mag, a, b) : f[is];
    m.ms = std::max(s_mag(m.ms_hz), 1.0 / std::abs(1.0 + l[is]));
  }
  {
    const auto [a, b] = around(it);
    m.mt_hz = a < b ? peak(t_mag, a, b) : f[it];
    m.mt = std::max(t_mag(m.mt_hz), std::abs(l[it] / (1.0 + l[it])));
  }
  // bandwidth: |T| 3 dB below its low-frequency value
  const double t0 = std::abs(l[0] / (1.0 + l[0])), target = t0 / std::sqrt(2.0);
  for (std::size_t i = 0; i + 1 < points; ++i)
    if (std::abs(l[i + 1] / (1.0 + l[i + 1])) < target && std::abs(l[i] / (1.0 + l[i])) >= target) {
      m.bandwidth_hz = refine([&](double fr) { return t_mag(fr) - target; }, f[i], f[i + 1]);
      break;
    }
  return m;
}

std::pair<double, double> loop_range(const fit::RationalModel& plant, const Controller& c, const MarginOptions& o) {
  // 3 decades below the smallest and above the largest pole or zero
  double lo = std::numeric_limits<double>::infinity(), hi = 0;
  auto scan = [&](const fit::RationalModel& m) {
    auto take = [&](cplx x) {
      const cplx s = m.domain == fit::Domain::z ? std::log(x) / m.sample_time_s : x;
      const double w = std::abs(s);
      if (w > 0 && std::isfinite(w)) lo = std::min(lo, w), hi = std::max(hi, w);
    };
    // poles directly; zeros (roots of the expanded numerator) only for low
    // orders, where they are cheap and well conditioned
    for (const cplx& x : m.poles) take(x);
    if (m.poles.size() <= 20)
      for (const cplx& x : m.zpk().zeros) take(x);
    if (m.delay_s > 0) hi = std::max(hi, 1.0 / m.delay_s), lo = std::min(lo, 1.0 / m.delay_s);
  };
  scan(plant);
  scan(c.model);
  if (!std::isfinite(lo)) lo = hi = 1.0;  // only integrators and gains
  double f_lo = o.f_lo_hz > 0 ? o.f_lo_hz : lo / 1000 / (2 * std::numbers::pi);
  double f_hi = o.f_hi_hz > 0 ? o.f_hi_hz : hi * 1000 / (2 * std::numbers::pi);
  bool discrete = false;
  for (const fit::RationalModel* m : {&plant, &c.model})
    if (m->domain == fit::Domain::z) f_hi = std::min(f_hi, 0.4999 / m->sample_time_s), discrete = true;
  // The poles and zeros do not bound the crossings of a loop made only of
  // gains and integrators, or one whose gain is far from 1 there (k/s with
  // k = 1e6 crosses at 1e6 rad/s): widen the range a decade at a time while
  // |L| at an end still changes by more than 1 % a decade and has not yet
  // left [0.01, 100] in the direction it moves, at most 6 decades each way.
  // At the ends |L| is then below 0.01, above 100 or flat, so no crossing
  // lies beyond and |S| there is within about 5e-5 of its limit (or flat).
  const auto mag = [&](double f) { return std::abs(plant.response(f) * c.model.response(f)); };
  const auto moving = [](double at_end, double beyond) {
    if (!std::isfinite(at_end) || !std::isfinite(beyond)) return false;
    return (at_end >= 0.01 && beyond < 0.99 * at_end) || (at_end <= 100 && beyond > 1.01 * at_end);
  };
  if (!(o.f_hi_hz > 0) && !discrete)
    for (int i = 0; i < 6 && moving(mag(f_hi), mag(10 * f_hi)); ++i) f_hi *= 10;
  if (!(o.f_lo_hz > 0))
    for (int i = 0; i < 6 && moving(mag(f_lo), mag(f_lo / 10)); ++i) f_lo /= 10;
  return {f_lo, f_hi};
}

Margins model_margins(const fit::RationalModel& plant, const Controller& c, const MarginOptions& o) {
  const auto [f_lo, f_hi] = loop_range(plant, c, o);
  const LoopFn loop = [&](double f) { return plant.response(f) * c.model.response(f); };
  return margins(loop, f_lo, f_hi, o.points);
}

PlantOnGrid::PlantOnGrid(const fit::RationalModel& plant, double lo, double hi, std::size_t points)
    : plant_(plant), lo_(lo), hi_(hi) {
  for (std::size_t i = 0; i < points; ++i) {
    f_.push_back(grid_frequency(lo, hi, points, i));
    h_.push_back(plant.response(f_.back()));
  }
}

cplx PlantOnGrid::operator()(double f) const {
  if (f >= lo_ && f <= hi_ && f_.size() > 1) {
    const double x = std::log(f / lo_) / std::log(hi_ / lo_) * static_cast<double>(f_.size() - 1);
    const auto i = static_cast<std::size_t>(std::llround(x));
    if (i < f_.size() && f_[i] == f) return h_[i];
  }
  return plant_.response(f);
}

}  // namespace benchid::loop
