#include "fit/fit_frf.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <exception>
#include <limits>
#include <numbers>
#include <sstream>
#include <thread>

#include "ident/error.h"
#include "ident/trusted.h"
#include "ident/work_pool.h"

namespace benchid::fit {

using benchid::fmt;
using benchid::fmt_num;
using benchid::InputError;

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

// The delay by golden-section search of the weighted residual over [0, 2 t0
// + 1/w_max] to 1e-6 of the bracket. Each trial fit starts from the standard
// start (which finds a fit at any delay, where poles fitted at a wrong one
// may be stuck), or from `start` when given; once the bracket is within 1 %
// of its top, from the best trial's poles (nearby delays: a few relocations
// each). Trials run to the sweep's tolerance, the fit at the delay found to
// the full one.
FitResult fit_with_delay_search(const FitData& d, VectorFitOptions vo, double t0, int order,
                                const std::vector<cplx>& start = {}) {
  vo.order = order;
  if (static_cast<int>(start.size()) == order) vo.start_poles = start;
  const double tolerance = vo.tolerance;
  vo.tolerance = std::max(tolerance, 1e-6);
  vo.stop_when_stalled = !vo.start_poles.empty();
  const double w_max = 2 * std::numbers::pi * d.freq_hz.back();
  double a = 0, b = 2 * t0 + 1 / w_max;
  const double g = (std::sqrt(5.0) - 1) / 2;
  // once the bracket is within 1 % of its top, each trial starts from the
  // best trial's poles (nearby delays: a few relocations each)
  std::vector<cplx> best_poles;
  double best_cost = std::numeric_limits<double>::infinity();
  auto cost = [&](double t) {
    VectorFitOptions v = vo;
    v.delay_s = t;
    if (!best_poles.empty() && (b - a) < 0.01 * b)
      v.start_poles = best_poles, v.stop_when_stalled = true;
    const FitResult r = vector_fit(d, v);
    if (r.chi2 < best_cost) best_cost = r.chi2, best_poles = r.model.poles;
    return r.chi2;
  };
  double x1 = b - g * (b - a), x2 = a + g * (b - a);
  double f1 = cost(x1), f2 = cost(x2);
  for (int i = 0; i < 60 && (b - a) > 1e-6 * std::max(b, 1e-9); ++i) {
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
  if (!best_poles.empty()) vo.start_poles = best_poles;
  vo.tolerance = tolerance;
  vo.stop_when_stalled = false;
  return vector_fit(d, vo);
}

// Slope of |H| over the top fifth of the band in log frequency (at least 8
// lines), dB per decade, by least squares.
double top_slope_db_per_decade(const FitData& d) {
  const std::size_t n = d.freq_hz.size();
  if (n < 8) return 0;
  const double top = std::log10(d.freq_hz.back()), span = top - std::log10(d.freq_hz.front());
  std::size_t from = n - 8;
  while (from > 0 && std::log10(d.freq_hz[from - 1]) >= top - span / 5) --from;
  double sx = 0, sy = 0, sxx = 0, sxy = 0;
  const double m = static_cast<double>(n - from);
  for (std::size_t k = from; k < n; ++k) {
    const double x = std::log10(d.freq_hz[k]), y = 20 * std::log10(std::abs(d.h[k]));
    sx += x, sy += y, sxx += x * x, sxy += x * y;
  }
  const double den = m * sxx - sx * sx;
  return den > 0 ? (m * sxy - sx * sy) / den : 0;
}

std::vector<cplx> upper_poles(const RationalModel& m) {
  std::vector<cplx> u;
  for (const cplx& p : m.poles)
    if (p.imag() >= 0) u.push_back(p);
  return u;
}

// poles of `now` without a partner in `before` (one to one, nearest first,
// within 10 % of the pole's magnitude)
std::vector<cplx> new_poles(const std::vector<cplx>& now, std::vector<cplx> before) {
  std::vector<cplx> out;
  for (const cplx& p : now) {
    auto it = std::min_element(before.begin(), before.end(),
                               [&](cplx a, cplx b) { return std::abs(a - p) < std::abs(b - p); });
    if (it != before.end() && std::abs(*it - p) <= 0.1 * std::abs(p)) {
      before.erase(it);
      continue;
    }
    out.push_back(p);
  }
  return out;
}

// Whether a pole is still there at another order: a pair within its own
// half-power half-width (|Re p|) or 3 % of |p|, a real pole within 10 %.
bool stays(cplx p, const std::vector<cplx>& set) {
  const double tol =
      p.imag() == 0 ? 0.1 * std::abs(p) : std::max(0.03 * std::abs(p), std::fabs(p.real()));
  for (const cplx& q : set)
    if (std::abs(q - p) <= tol) return true;
  return false;
}

// The lines a pole acts on most: within 3 half-power bandwidths (2 zeta f_n)
// of its natural frequency for a pair, half an octave of its corner for a
// real pole; at least the two nearest lines either side.
std::pair<std::size_t, std::size_t> lines_near(const FitData& d, cplx p) {
  const Mode md = mode_of(p);
  const double half = md.real ? md.freq_hz * 0.41 : 3 * 2 * md.damping * md.freq_hz;
  const auto lo_it = std::lower_bound(d.freq_hz.begin(), d.freq_hz.end(), md.freq_hz - half);
  const auto hi_it = std::upper_bound(d.freq_hz.begin(), d.freq_hz.end(), md.freq_hz + half);
  std::size_t a = static_cast<std::size_t>(lo_it - d.freq_hz.begin()),
              b = static_cast<std::size_t>(hi_it - d.freq_hz.begin());
  const std::size_t c = static_cast<std::size_t>(
      std::lower_bound(d.freq_hz.begin(), d.freq_hz.end(), md.freq_hz) - d.freq_hz.begin());
  a = std::min(a, c >= 2 ? c - 2 : 0);
  b = std::max(b, std::min(d.freq_hz.size(), c + 2));
  return {a, b};
}

// Whether the lines near p stood beyond the noise under `before`: their
// weighted residual sum (chi-square with 2 N degrees of freedom for N lines,
// s.d. 2 sqrt(N)) above 2 N by 3 s.d., the s.d. taken sqrt(2) larger because
// neighbouring Hann lines are correlated (about 0.45 at 50 % overlap) and so
// count about half (Welch 1967; common practice).
bool residual_stood_out(const FitData& d, const RationalModel& before, cplx p) {
  const auto [a, b] = lines_near(d, p);
  if (b <= a) return false;
  double chi2 = 0;
  for (std::size_t k = a; k < b; ++k)
    chi2 += d.weight[k] * d.weight[k] * std::norm(before.response(d.freq_hz[k]) - d.h[k]);
  const double n = static_cast<double>(b - a);
  return chi2 > 2 * n + 3 * 2 * std::sqrt(n) * std::sqrt(2.0);
}

// Starting poles for order m + 2 from an order-m fit: its poles and a pair
// at the line where its weighted residual is largest, with real part -b/100
// as in the standard start (Gustavsen & Semlyen 1999).
std::vector<cplx> warm_start(const FitData& d, const RationalModel& m, const VectorFitOptions& vo) {
  std::size_t worst = 0;
  double worst_r = -1;
  for (std::size_t k = 0; k < d.freq_hz.size(); ++k) {
    const double r = d.weight[k] * std::abs(m.response(d.freq_hz[k]) - d.h[k]);
    if (r > worst_r) worst_r = r, worst = k;
  }
  const double b = 2 * std::numbers::pi * std::max(d.freq_hz[worst], d.freq_hz.back() * 1e-6);
  std::vector<cplx> p = m.poles;
  cplx q(-b / 100, b);
  if (vo.domain == Domain::z) q = std::exp(q * vo.sample_time_s);
  p.push_back(q);
  p.push_back(std::conj(q));
  return p;
}

// The lines the order sweep fits: all of them up to 2000; above, every k-th
// line (k = lines / 1000) and every line that stands 3 dB or more above or
// below the median |H| of the 2k + 1 lines around it, with its neighbours
// (a sharp mode or notch spans one or two lines; noise at 20 dB SNR moves
// |H| by about 1 dB). The final fit uses every line.
FitData sweep_lines(const FitData& d) {
  const std::size_t n = d.freq_hz.size();
  if (n <= 2000) return d;
  const std::size_t k = n / 1000;
  std::vector<char> keep(n, 0);
  std::vector<double> win;
  for (std::size_t i = 0; i < n; ++i) {
    if (i % k == 0 || i + 1 == n) keep[i] = 1;
    const std::size_t a = i >= k ? i - k : 0, b = std::min(n, i + k + 1);
    win.clear();
    for (std::size_t j = a; j < b; ++j) win.push_back(std::abs(d.h[j]));
    std::nth_element(win.begin(), win.begin() + static_cast<long>(win.size() / 2), win.end());
    const double med = win[win.size() / 2], m = std::abs(d.h[i]);
    if (m >= med * std::sqrt(2.0) || m <= med / std::sqrt(2.0))
      for (std::size_t j = i > 0 ? i - 1 : 0; j <= std::min(n - 1, i + 1); ++j) keep[j] = 1;
  }
  FitData out;
  for (std::size_t i = 0; i < n; ++i)
    if (keep[i]) {
      out.freq_hz.push_back(d.freq_hz[i]);
      out.h.push_back(d.h[i]);
      out.weight.push_back(d.weight[i]);
    }
  return out;
}

struct OrderChoice {
  int order = 1;
  FitResult chosen;  // the sweep's fit at that order (the sweep's looser tolerance)
  std::string reason;
  std::vector<OrderRow> rows;
  std::vector<std::string> warnings;
};

// The order rule (see fit_frf.h): fits are made as the sweep needs them, a
// few orders at once on the threads, and the sweep stops once four orders
// above the current choice have added nothing.
OrderChoice choose_order(const FitData& d, const VectorFitOptions& vo, const FitOptions& o) {
  const int lines = static_cast<int>(d.freq_hz.size());
  const int hard = std::min(200, (lines - 2) / 2);  // one line per real parameter: 2 n + 2 <= lines
  if (hard < 1) throw InputError(std::to_string(lines) + " lines are too few for any order");
  int limit = std::min(o.max_order, hard);
  std::vector<FitResult> fits(static_cast<std::size_t>(hard) + 1);
  std::vector<char> done(fits.size(), 0);
  // two chains, odd and even orders, each on a thread of its own: order n
  // is fitted from the standard start and from order n - 2's poles (warm
  // start, see warm_start), and the fit with the lower residual kept: the warm chain follows a
  // many-mode plant up order by order, the standard start finds modes a poor lower order missed.
  // The result does not depend on the threads.
  const int hw = static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  const int n_threads = std::max(1, std::min(2, o.threads > 0 ? o.threads : hw));
  ident::WorkPool pool(static_cast<std::size_t>(n_threads - 1));
  auto fit_one = [&](int n) {
    VectorFitOptions v = vo;
    v.tolerance = std::max(vo.tolerance, 1e-6);
    v.stop_when_stalled = true;
    v.order = n;
    FitResult cold = vector_fit(d, v);
    if (n <= 2) return cold;
    v.start_poles = warm_start(d, fits[static_cast<std::size_t>(n - 2)].model, vo);
    FitResult warm = vector_fit(d, v);
    return warm.chi2 < cold.chi2 ? warm : cold;
  };
  // fits the orders up to `upto` that are not yet made
  auto need = [&](int upto) {
    upto = std::min(upto, hard);
    std::exception_ptr errors[2];
    pool.run(2, [&](std::size_t chain) {
      try {
        for (int n = 1 + static_cast<int>(chain); n <= upto; n += 2)
          if (!done[static_cast<std::size_t>(n)]) {
            fits[static_cast<std::size_t>(n)] = fit_one(n);
            done[static_cast<std::size_t>(n)] = 1;
          }
      } catch (...) {
        errors[chain] = std::current_exception();
      }
    });
    for (auto& e : errors)
      if (e) std::rethrow_exception(e);
  };
  int used = 0;  // the highest order the rule looked at: the table stops there, whatever the
                 // threads fitted
  auto fit = [&](int n) -> const FitResult& {
    used = std::max(used, n);
    if (!done[static_cast<std::size_t>(n)]) need(n + 1);
    return fits[static_cast<std::size_t>(n)];
  };
  const double f_lo = d.freq_hz.front(), f_hi = d.freq_hz.back();
  auto in_band = [&](cplx p) {
    const double f = mode_of(p).freq_hz;
    return f >= f_lo && f <= f_hi;
  };
  OrderChoice c;
  std::vector<std::string> notes(fits.size());
  int current = 0;
  for (int n = 1; n <= limit && current == 0; ++n)
    if (fit(n).converged)
      current = n, notes[static_cast<std::size_t>(n)] = "lowest converged order";
  if (current == 0) {
    c.order = 1;
    double best = fit(1).chi2;
    for (int n = 2; n <= limit; ++n)
      if (fit(n).chi2 < best) best = fit(n).chi2, c.order = n;
    c.reason =
        "no order up to " + std::to_string(limit) + " converged; the lowest residual is shown";
  } else {
    // the last order whose residual was at least 10 % below the choice's:
    // while the residual still falls, the sweep goes on (sharp modes can make
    // the low orders' poles wander until all of them are in)
    int last_effect = current;
    // while even the best fit so far leaves chi2/dof above 2 (the true plant
    // gives 1.05-1.6 against Welch error bars), structure is left in the
    // data and the sweep goes on past the 4 orders (a many-mode plant's
    // residual falls a few % per order until its modes are in)
    const auto per_dof = [](const FitResult& r) {
      return r.dof > 0 ? r.chi2 / r.dof : std::numeric_limits<double>::infinity();
    };
    double best_per_dof = per_dof(fit(current));
    const auto structure_left = [&] { return best_per_dof > 2; };
    for (int m = current + 1;
         m <= limit && (m - std::max(current, last_effect) <= 4 || structure_left()); ++m) {
      std::string& note = notes[static_cast<std::size_t>(m)];
      const FitResult& cur = fit(current);
      const FitResult& r = fit(m);
      if (r.chi2 <= 0.9 * cur.chi2) last_effect = m;
      best_per_dof = std::min(best_per_dof, per_dof(r));
      if (limit < hard && m == limit && structure_left() &&
          r.chi2 <= 0.9 * fit(std::max(1, m - 4)).chi2) {
        const int grown = std::min(hard, limit + 10);
        c.warnings.push_back("chi2/dof still " + fmt("%.3g", best_per_dof) +
                             " and the residual still falling at order " + std::to_string(m) +
                             ": the sweep limit grew from " + std::to_string(limit) + " to " +
                             std::to_string(grown));
        limit = grown;
      }
      if (!r.converged) {
        note = "not converged";
        continue;
      }
      if (!(r.chi2 <= 0.9 * cur.chi2)) {
        note = "residual " + fmt("%.1f", 100 * (1 - r.chi2 / cur.chi2)) + " % lower than order " +
               std::to_string(current) + ": under 10 %";
        continue;
      }
      const std::vector<cplx> added = new_poles(upper_poles(r.model), upper_poles(cur.model));
      std::vector<cplx> inside;
      for (const cplx& p : added)
        if (in_band(p)) inside.push_back(p);
      // poles outside the band shape the phase and slope within it; they
      // are taken on a strong effect alone (the residual at least halved)
      if (inside.empty() && !(r.chi2 <= 0.5 * cur.chi2)) {
        note = "new poles only outside the band, and the residual not halved";
        continue;
      }
      // each new pole found again at one of the next two orders at least (a
      // pole near the band's edge may be pulled by a pole added beyond it)
      // (among the next orders whose fit is as good: a fit that fell into a
      // worse local minimum says nothing about these poles)
      std::vector<int> later;
      for (int k = m + 1; k <= std::min(m + 4, hard) && later.size() < 2; ++k)
        if (fit(k).converged && fit(k).chi2 <= 1.1 * r.chi2) later.push_back(k);
      bool stable = true;
      for (const cplx& p : added) {
        bool again = later.empty();
        for (int k : later) again = again || stays(p, upper_poles(fit(k).model));
        stable = stable && again;
      }
      if (!stable) {
        note = "a new pole moves at the next orders";
        continue;
      }
      bool evidence = true;
      for (const cplx& p : inside) evidence = evidence && residual_stood_out(d, cur.model, p);
      if (!evidence) {
        note = "the lines near a new pole were within the noise before";
        continue;
      }
      const Mode md = mode_of(inside.empty() ? added.front() : inside.front());
      note = "added: " + std::string(md.real ? "real pole, corner " : "pair at ") +
             fmt("%.4g", md.freq_hz) + " Hz" +
             (added.size() > 1 ? " and " + std::to_string(added.size() - 1) + " more" : "") +
             (inside.empty() ? " (outside the band)" : "");
      current = m;
      if (limit < hard && m > limit - 3) {
        const int grown = std::min(hard, limit + 10);
        c.warnings.push_back("the residual still fell at order " + std::to_string(m) +
                             ": the sweep limit grew from " + std::to_string(limit) + " to " +
                             std::to_string(grown));
        limit = grown;
      }
    }
    c.order = current;
    c.reason =
        "the order sweep's rule: a higher order is taken only when its residual is at least 10 % "
        "lower, a new "
        "pole lies inside the band, stays put over the next two orders and the lines near it stood "
        "beyond "
        "the noise before";
  }
  c.chosen = fits[static_cast<std::size_t>(c.order)];
  for (int n = 1; n <= used; ++n) {
    const FitResult& r = fits[static_cast<std::size_t>(n)];
    VectorFitOptions v = vo;
    v.order = n;
    c.rows.push_back({n, r.chi2, aic(r, d, params_of(v)), r.nrmse, r.max_err_db, r.dof, r.converged,
                      n == c.order, notes[static_cast<std::size_t>(n)]});
  }
  return c;
}

// Spurious-mode pruning (order "auto"): a pole pair (or real pole) whose
// modal term, sum of r/(s - p) over the pair, stands less than 5 sigma above
// the noise on every line near it (3 half-power bandwidths, see lines_near;
// sigma = 1/w, the line's standard deviation) is a candidate; it is removed
// when the fit without it, started from the other poles, converges, is not
// 10 % or more worse overall (the sweep's effect size) and leaves the lines
// near it within the noise (residual_stood_out). Weakest candidate first, at
// most 8. A sharp mode spanning one or two lines stands far above 5 sigma
// there and is kept; a pair cancelled by a zero has a tiny residue and goes.
}  // namespace

std::vector<std::string> prune_spurious_modes(const FitData& d, VectorFitOptions vo, FitResult& r) {
  std::vector<std::string> notes;
  for (int round = 0; round < 8; ++round) {
    const RationalModel& m = r.model;
    double weakest = 5;
    std::size_t at = m.poles.size();
    for (std::size_t i = 0; i < m.poles.size(); ++i) {
      const cplx p = m.poles[i];
      if (p.imag() < 0) continue;
      const bool pair = p.imag() > 0;
      const auto [a, b] = lines_near(d, p);
      double peak = 0;
      for (std::size_t k = a; k < b; ++k) {
        const cplx s = m.domain == Domain::z
                           ? std::polar(1.0, 2 * std::numbers::pi * d.freq_hz[k] * m.sample_time_s)
                           : cplx(0, 2 * std::numbers::pi * d.freq_hz[k]);
        cplx term = m.residues[i] / (s - p);
        if (pair) term += std::conj(m.residues[i]) / (s - std::conj(p));
        peak = std::max(peak, d.weight[k] * std::abs(term));
      }
      if (peak < weakest) weakest = peak, at = i;
    }
    if (at == m.poles.size()) break;
    const cplx p = m.poles[at];
    std::vector<cplx> rest;
    for (std::size_t i = 0; i < m.poles.size(); ++i)
      if (m.poles[i] != p && m.poles[i] != std::conj(p)) rest.push_back(m.poles[i]);
    if (rest.empty()) break;
    vo.order = static_cast<int>(rest.size());
    vo.start_poles = rest;
    const FitResult without = vector_fit(d, vo);
    if (!without.converged || without.chi2 * 0.9 > r.chi2 ||
        residual_stood_out(d, without.model, p))
      break;
    const Mode md = mode_of(m.domain == Domain::z ? std::log(p) / m.sample_time_s : p);
    notes.push_back(
        std::string(md.real ? "real pole, corner " : "pair at ") + fmt("%.4g", md.freq_hz) + " Hz" +
        (md.real ? "" : " (damping " + fmt("%.3g", md.damping) + ")") + ": its modal peak stood " +
        fmt("%.2g", weakest) + " sigma above the noise, and the fit without it is as good (chi2 " +
        fmt("%+.1f", 100 * (without.chi2 / r.chi2 - 1)) +
        " %) with the lines near it within the noise");
    r = without;
  }
  return notes;
}

namespace {

// For a fit that did not converge: the highest of the 12 orders below it that
// converges on the same lines with the same options (from the standard
// start), said with its fit quality; else that none does, and what to change.
std::string what_would_work(const FrfFit& f, VectorFitOptions vo, const FitOptions& o) {
  vo.start_poles.clear();
  const int order = vo.order;
  const std::string band =
      fmt_num(f.data.freq_hz.front()) + " to " + fmt_num(f.data.freq_hz.back()) + " Hz";
  const int lowest = std::max(1, order - 12);  // a failure costs at most 12 more fits
  for (int n = order - 1; n >= lowest; --n) {
    vo.order = n;
    const FitResult r = vector_fit(f.data, vo);
    if (r.converged)
      return "order " + std::to_string(n) + " converges on the same lines (" + band + "; NRMSE " +
             fmt("%.3g", 100 * r.nrmse) + " %" +
             (r.dof > 0 ? ", chi2/dof " + fmt("%.3g", r.chi2 / r.dof) : std::string()) +
             "): --order " + std::to_string(n);
  }
  return (order > 1 ? "no order from " + std::to_string(lowest) + " to " +
                          std::to_string(order - 1) + " converges either"
                    : std::string("")) +
         std::string(order > 1 ? " on the lines of " : "the lines are ") + band +
         (o.band_given ? "; try the trusted band (no --band)" : "; try a narrower --band") +
         (o.auto_order ? "" : ", --order auto") + ", --weighting relative" +
         (vo.max_iterations < VectorFitOptions{}.max_iterations
              ? " or more than " + std::to_string(vo.max_iterations) +
                    " iterations (--max-iterations)"
              : std::string());
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
    throw InputError("band " + fmt_num(band.lo_hz) + ":" + fmt_num(band.hi_hz) +
                     " Hz holds no line of the FRF (" + fmt_num(frf.freq_hz.front()) + " to " +
                     fmt_num(frf.freq_hz.back()) + " Hz)");
  if (use.empty())
    throw InputError("all " + std::to_string(in_band) + " lines in the band " +
                     fmt_num(band.lo_hz) + " to " + fmt_num(band.hi_hz) +
                     " Hz are untrusted (coherence at or below the zero-coherence bound, not "
                     "excited, or a random error above " +
                     fmt_num(100 * ident::TrustOptions{}.max_rel_err) +
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
  if (o.auto_proper && !o.vf.improper &&
      vo.domain == Domain::s) {  // in z a held input makes b0 != 0 as a rule
    vo.proper = top_slope_db_per_decade(out.data) > -6.0;
    out.proper_note =
        vo.proper ? "a direct term: |H| is flat at the top of the band (relative degree 0)"
                  : "no direct term: |H| falls at the top of the band (relative degree >= 1)";
  }
  if (o.auto_delay) {
    out.delay_first_s = phase_slope_delay(out.data);
    vo.delay_s = out.delay_first_s;
  }
  // the order sweep and the delay search fit a subset of a long FRF's lines
  const FitData sub = sweep_lines(out.data);
  if (sub.freq_hz.size() < out.data.freq_hz.size() && (o.auto_order || o.auto_delay))
    out.sweep_note = std::string(o.auto_order ? "the order sweep" : "") +
                     (o.auto_order && o.auto_delay ? " and " : "") +
                     (o.auto_delay ? "the delay search" : "") + " fitted " +
                     std::to_string(sub.freq_hz.size()) + " of the " +
                     std::to_string(out.data.freq_hz.size()) + " lines (every " +
                     std::to_string(out.data.freq_hz.size() / 1000) +
                     "th, and those standing 3 dB off their neighbours' median); the final fit all";
  std::vector<cplx> start;    // poles to start the final fit from
  double start_chi2_dof = 0;  // the fit they came from, on the lines it fitted
  bool delay_found = false;
  if (o.auto_order) {
    OrderChoice c = choose_order(sub, vo, o);
    if (o.auto_delay && !o.polynomial) {
      // the delay refined at the chosen order, then the order chosen again
      // with it: the two are judged together, not the order with a guess
      const int first_order = c.order;
      // (trials from the standard start: poles fitted at a wrong delay sit
      // in a minimum that absorbs it)
      const FitResult r = fit_with_delay_search(sub, vo, out.delay_first_s, c.order);
      vo.delay_s = r.model.delay_s;
      c = choose_order(sub, vo, o);
      delay_found = c.order == first_order;  // else searched again at the new order
    }
    start = c.chosen.model.poles;
    start_chi2_dof = c.chosen.dof > 0 ? c.chosen.chi2 / c.chosen.dof : 0;
    out.sweep = std::move(c.rows);
    out.order_reason = c.reason;
    for (const auto& w : c.warnings) out.warnings.push_back(w);
    vo.order = c.order;
  } else {
    out.order_reason = "as given";
  }
  if (o.polynomial) {
    if (o.auto_delay) vo.delay_s = out.delay_first_s;
    out.result = sk_fit(out.data, vo);
  } else {
    if (o.auto_delay && !delay_found) {
      const FitResult r = fit_with_delay_search(sub, vo, vo.delay_s, vo.order, start);
      vo.delay_s = r.model.delay_s;
      start = r.model.poles;
      start_chi2_dof = r.dof > 0 ? r.chi2 / r.dof : 0;
    }
    if (static_cast<int>(start.size()) == vo.order) vo.start_poles = start;
    out.result = vector_fit(out.data, vo);
    // from those poles the iteration may still wander to a worse fit on all
    // the lines (vector fitting does not minimise the residual itself): then
    // the standard start too, and the better kept
    const auto per_dof = [](const FitResult& r) { return r.dof > 0 ? r.chi2 / r.dof : 0.0; };
    if (!vo.start_poles.empty() &&
        (!out.result.converged || per_dof(out.result) > 1.2 * start_chi2_dof)) {
      vo.start_poles.clear();
      FitResult cold = vector_fit(out.data, vo);
      if ((cold.converged && !out.result.converged) ||
          (cold.converged == out.result.converged && cold.chi2 < out.result.chi2))
        out.result = std::move(cold);
    }
  }
  if (o.auto_order && !o.polynomial && out.result.converged) {
    out.pruned = prune_spurious_modes(out.data, vo, out.result);
    if (!out.pruned.empty())
      out.order_reason += "; then " + std::to_string(out.pruned.size()) + " spurious mode" +
                          (out.pruned.size() > 1 ? "s" : "") + " pruned";
  }
  if (!out.result.converged) out.alternative = what_would_work(out, vo, o);
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
  s << "benchid fit: " << source << ", " << f.data.freq_hz.size() << " lines "
    << num(f.data.freq_hz.front()) << " to " << num(f.data.freq_hz.back(), 5)
    << " Hz (left out: " << f.left_out_unreliable << " untrusted, " << f.left_out_band
    << " outside the band); weighting " << weighting_name(f.weighting) << "\n";
  if (!f.band_note.empty()) s << "  band " << f.band_note << "\n";
  if (!f.sweep_note.empty()) s << "  " << f.sweep_note << "\n";
  if (!f.sweep.empty()) {
    s << "  order sweep:  order   chi2/dof   NRMSE %   worst dB  converged\n";
    char b[160];
    for (const auto& row : f.sweep) {
      std::snprintf(b, sizeof b, "               %4d  %9.4g  %8.3g  %9.3g  %-4s", row.order,
                    row.dof > 0 ? row.chi2 / row.dof : 0.0, 100 * row.nrmse, row.max_err_db,
                    row.converged ? "yes" : "no");
      s << b << (row.accepted ? "  <- chosen" : "")
        << (row.note.empty() ? "" : "  (" + row.note + ")") << "\n";
    }
  }
  const int n_poles = static_cast<int>(m.order());
  s << "  order " << n_poles - m.integrators << (m.integrators ? " + " + std::to_string(m.integrators) + " integrators" : "")
    << " (" << f.order_reason << ")\n";
  if (!f.proper_note.empty()) s << "  " << f.proper_note << "\n";
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
  for (const auto& p : f.pruned) s << "  pruned: " << p << "\n";
  list("poles", z.poles);
  list("zeros", z.zeros);
  for (const auto& w : f.warnings) s << "  warning: " << w << "\n";
  s << "  The model holds only within the fitted band (" << num(f.data.freq_hz.front()) << " to "
    << num(f.data.freq_hz.back(), 5) << " Hz) and where the measurement's coherence was high.";
  return s.str();
}

}  // namespace benchid::fit
