#include "loop/frf_loop.h"

#include <algorithm>
#include <cmath>
#include <memory>
#include <numbers>
#include <random>

#include "ident/error.h"
#include "ident/trusted.h"

namespace benchid::loop {

namespace {

struct Interp {
  std::vector<double> lf, lm, ph;  // ln f, ln |H|, unwrapped phase (rad)
  explicit Interp(const std::vector<double>& f, const std::vector<cplx>& h) {
    double prev = 0;
    for (std::size_t i = 0; i < f.size(); ++i) {
      double a = std::arg(h[i]);
      if (i > 0) a -= 2 * std::numbers::pi * std::round((a - prev) / (2 * std::numbers::pi));
      prev = a;
      lf.push_back(std::log(f[i]));
      lm.push_back(std::log(std::abs(h[i])));
      ph.push_back(a);
    }
  }
  cplx operator()(double f) const {
    const double x = std::log(f);
    auto it = std::upper_bound(lf.begin(), lf.end(), x);
    std::size_t i = it == lf.begin() ? 0 : static_cast<std::size_t>(it - lf.begin()) - 1;
    if (i + 1 >= lf.size()) i = lf.size() - 2;
    const double t = std::clamp((x - lf[i]) / (lf[i + 1] - lf[i]), 0.0, 1.0);
    return std::polar(std::exp(lm[i] + t * (lm[i + 1] - lm[i])), ph[i] + t * (ph[i + 1] - ph[i]));
  }
};

double sd(const std::vector<double>& v) {
  if (v.size() < 2) return std::numeric_limits<double>::quiet_NaN();
  double m = 0;
  for (double x : v) m += x;
  m /= static_cast<double>(v.size());
  double s = 0;
  for (double x : v) s += (x - m) * (x - m);
  return std::sqrt(s / static_cast<double>(v.size() - 1));
}

}  // namespace

FrfMargins frf_margins(const ident::Frf& frf, const Controller& c, const FrfLoopOptions& o) {
  std::vector<double> f;
  std::vector<cplx> h;
  std::vector<double> eps;
  std::size_t left_out = 0;
  const ident::ChosenBand band = ident::choose_band(frf, o.band_given, o.band_lo_hz, o.band_hi_hz);
  for (std::size_t k = 0; k < frf.size() && band.found(); ++k) {
    const double fr = frf.freq_hz[k];
    if (fr < band.lo_hz || fr > band.hi_hz) continue;
    if (!ident::is_trusted(frf, k)) {
      ++left_out;
      continue;
    }
    f.push_back(frf.freq_hz[k]);
    h.push_back(frf.h[k]);
    eps.push_back(k < frf.rel_err.size() ? frf.rel_err[k] : std::numeric_limits<double>::quiet_NaN());
  }
  if (f.size() < 4)
    throw InputError("the FRF has " + std::to_string(f.size()) + " trusted lines in the band (" +
                     band.note + "); expected at least 4 for loop figures");
  FrfMargins out;
  out.band_note = band.note;
  out.band_lo_hz = band.lo_hz, out.band_hi_hz = band.hi_hz;
  out.lines = f.size();
  out.left_out = left_out;
  const double lo = f.front(), hi = f.back();
  auto loop_of = [&](const Interp& p) { return [&p, &c](double fr) { return p(fr) * c.model.response(fr); }; };
  const auto nominal_ptr = std::make_shared<Interp>(f, h);
  const Interp& nominal = *nominal_ptr;
  out.nominal = margins(loop_of(nominal), lo, hi, o.points);
  const fit::RationalModel cm = c.model;
  out.loop = [nominal_ptr, cm](double fr) { return (*nominal_ptr)(fr) * cm.response(fr); };

  // Nyquist count over the band, assuming an open-loop stable plant
  {
    // the controller's integrators: poles at s = 0, or at z = 1 for a
    // discrete controller (Tustin maps the one to the other)
    const bool discrete = c.model.domain == fit::Domain::z;
    const int k = o.plant_integrators + c.model.integrators +
                  static_cast<int>(std::count_if(c.model.poles.begin(), c.model.poles.end(), [&](cplx q) {
                    return discrete ? std::abs(q - 1.0) < 1e-9 : std::abs(q) == 0;
                  }));
    // from six decades below the band (the plant continued as at its lowest
    // line, plant_below_band) up to lo, then over the band
    const BelowBand bb = below_band(nominal(lo), lo, o.plant_integrators);
    std::vector<cplx> below_loop;
    for (std::size_t i = 0; i < bb.f_hz.size(); ++i) below_loop.push_back(bb.plant[i] * c.model.response(bb.f_hz[i]));
    const BelowBandWalk below = walk_below_band(bb, below_loop, k);
    double delta = below.arg_change_rad, prev = 0;
    for (std::size_t i = 0; i < o.points; ++i) {
      const double fr = lo * std::pow(hi / lo, static_cast<double>(i) / static_cast<double>(o.points - 1));
      const double a = std::arg(1.0 + nominal(fr) * c.model.response(fr));
      if (i > 0) delta += std::remainder(a - prev, 2 * std::numbers::pi);
      prev = a;
    }
    const double l_hi = std::abs(nominal(hi) * c.model.response(hi));
    const double z = -(2 * delta - k * std::numbers::pi) / (2 * std::numbers::pi);
    if (l_hi < 0.5 && below.trusted && std::fabs(z - std::round(z)) < 0.15) {
      out.inferred_unstable = static_cast<int>(std::lround(z));
      out.stability_note = "inferred from the Nyquist plot of the measured band, assuming an open-loop stable plant that "
                           "continues below the band as at its lowest line, with " +
                           std::to_string(k) + " integrator(s) in the loop (declare the plant's with --plant-integrators)";
    } else if (!below.trusted) {
      out.stability_note = "not inferred: at the bottom of the band (" + fmt_num(lo) + " Hz) the plant's phase is " +
                           fmt_num(std::round(std::arg(nominal(lo)) * 1800 / std::numbers::pi) / 10) +
                           " deg, more than 90 deg from the " + std::to_string(-90 * o.plant_integrators) + " deg of " +
                           std::to_string(o.plant_integrators) +
                           " declared integrator(s), and |L| is not large enough there for that not to matter (declare "
                           "the plant's integrators with --plant-integrators, or measure lower)";
    } else if (l_hi >= 0.5) {
      out.stability_note = "not inferred: |L| = " + fmt_num(l_hi) + " at the top of the measured band (the loop gain must fall "
                           "below 1 inside the band for the Nyquist count)";
    } else {
      out.stability_note = "not inferred: the Nyquist count is " + fmt_num(std::round(z * 100) / 100) +
                           " turns, not a whole number: below the band the loop does not behave as assumed (a plant "
                           "continuing as at its lowest line, " + fmt_num(lo) + " Hz, with " +
                           std::to_string(o.plant_integrators) + " integrator(s); declare them with --plant-integrators)";
    }
  }

  // Monte Carlo over the per-line random error
  bool have_err = std::all_of(eps.begin(), eps.end(), [](double e) { return std::isfinite(e); });
  if (o.draws > 1 && have_err) {
    std::mt19937_64 gen(o.seed);
    std::normal_distribution<double> n01;
    std::vector<double> pm, gm, ms, fc;
    std::vector<cplx> hp(h.size());
    // The draws only give spreads, and between lines the plant is a straight
    // interpolation, so a grid of 8 points per line brackets every crossing
    // the nominal grid does (crossings are then root-refined exactly); it
    // makes the draws several times cheaper on long FRFs.
    const std::size_t draw_points = std::min(o.points, std::max<std::size_t>(2000, 8 * f.size()));
    for (std::size_t d = 0; d < o.draws; ++d) {
      for (std::size_t k = 0; k < h.size(); ++k) hp[k] = h[k] * (1.0 + eps[k] * cplx(n01(gen), n01(gen)));
      const Interp p(f, hp);
      const Margins m = margins(loop_of(p), lo, hi, draw_points);
      if (std::isfinite(m.phase_margin_deg)) pm.push_back(m.phase_margin_deg), fc.push_back(m.crossover_hz);
      if (std::isfinite(m.gain_margin_db)) gm.push_back(m.gain_margin_db);
      ms.push_back(20 * std::log10(m.ms));
    }
    out.draws = o.draws;
    out.pm_sd_deg = sd(pm);
    out.gm_sd_db = sd(gm);
    out.ms_sd_db = sd(ms);
    out.crossover_sd_hz = sd(fc);
  }
  return out;
}

namespace {
// the lags' and delay's phase at f_lo: the plant's phase there less the integrators', rad
double extra_phase(cplx p_lo, int integrators) {
  return std::remainder(std::arg(p_lo) + integrators * std::numbers::pi / 2, 2 * std::numbers::pi);
}
}  // namespace

cplx plant_below_band(cplx p_lo, double f_lo_hz, int integrators, double f_hz) {
  return std::polar(std::abs(p_lo) * std::pow(f_lo_hz / f_hz, integrators),
                    -integrators * std::numbers::pi / 2 + extra_phase(p_lo, integrators) * f_hz / f_lo_hz);
}

BelowBand below_band(cplx p_lo, double f_lo_hz, int plant_integrators) {
  BelowBand b;
  // 40 points a decade: the controller's phase moves a few degrees at most
  // between them (a PI's corner turns 90 deg over two decades)
  for (int i = 0; i <= 240; ++i) {
    const double f = f_lo_hz * std::pow(10.0, (i - 240) / 40.0);
    b.f_hz.push_back(f);
    b.plant.push_back(i == 240 ? p_lo : plant_below_band(p_lo, f_lo_hz, plant_integrators, f));
  }
  b.phase_near_asymptote = std::fabs(extra_phase(p_lo, plant_integrators)) <= std::numbers::pi / 2;
  return b;
}

BelowBandWalk walk_below_band(const BelowBand& b, const std::vector<cplx>& loop, int loop_integrators) {
  BelowBandWalk w;
  bool far = loop_integrators > 0;
  double prev = 0;
  for (std::size_t i = 0; i < loop.size(); ++i) {
    far = far && std::abs(loop[i]) >= 2;
    const double a = std::arg(1.0 + loop[i]);
    if (i > 0) w.arg_change_rad += std::remainder(a - prev, 2 * std::numbers::pi);
    prev = a;
  }
  w.trusted = b.phase_near_asymptote || far;
  return w;
}

cplx margins_loop_value(const FrfMargins& fm, double f_hz) { return fm.loop(f_hz); }

}  // namespace benchid::loop
