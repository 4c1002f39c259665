#include "fit/fit_frf.h"

#include <algorithm>
#include <exception>
#include <thread>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <sstream>

#include "ident/error.h"
#include "ident/trusted.h"
#include "ident/work_pool.h"

namespace benchid::fit {

using benchid::InputError;
using benchid::fmt_num;

namespace {

std::string num(double v, int prec = 4) {
  std::ostringstream s;
  s.precision(prec);
  s << v;
  return s.str();
}

double phase_slope_delay(const FitData& d) {
  // least-squares slope of the unwrapped phase (rad) against w over the top
  // 30 % of the lines; delay = -slope
  const std::size_t n = d.freq_hz.size(), from = n - std::max<std::size_t>(2, n * 3 / 10);
  std::vector<double> w, ph;
  double prev = 0, off = 0;
  for (std::size_t k = 0; k < n; ++k) {
    double a = std::arg(d.h[k]);
    if (k > 0) {
      while (a + off - prev > std::numbers::pi) off -= 2 * std::numbers::pi;
      while (a + off - prev < -std::numbers::pi) off += 2 * std::numbers::pi;
    }
    prev = a + off;
    if (k >= from) {
      w.push_back(2 * std::numbers::pi * d.freq_hz[k]);
      ph.push_back(prev);
    }
  }
  double mw = 0, mp = 0;
  for (std::size_t i = 0; i < w.size(); ++i) mw += w[i], mp += ph[i];
  mw /= static_cast<double>(w.size());
  mp /= static_cast<double>(w.size());
  double sxy = 0, sxx = 0;
  for (std::size_t i = 0; i < w.size(); ++i) sxy += (w[i] - mw) * (ph[i] - mp), sxx += (w[i] - mw) * (w[i] - mw);
  return sxx > 0 ? std::max(0.0, -sxy / sxx) : 0.0;
}

int params_of(const VectorFitOptions& o) { return 2 * o.order + (o.proper ? 1 : 0) + (o.improper ? 1 : 0); }

double aic(const FitResult& r, const FitData& d, int params) {
  double rss = 0;
  for (std::size_t k = 0; k < d.freq_hz.size(); ++k)
    rss += d.weight[k] * d.weight[k] * std::norm(r.model.response(d.freq_hz[k]) - d.h[k]);
  const double n = 2.0 * static_cast<double>(d.freq_hz.size());
  return n * std::log(std::max(rss, 1e-300) / n) + 2.0 * params;
}

bool chi2_ok(const FitResult& r) { return r.dof > 0 && r.chi2 <= r.dof + 2.326 * std::sqrt(2.0 * r.dof); }

FitResult fit_with_delay_search(const FitData& d, VectorFitOptions vo, double t0) {
  const double w_max = 2 * std::numbers::pi * d.freq_hz.back();
  double a = 0, b = 2 * t0 + 1 / w_max;
  const double g = (std::sqrt(5.0) - 1) / 2;
  auto cost = [&](double t) {
    vo.delay_s = t;
    return vector_fit(d, vo).chi2;
  };
  double x1 = b - g * (b - a), x2 = a + g * (b - a);
  double f1 = cost(x1), f2 = cost(x2);
  for (int i = 0; i < 40 && (b - a) > 1e-6 * std::max(b, 1e-9); ++i) {
    if (f1 < f2) {
      b = x2, x2 = x1, f2 = f1;
      x1 = b - g * (b - a);
      f1 = cost(x1);
    } else {
      a = x1, x1 = x2, f1 = f2;
      x2 = a + g * (b - a);
      f2 = cost(x2);
    }
  }
  vo.delay_s = (a + b) / 2;
  return vector_fit(d, vo);
}

}  // namespace

FrfFit fit_frf(const ident::Frf& frf, const FitOptions& o) {
  validate(o.vf);
  if (o.auto_order && (o.max_order < 1 || o.max_order > 200))
    throw InputError("max order = " + std::to_string(o.max_order) + ": must be in [1, 200]");
  FrfFit out;
  out.weighting = o.weighting;
  bool have_err = false;
  for (double e : frf.rel_err) have_err |= std::isfinite(e) && e > 0;
  if (o.weighting == Weighting::inverse_variance && !have_err) {
    out.weighting = Weighting::relative;
    out.warnings.push_back("the FRF carries no rel_err: weighting relative (1/|H|) instead of by variance");
  }
  if (frf.size() == 0) throw InputError("the FRF has no lines");
  ident::ChosenBand band = ident::choose_band(frf, o.band_given, o.band_lo_hz, o.band_hi_hz);
  if (!band.found()) {  // every line, so that what is wrong with them is said below
    band.lo_hz = frf.freq_hz.front(), band.hi_hz = frf.freq_hz.back() * (1 + 1e-12);
    band.note = "all lines (no trusted band)";
  }
  out.band_lo_hz = band.lo_hz, out.band_hi_hz = band.hi_hz, out.band_note = band.note;
  const auto outside = [&](double f) { return f < band.lo_hz || f > band.hi_hz; };
  // lines: in band, trusted, usable
  std::vector<std::size_t> use;
  std::size_t in_band = 0;
  for (std::size_t k = 0; k < frf.size(); ++k) {
    const double f = frf.freq_hz[k];
    if (outside(f)) {
      ++out.left_out_band;
      continue;
    }
    ++in_band;
    if (f == 0 && o.vf.integrators > 0) {  // an integrator's response at DC is infinite: no equation there
      ++out.left_out_unreliable;
      out.warnings.push_back("the DC line is left out: a model with integrators is infinite at 0 Hz");
      continue;
    }
    const bool ok = ident::is_trusted(frf, k) && std::abs(frf.h[k]) > 0 &&
                    (out.weighting != Weighting::inverse_variance || std::isfinite(frf.rel_err[k]));
    if (!ok) {
      ++out.left_out_unreliable;
      continue;
    }
    use.push_back(k);
  }
  if (in_band == 0)
    throw InputError("band " + fmt_num(band.lo_hz) + ":" + fmt_num(band.hi_hz) + " Hz holds no line of the FRF (" +
                     fmt_num(frf.freq_hz.front()) + " to " + fmt_num(frf.freq_hz.back()) + " Hz)");
  if (use.empty())
    throw InputError("all " + std::to_string(in_band) + " lines in the band " + fmt_num(band.lo_hz) + " to " +
                     fmt_num(band.hi_hz) + " Hz are untrusted (coherence at or below the zero-coherence bound, not "
                     "excited, or a random error above " + fmt_num(100 * ident::TrustOptions{}.max_rel_err) +
                     " %); expected a better measurement or another band");
  // Pure noise: with unrelated input and output, a fraction alpha = 1 -
  // confidence of the lines still passes the zero-coherence bound by chance,
  // scattered. When the reliable lines are no more than chance gives
  // (alpha n + 3 sigma of the binomial count) and no 5 of them are adjacent
  // (n alpha^5 < 1e-3 for the line counts of a Welch FRF), there is no
  // identifiable system to fit (Welch estimators only: periodic and stepped
  // FRFs hold excited lines alone).
  if (frf.estimator != ident::Estimator::periodic && frf.estimator != ident::Estimator::stepped && in_band >= 50 &&
      !frf.reliable.empty()) {
    const double alpha = 1.0 - frf.confidence, n = static_cast<double>(in_band);
    std::size_t reliable = 0, run = 0, longest = 0;
    for (std::size_t k = 0; k < frf.size(); ++k) {
      const double f = frf.freq_hz[k];
      if (outside(f)) continue;
      run = frf.reliable[k] ? run + 1 : 0;
      reliable += frf.reliable[k];
      longest = std::max(longest, run);
    }
    if (static_cast<double>(reliable) <= alpha * n + 3 * std::sqrt(n * alpha * (1 - alpha)) && longest < 5)
      throw InputError("no identifiable system: only " + std::to_string(reliable) + " of " + std::to_string(in_band) +
                       " lines pass the " + fmt_num(100 * frf.confidence) + " % zero-coherence bound, scattered (at most " +
                       std::to_string(longest) + " adjacent), as chance gives for unrelated signals (" +
                       fmt_num(100 * alpha) + " %); expected an output that responds to the input: check the channels, "
                       "the excitation level and the wiring");
  }
  std::vector<double> eps;
  for (std::size_t k : use)
    if (std::isfinite(frf.rel_err[k])) eps.push_back(frf.rel_err[k]);
  double floor = 0;
  if (!eps.empty()) {
    std::nth_element(eps.begin(), eps.begin() + static_cast<long>(eps.size() / 2), eps.end());
    floor = o.error_floor * eps[eps.size() / 2];
  }
  for (std::size_t k : use) {
    out.data.freq_hz.push_back(frf.freq_hz[k]);
    out.data.h.push_back(frf.h[k]);
    double w = 1.0;
    if (out.weighting == Weighting::relative) w = 1.0 / std::abs(frf.h[k]);
    if (out.weighting == Weighting::inverse_variance)
      w = 1.0 / (std::max(frf.rel_err[k], std::max(floor, 1e-12)) * std::abs(frf.h[k]));
    out.data.weight.push_back(w);
  }

  VectorFitOptions vo = o.vf;
  if (o.auto_delay) {
    out.delay_first_s = phase_slope_delay(out.data);
    vo.delay_s = out.delay_first_s;
  }
  if (o.auto_order) {
    // one line per real parameter (see vector_fit): 2 n + 2 <= lines
    const int limit = std::min(o.max_order, (static_cast<int>(out.data.freq_hz.size()) - 2) / 2);
    if (limit < 1) throw InputError(std::to_string(out.data.freq_hz.size()) + " lines are too few for any order");
    // The orders are independent fits: they run on up to `threads` threads,
    // each into its own slot, and are judged in order afterwards.
    std::vector<FitResult> fits(static_cast<std::size_t>(limit));
    std::vector<std::exception_ptr> errors(fits.size());
    const int hw = static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
    const int n_threads = std::min(limit, o.threads > 0 ? o.threads : std::min(hw, 8));
    ident::WorkPool pool(static_cast<std::size_t>(n_threads - 1));
    pool.run(static_cast<std::size_t>(limit), [&](std::size_t i) {
      VectorFitOptions v = vo;
      v.order = static_cast<int>(i) + 1;
      try {
        fits[i] = vector_fit(out.data, v);
      } catch (...) {
        errors[i] = std::current_exception();
      }
    });
    int best_aic_order = 1, accepted = 0;
    double best_aic = 0;
    for (int n = 1; n <= limit; ++n) {
      vo.order = n;
      if (errors[static_cast<std::size_t>(n - 1)]) std::rethrow_exception(errors[static_cast<std::size_t>(n - 1)]);
      const FitResult& r = fits[static_cast<std::size_t>(n - 1)];
      const double a = aic(r, out.data, params_of(vo));
      const bool pass = out.weighting == Weighting::inverse_variance && chi2_ok(r);
      out.sweep.push_back({n, r.chi2, a, r.nrmse, r.max_err_db, r.dof, r.converged, pass});
      if (n == 1 || a < best_aic) best_aic = a, best_aic_order = n;
      if (pass && accepted == 0) accepted = n;
    }
    vo.order = accepted ? accepted : best_aic_order;
    out.order_reason = accepted ? "lowest order with chi2 <= dof + 2.326 sqrt(2 dof) (99 %, residual consistent with "
                                  "the measurement noise)"
                                : "no order reached the noise level; lowest Akaike criterion N ln(RSS/N) + 2p";
  } else {
    out.order_reason = "as given";
  }
  if (o.polynomial) {
    if (o.auto_delay) vo.delay_s = out.delay_first_s;
    out.result = sk_fit(out.data, vo);
  } else {
    out.result = o.auto_delay ? fit_with_delay_search(out.data, vo, out.delay_first_s) : vector_fit(out.data, vo);
  }
  if (out.result.model.reflected > 0)
    out.warnings.push_back(std::to_string(out.result.model.reflected) +
                           " unstable poles were reflected into the left half plane: this changes the phase and "
                           "so the margins (use --allow-unstable to keep them)");
  return out;
}

std::string fit_summary(const FrfFit& f, const std::string& source) {
  const FitResult& r = f.result;
  const RationalModel& m = r.model;
  std::ostringstream s;
  s << "benchid fit: " << source << ", " << f.data.freq_hz.size() << " lines " << num(f.data.freq_hz.front()) << " to "
    << num(f.data.freq_hz.back(), 5) << " Hz (left out: " << f.left_out_unreliable << " untrusted, " << f.left_out_band
    << " outside the band); weighting " << weighting_name(f.weighting) << "\n";
  if (!f.band_note.empty()) s << "  band " << f.band_note << "\n";
  if (!f.sweep.empty()) {
    s << "  order sweep:  order   chi2/dof   NRMSE %   worst dB   Akaike      converged\n";
    char b[160];
    bool marked = false;
    for (const auto& row : f.sweep) {
      std::snprintf(b, sizeof b, "               %4d  %9.4g  %8.3g  %9.3g  %10.5g   %s", row.order,
                    row.dof > 0 ? row.chi2 / row.dof : 0.0, 100 * row.nrmse, row.max_err_db, row.aic,
                    row.converged ? "yes" : "no");
      s << b << (row.accepted && !marked ? "  <- first consistent with the noise" : "") << "\n";
      marked |= row.accepted;
    }
  }
  const int n_poles = static_cast<int>(m.order());
  s << "  order " << n_poles - m.integrators << (m.integrators ? " + " + std::to_string(m.integrators) + " integrators" : "")
    << " (" << f.order_reason << ")\n";
  s << "  delay " << num(m.delay_s * 1e3, 4) << " ms" << (f.delay_first_s > 0 ? " (estimated; phase-slope start " + num(f.delay_first_s * 1e3, 4) + " ms)" : "") << "\n";
  s << "  " << (r.converged ? "converged" : "NOT converged") << " after " << r.iterations << " iterations; NRMSE "
    << num(100 * r.nrmse, 3) << " %; worst " << num(r.max_err_db, 3) << " dB at " << num(r.max_err_db_hz, 4) << " Hz and "
    << num(r.max_err_deg, 3) << " deg at " << num(r.max_err_deg_hz, 4) << " Hz";
  if (f.weighting == Weighting::inverse_variance && r.dof > 0) s << "; chi2/dof " << num(r.chi2 / r.dof, 3);
  s << "\n";
  const Zpk z = m.zpk();
  const double dc = m.dc_gain();
  if (std::isfinite(dc)) s << "  DC gain " << num(dc, 5) << " (" << num(20 * std::log10(std::fabs(dc)), 4) << " dB)\n";
  else s << "  " << m.integrators << " integrator(s): no DC gain\n";
  // roll-off: the model's own slope over the decade above the fitted band
  const double f_top = f.data.freq_hz.back();
  if (m.domain == Domain::s) {
    const double slope = 20 * std::log10(std::abs(m.rational(cplx(0, 20 * std::numbers::pi * f_top))) /
                                         std::abs(m.rational(cplx(0, 2 * std::numbers::pi * f_top))));
    s << "  roll-off above the band " << num(slope, 3) << " dB/decade (about " << std::lround(-slope / 20)
      << " more poles than zeros)\n";
  } else {
    s << "  discrete-time model, T = " << num(m.sample_time_s) << " s; poles and zeros shown as their s-plane "
      << "equivalents ln(z)/T\n";
  }
  // zeros far beyond the band (numerically placed, no effect in the band) are counted, not listed
  const double far = 100 * 2 * std::numbers::pi * f_top;
  auto list = [&](const char* what, const std::vector<cplx>& v) {
    s << "  " << what << ":\n";
    std::size_t beyond = 0, shown = 0;
    for (const cplx& pz : v) {
      if (pz.imag() < 0) continue;
      // z-domain roots shown as s-plane equivalents (a root at z = 0 is a pure delay)
      if (m.domain == Domain::z && std::abs(pz) == 0) {
        s << "    at z = 0 (one sample of delay)\n";
        continue;
      }
      const cplx p = m.domain == Domain::z ? std::log(pz) / m.sample_time_s : pz;
      if (std::abs(p) > far) {
        ++beyond;
        continue;
      }
      ++shown;
      const Mode md = mode_of(p);
      if (std::abs(p) == 0) s << "    at the origin\n";
      else if (md.real) s << "    real  " << num(p.real(), 6) << " rad/s   corner " << num(md.freq_hz, 5) << " Hz" << (p.real() > 0 ? "  (right half plane)" : "") << "\n";
      else s << "    pair  " << num(md.freq_hz, 5) << " Hz   damping " << num(md.damping, 4) << (p.real() > 0 ? "  (right half plane)" : "") << "\n";
    }
    if (shown == 0 && beyond == 0) s << "    none\n";
    if (beyond > 0) s << "    (" << beyond << " more beyond 100 x the band's top: no effect within it)\n";
  };
  list("poles", z.poles);
  list("zeros", z.zeros);
  for (const auto& w : f.warnings) s << "  warning: " << w << "\n";
  s << "  The model holds only within the fitted band (" << num(f.data.freq_hz.front()) << " to "
    << num(f.data.freq_hz.back(), 5) << " Hz) and where the measurement's coherence was high.";
  return s.str();
}

}  // namespace benchid::fit
