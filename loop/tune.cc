#include "loop/tune.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <functional>
#include <numbers>

#include "ident/error.h"
#include "ident/trusted.h"
#include "loop/controller.h"
#include "loop/frf_loop.h"
#include "loop/margins.h"
#include "loop/stability.h"

namespace benchid::loop {

namespace {

using fit::cplx;
constexpr double kPi = std::numbers::pi;
constexpr double kTwoPi = 2 * std::numbers::pi;
constexpr double kDeg = 180 / std::numbers::pi;
constexpr double kAlphaMin = 0.005, kAlphaMax = 40;  // the range of fc over the integral corner searched
constexpr double kBetaMax = 20;  // PID: the largest Td wc searched (a derivative filter corner down to fc N/20)

// |z| without std::abs's guard against overflow (hypot): loop values here
// are far from the double range's ends, and this is the search's inner loop
inline double mag(cplx z) { return std::sqrt(z.real() * z.real() + z.imag() * z.imag()); }

// A lead of phase phi (rad) centred on wc has its zero at wc/r and pole at wc r.
double lead_spread(double phi) { return std::sqrt((1 + std::sin(phi)) / (1 - std::sin(phi))); }

std::string num(double v) {
  char b[40];
  std::snprintf(b, sizeof b, "%.6g", v);
  return b;
}

// A candidate's shape; kp follows from |L(fc)| = 1.
struct Shape {
  double alpha = 5;  // fc over the integral corner wi/2pi
  double beta = 0;   // PID: Td wc
  double phi = 0;    // PI + lead: phase lead at fc, rad
};

struct Candidate {
  Shape sh;
  double fc_hz = 0;
  double kp = 0, ki = 0;
  double objective = -1;  // ki (integral) or fc (crossover)
  TuneFigures fig;        // at the bound (= nominal for a model)
  bool ok = false;
};

// Slack on the targets inside the search, so that the root-refined figures
// of the final check (which see between the grid's points) still meet them.
struct Slack {
  double ms_db = 0.03, pm_deg = 0.15, gm_db = 0.08;
};

class Engine {
 public:
  Engine(const TuneOptions& o, std::function<cplx(double)> plant) : o_(o), plant_(std::move(plant)) {}

  // the grid and the per-point error bound k eps (none: a model)
  void set_grid(std::vector<double> f, std::function<double(double)> unc = nullptr) {
    f_ = std::move(f);
    unc_fn_ = std::move(unc);
    rebuild();
  }
  // more points (where the final check found a crossing the grid had missed)
  void add_points(const std::vector<double>& extra) {
    f_.insert(f_.end(), extra.begin(), extra.end());
    std::sort(f_.begin(), f_.end());
    f_.erase(std::unique(f_.begin(), f_.end(), [](double a, double b) { return std::abs(a - b) <= 1e-12 * b; }), f_.end());
    rebuild();
  }
  void set_notches(const std::vector<NotchSetting>& n) {
    notches_ = n;
    if (!f_.empty()) rebuild();
  }
  void set_nyquist(int open_loop_unstable, int integrators) {
    open_unstable_ = open_loop_unstable;
    integrators_ = integrators;
  }
  void set_band_top_rule(bool on) { band_top_rule_ = on; }
  // a measured plant: its Nyquist count starts below the band, the plant
  // continued there as at its lowest line (frf_loop.h, below_band)
  void set_below_band(cplx p_lo, double f_lo_hz, int plant_integrators) {
    below_ = true;
    bb_ = below_band(p_lo, f_lo_hz, plant_integrators);
    if (!f_.empty()) rebuild();
  }
  const std::vector<double>& grid() const { return f_; }

  cplx s_of(double f_hz) const {
    const double w = kTwoPi * f_hz;
    return o_.dt_s > 0 ? cplx(0, 2 / o_.dt_s * std::tan(w * o_.dt_s / 2)) : cplx(0, w);
  }
  // what multiplies the controller besides the plant: notches and computation delay
  cplx extras(double f_hz) const {
    return notch_factor(s_of(f_hz)) * std::polar(1.0, -kTwoPi * f_hz * o_.compute_delay_s);
  }
  cplx fixed(double f_hz) const { return plant_(f_hz) * extras(f_hz); }
  // The controller with kp = 1, its constants worked out once per candidate.
  // s is always on the imaginary axis (j w, or Tustin's j (2/T) tan(w T/2)),
  // so each factor is written out in real arithmetic for s = j w_s: the
  // library's complex division guards against overflow and costs several
  // times as much, in the loop that dominates the search.
  struct Unit {
    double wi = 0;               // integral corner, rad/s
    double td = 0, tf = 0;       // PID: derivative time and its filter, s
    double z = 0, p = 0;         // PI + lead: zero and pole, rad/s (0: none)
    cplx at(double ws) const {   // ws = Im(s), rad/s
      cplx c(1, -wi / ws);
      if (td > 0) {  // td s / (tf s + 1)
        const double d = 1 + tf * tf * ws * ws;
        c += cplx(td * tf * ws * ws / d, td * ws / d);
      }
      if (z > 0) {  // (1 + s/z) / (1 + s/p)
        const double u = ws / z, v = ws / p, d = 1 + v * v;
        c *= cplx((1 + u * v) / d, (u - v) / d);
      }
      return c;
    }
  };
  Unit unit_controller(const Shape& sh, double wc) const {
    Unit u;
    u.wi = wc / sh.alpha;
    if (o_.structure == TuneStructure::pid && sh.beta > 0) u.td = sh.beta / wc, u.tf = u.td / o_.derivative_filter;
    if (o_.structure == TuneStructure::pi_lead && sh.phi > 0) u.z = wc / lead_spread(sh.phi), u.p = wc * lead_spread(sh.phi);
    return u;
  }

  // Evaluate one candidate; `full`: every figure even when a target fails
  // (for the best-achievable report), else stop at the first failure.
  Candidate evaluate(const Shape& sh, double fc_hz, const Slack& sl, bool full) {
    ++evaluated_;
    Candidate c;
    c.sh = sh;
    c.fc_hz = fc_hz;
    const double wc = kTwoPi * fc_hz;
    const Unit unit = unit_controller(sh, wc);
    const cplx at_fc = unit.at(s_of(fc_hz).imag()) * fixed(fc_hz);
    if (!(std::abs(at_fc) > 0) || !std::isfinite(std::abs(at_fc))) return c;
    c.kp = 1 / std::abs(at_fc);
    c.ki = c.kp * wc / sh.alpha;
    c.objective = o_.objective == TuneObjective::integral ? c.ki : fc_hz;
    const double ms_lim = std::pow(10.0, (o_.ms_max_db - sl.ms_db) / 20);
    const double pm_lim = o_.pm_min_deg + sl.pm_deg, gm_lim = o_.gm_min_db + sl.gm_db;
    if (!full) {
      // most candidates fail near their crossover: a sparse look there first
      const auto a = std::lower_bound(f_.begin(), f_.end(), fc_hz / 10), b = std::upper_bound(a, f_.end(), fc_hz * 10);
      const std::size_t ka = static_cast<std::size_t>(a - f_.begin()), kb = static_cast<std::size_t>(b - f_.begin());
      for (std::size_t k = ka; k < kb; k += 3) {
        const cplx l = c.kp * unit.at(s_[k].imag()) * g_[k];
        if (mag(1.0 + l) - unc_[k] * mag(l) < 1 / ms_lim) return c;
      }
    }
    double ms = 0, gm = std::numeric_limits<double>::infinity();
    // where loop reports them, and so checks them against the fitted band:
    // the Ms peak and the (upper) gain margin's phase crossover
    double ms_hz = NAN, upper_gm = std::numeric_limits<double>::infinity(), upper_gm_hz = NAN;
    double outside_hz = NAN;  // a gain crossing outside the fitted band
    const char* outside_what = "a gain crossover";
    // the design crossover is on the unit circle by construction
    const cplx l_fc = c.kp * at_fc;
    double pm = 180 - std::abs(std::arg(l_fc)) * kDeg - std::asin(std::min(1.0, unc_at(fc_hz))) * kDeg;
    double pm_hz = fc_hz;
    if (!full && pm < pm_lim) return c;
    bool failed = false;
    cplx prev_l{};
    for (std::size_t k = 0; k < f_.size(); ++k) {
      const cplx l = c.kp * unit.at(s_[k].imag()) * g_[k];
      l_[k] = l;
      const double al = mag(l), u = unc_[k];
      const double dist = mag(1.0 + l) - u * al;
      const double sens = dist > 1e-12 ? 1 / dist : 1e12;
      if (sens > ms) ms = sens, ms_hz = f_[k];
      if (!full && sens > ms_lim) return c;
      if (k > 0) {
        const double a0 = mag(prev_l), u2 = std::max(u, unc_[k - 1]);
        // |L| within 2 % of 1 counts as on the unit circle: a crossing that
        // only touches it (the search pushes the design crossover fc to
        // where the constraints bind, often such a tangent) shows no change
        // of sign between points
        if (std::abs(al - 1) < 0.02) {
          const double m = 180 - std::abs(std::arg(l)) * kDeg - std::asin(std::min(1.0, u)) * kDeg;
          if (m < pm) pm = m, pm_hz = f_[k];
          if (!full && m < pm_lim) return c;
        }
        // gain crossing
        if ((a0 - 1) * (al - 1) < 0) {
          const double t = std::log(a0) / (std::log(a0) - std::log(al));
          double ang = std::arg(prev_l) + t * std::arg(l / prev_l);
          ang = std::remainder(ang, kTwoPi);
          const double m = 180 - std::abs(ang) * kDeg - std::asin(std::min(1.0, u2)) * kDeg;
          if (m < pm) pm = m, pm_hz = f_[k - 1] * std::pow(f_[k] / f_[k - 1], t);
          if (o_.band_hi_hz > 0 && (f_[k] < o_.band_lo_hz || f_[k - 1] > o_.band_hi_hz) && !std::isfinite(outside_hz))
            outside_hz = f_[k - 1] * std::pow(f_[k] / f_[k - 1], t);
          if (!full && m < pm_lim) return c;
        }
        // phase crossing: L real and negative
        const double i0 = prev_l.imag(), i1 = l.imag();
        if ((i0 < 0) != (i1 < 0) && i0 != i1) {
          const double t = i0 / (i0 - i1);
          if (prev_l.real() + t * (l.real() - prev_l.real()) < 0) {
            const double mag = std::exp(std::log(a0) + t * (std::log(al) - std::log(a0)));
            const double m = mag < 1 ? -20 * std::log10(mag) - 20 * std::log10(1 + u2)
                                     : (u2 < 1 ? 20 * std::log10(mag) + 20 * std::log10(1 - u2) : -1e9);
            gm = std::min(gm, m);
            if (mag < 1 && m < upper_gm) upper_gm = m, upper_gm_hz = f_[k - 1] + t * (f_[k] - f_[k - 1]);
            if (!full && m < gm_lim) return c;
          }
        }
      }
      prev_l = l;
    }
    const double top = std::abs(prev_l) * (1 + unc_.back());
    const bool top_ok = !band_top_rule_ || top <= std::pow(10.0, -gm_lim / 20);
    const auto outside = [&](double f) {
      return o_.band_hi_hz > 0 && std::isfinite(f) && (f < o_.band_lo_hz || f > o_.band_hi_hz);
    };
    for (double f : {fc_hz, pm_hz})
      if (!std::isfinite(outside_hz) && outside(f)) outside_hz = f;
    if (!std::isfinite(outside_hz) && outside(upper_gm_hz))
      outside_hz = upper_gm_hz, outside_what = "the gain margin's phase crossover";
    if (!std::isfinite(outside_hz) && outside(ms_hz)) outside_hz = ms_hz, outside_what = "the Ms peak";
    const bool in_band = !std::isfinite(outside_hz);
    c.fig.outside_band_hz = outside_hz;
    c.fig.outside_what = outside_what;
    c.fig.top_ok = top_ok;
    failed = !in_band || !top_ok || ms > ms_lim || pm < pm_lim || gm < gm_lim || !std::isfinite(pm) || fc_hz < o_.min_crossover_hz;
    if (!failed || full) {
      // Nyquist: Z = P - (2 D - K pi)/(2 pi), D the change of arg(1 + L) over the grid (stability.h)
      // (the first pass has been through every point: L is in l_)
      double arg_change = 0;
      bool trusted = true;
      if (below_) {
        for (std::size_t i = 0; i < below_l_.size(); ++i) below_l_[i] = c.kp * unit.at(below_ws_[i]) * below_g_[i];
        const BelowBandWalk w = walk_below_band(bb_, below_l_, integrators_);
        arg_change = w.arg_change_rad, trusted = w.trusted;
      }
      for (std::size_t k = 1; k < f_.size(); ++k) arg_change += std::arg((1.0 + l_[k]) / (1.0 + l_[k - 1]));
      // No verdict, as frf_margins and closed_loop_stability refuse one, when
      // the count is far from a whole number of turns (the grid's ends do not
      // show the loop's), when below a measured band the continued plant
      // cannot stand in for the real one, or when the band's top still has
      // |L| near 1 or above.
      const double turns = (2 * arg_change - integrators_ * kPi) / kTwoPi;
      c.fig.judged = trusted && std::abs(turns - std::round(turns)) < 0.15 && (!band_top_rule_ || mag(l_.back()) < 0.5);
      c.fig.stable = c.fig.judged && open_unstable_ == std::lround(turns);
    }
    c.fig.ms_db = 20 * std::log10(ms);
    c.fig.pm_deg = pm;
    c.fig.gm_db = gm;
    c.fig.crossover_hz = pm_hz;
    c.ok = !failed && c.fig.stable;
    return c;
  }

  std::size_t evaluated() const { return evaluated_; }
  double unc_at(double f_hz) const { return unc_fn_ ? unc_fn_(f_hz) : 0.0; }

 private:
  void rebuild() {
    s_.resize(f_.size());
    g_.resize(f_.size());
    unc_.resize(f_.size());
    l_.resize(f_.size());
    for (std::size_t k = 0; k < f_.size(); ++k) {
      s_[k] = s_of(f_[k]);
      g_[k] = fixed(f_[k]);
      unc_[k] = unc_fn_ ? unc_fn_(f_[k]) : 0.0;
    }
    if (below_) {
      below_ws_.clear(), below_g_.clear();
      for (std::size_t i = 0; i < bb_.f_hz.size(); ++i) {
        below_ws_.push_back(s_of(bb_.f_hz[i]).imag());
        below_g_.push_back(bb_.plant[i] * extras(bb_.f_hz[i]));
      }
      below_l_.resize(below_g_.size());
    }
  }
  cplx notch_factor(cplx s) const {
    cplx r = 1;
    for (const NotchSetting& n : notches_) {
      const double w = kTwoPi * n.freq_hz, zp = n.width_hz / (2 * n.freq_hz), zz = zp * std::pow(10.0, -n.depth_db / 20);
      r *= (s * s + 2 * zz * w * s + w * w) / (s * s + 2 * zp * w * s + w * w);
    }
    return r;
  }

  const TuneOptions& o_;
  std::function<cplx(double)> plant_;
  std::vector<NotchSetting> notches_;
  std::vector<double> f_, unc_;
  std::function<double(double)> unc_fn_;
  std::vector<cplx> s_, g_;
  std::vector<cplx> l_;  // the loop of the candidate being evaluated
  int open_unstable_ = 0, integrators_ = 1;
  bool band_top_rule_ = false;
  bool below_ = false;
  BelowBand bb_;                       // below a measured band: the points and the continued plant
  std::vector<double> below_ws_;       // there: Im(s), rad/s
  std::vector<cplx> below_g_, below_l_;  // there: the plant with extras, and the candidate's loop
  std::size_t evaluated_ = 0;
};

std::vector<double> linspace(double a, double b, int n) {
  std::vector<double> v;
  for (int i = 0; i < n; ++i) v.push_back(n == 1 ? a : a + (b - a) * i / (n - 1));
  return v;
}

std::vector<Shape> shapes(const TuneOptions& o) {
  std::vector<double> alphas;
  // alpha = fc over the integral corner; the crossover objective keeps the
  // integral action at least as strong as the stated ratio (alpha <= ratio),
  // else the highest crossover would come with no integral action at all
  const double top = o.objective == TuneObjective::crossover ? o.integral_ratio : kAlphaMax;
  for (double x : linspace(std::log(kAlphaMin), std::log(top), o.objective == TuneObjective::crossover ? 12 : 20))
    alphas.push_back(std::exp(x));
  std::vector<Shape> out;
  for (double a : alphas) {
    if (o.structure == TuneStructure::pi) out.push_back({a, 0, 0});
    if (o.structure == TuneStructure::pid)
      for (double b : {0.0, 0.15, 0.3, 0.5, 0.8, 1.2, 2.0, 3.5, 6.0, 10.0}) out.push_back({a, b, 0});
    if (o.structure == TuneStructure::pi_lead)
      for (double p : linspace(0, o.max_lead_deg, 7))
        out.push_back({a, 0, p / kDeg});
  }
  return out;
}

// a meets the targets and is better than b: a higher objective; for the
// crossover objective, at an equal crossover, the higher integral gain
bool better(const Candidate& a, const Candidate& b, const TuneOptions& o) {
  if (!a.ok) return false;
  if (!b.ok) return true;
  if (o.objective == TuneObjective::crossover && std::abs(a.objective - b.objective) <= 1e-6 * b.objective)
    return a.ki > b.ki;
  return a.objective > b.objective;
}

// The highest crossover at which this shape meets the targets, found near
// `hint` (0: scanned from the top of the list), refined by bisection. For a
// fixed shape |C| at fc is fixed, so ki = kp wc/alpha grows with fc wherever
// |P| falls: the highest feasible crossover also gives the highest ki.
Candidate top_feasible(Engine& e, const Shape& sh, const std::vector<double>& fcs, const Slack& sl, double hint) {
  const auto ev = [&](double fc) { return e.evaluate(sh, fc, sl, false); };
  const double r = fcs.size() > 1 ? fcs[1] / fcs[0] : 1.1;
  Candidate best;
  double hi_bad = 0;
  if (hint > 0) {
    Candidate c = ev(hint);
    double f = hint;
    if (c.ok) {
      best = c;
      for (int i = 0; i < 60; ++i) {
        f *= r;
        if (f > fcs.back()) break;
        Candidate d = ev(f);
        if (!d.ok) {
          hi_bad = f;
          break;
        }
        best = d;
      }
    } else {
      for (int i = 0; i < 12; ++i) {
        const double up = f;
        f /= r;
        if (f < fcs.front()) break;
        Candidate d = ev(f);
        if (d.ok) {
          best = d;
          hi_bad = up;
          break;
        }
      }
    }
  }
  if (!best.ok) {
    for (std::size_t i = fcs.size(); i-- > 0;) {
      Candidate d = ev(fcs[i]);
      if (d.ok) {
        best = d;
        hi_bad = i + 1 < fcs.size() ? fcs[i + 1] : 0;
        break;
      }
    }
  }
  if (!best.ok || hi_bad == 0) return best;
  double lo = best.fc_hz, hi = hi_bad;
  for (int i = 0; i < 12 && hi / lo > 1 + 1e-5; ++i) {
    const double mid = std::sqrt(lo * hi);
    Candidate d = ev(mid);
    if (d.ok) best = d, lo = mid;
    else hi = mid;
  }
  return best;
}

// Coarse grid of shapes, each at its highest feasible crossover; then a
// pattern search over the shape from the best five.
Candidate search(Engine& e, const TuneOptions& o, const std::vector<double>& fcs, const Slack& sl) {
  std::vector<Candidate> found;
  for (const Shape& sh : shapes(o)) {
    Candidate c = top_feasible(e, sh, fcs, sl, 0);
    if (c.ok) found.push_back(c);
  }
  if (found.empty()) return {};
  std::sort(found.begin(), found.end(), [&](const Candidate& a, const Candidate& b) { return better(a, b, o); });
  found.resize(std::min<std::size_t>(found.size(), 5));
  const double alpha_top = o.objective == TuneObjective::crossover ? o.integral_ratio : kAlphaMax;
  Candidate overall;
  for (Candidate cur : found) {
    // ln alpha, then beta (PID) or phi (PI + lead)
    double step[2] = {0.3, o.structure == TuneStructure::pid ? 0.15 : o.structure == TuneStructure::pi_lead ? 5 / kDeg : 0.0};
    for (int it = 0; it < 100; ++it) {
      bool moved = false;
      for (int d = 0; d < 2 && !moved; ++d) {
        if (step[d] == 0) continue;
        for (int sgn : {1, -1}) {
          Shape sh = cur.sh;
          if (d == 0) sh.alpha = std::clamp(sh.alpha * std::exp(sgn * step[d]), kAlphaMin, alpha_top);
          else if (o.structure == TuneStructure::pid) sh.beta = std::clamp(sh.beta + sgn * step[d] * std::max(1.0, sh.beta), 0.0, kBetaMax);
          else sh.phi = std::clamp(sh.phi + sgn * step[d], 0.0, o.max_lead_deg / kDeg);
          if (sh.alpha == cur.sh.alpha && sh.beta == cur.sh.beta && sh.phi == cur.sh.phi) continue;
          Candidate c = top_feasible(e, sh, fcs, sl, cur.fc_hz);
          if (better(c, cur, o) && std::abs(c.objective - cur.objective) > 1e-7 * cur.objective + 1e-300) {
            cur = c;
            moved = true;
            break;
          }
        }
      }
      if (!moved) {
        step[0] /= 2, step[1] /= 2;
        if (step[0] < 2e-3) break;
      }
    }
    if (better(cur, overall, o)) overall = cur;
  }
  return overall;
}

void fill_parameters(const Candidate& c, const TuneOptions& o, TuneResult& r) {
  const double wc = kTwoPi * c.fc_hz;
  r.kp = c.kp;
  r.ki = c.ki;
  r.kd = r.tf_s = 0;
  r.lead_zero_hz = r.lead_pole_hz = 0;
  if (o.structure == TuneStructure::pid && c.sh.beta > 0) {
    r.kd = c.kp * c.sh.beta / wc;
    r.tf_s = c.sh.beta / wc / o.derivative_filter;
  }
  if (o.structure == TuneStructure::pi_lead && c.sh.phi > 0)
    r.lead_zero_hz = c.fc_hz / lead_spread(c.sh.phi), r.lead_pole_hz = c.fc_hz * lead_spread(c.sh.phi);
  r.integral_gain = r.ki;
}

// When nothing meets the targets: the best of each figure over the stable
// candidates, and the one closest to all targets.
void best_achievable(Engine& e, const TuneOptions& o, const std::vector<double>& fcs, TuneResult& r) {
  double best_score = -std::numeric_limits<double>::infinity();
  Candidate closest;
  const Slack none{0, 0, 0};
  for (const Shape& sh : shapes(o))
    for (double fc : fcs) {
      if (fc < o.min_crossover_hz) continue;
      const Candidate c = e.evaluate(sh, fc, none, true);
      if (!c.fig.judged) ++r.not_judged;
      // (a shape with several gain crossings may have its worst one below fc)
      if (!c.fig.stable || !std::isfinite(c.fig.pm_deg) || c.fig.crossover_hz < o.min_crossover_hz) continue;
      if (!(c.fig.pm_deg <= r.best_pm.pm_deg)) r.best_pm = c.fig;
      if (!(c.fig.gm_db <= r.best_gm.gm_db)) r.best_gm = c.fig;
      if (!(c.fig.ms_db >= r.best_ms.ms_db)) r.best_ms = c.fig;
      // margins in units of a modest step of each (10 deg, 3 dB, 1.5 dB)
      const double score = std::min({(c.fig.pm_deg - o.pm_min_deg) / 10, (c.fig.gm_db - o.gm_min_db) / 3,
                                     (o.ms_max_db - c.fig.ms_db) / 1.5});
      if (score > best_score) best_score = score, closest = c;
    }
  if (std::isfinite(best_score)) {
    r.closest = closest.fig;
    TuneResult tmp;
    fill_parameters(closest, o, tmp);
    tmp.notches = r.notches;
    r.closest_spec = tune_spec(tmp, o);
  }
}

void check_options(const TuneOptions& o) {
  auto need = [](bool ok, const std::string& what) {
    if (!ok) throw InputError(what);
  };
  need(o.pm_min_deg >= 0 && o.pm_min_deg < 90, "phase margin target " + num(o.pm_min_deg) + " deg; expected 0 to 90");
  need(o.gm_min_db >= 0 && o.gm_min_db < 60, "gain margin target " + num(o.gm_min_db) + " dB; expected 0 to 60");
  need(o.ms_max_db > 0 && o.ms_max_db <= 20, "Ms target " + num(o.ms_max_db) + " dB; expected above 0 and at most 20");
  need(o.band_lo_hz >= 0 && o.band_hi_hz >= 0 && (o.band_hi_hz == 0 || o.band_hi_hz > o.band_lo_hz),
       "fitted band " + num(o.band_lo_hz) + " to " + num(o.band_hi_hz) + " Hz; expected 0 <= lo < hi");
  need(o.min_crossover_hz >= 0, "minimum crossover " + num(o.min_crossover_hz) + " Hz; expected >= 0");
  need(o.derivative_filter >= 1 && o.derivative_filter <= 1000,
       "derivative filter N = " + num(o.derivative_filter) + "; expected 1 to 1000");
  need(o.integral_ratio >= 0.5 && o.integral_ratio <= 1000, "integral ratio " + num(o.integral_ratio) + "; expected 0.5 to 1000");
  need(o.max_lead_deg > 0 && o.max_lead_deg <= 80, "maximum lead " + num(o.max_lead_deg) + " deg; expected above 0 and at most 80");
  need(o.dt_s >= 0 && std::isfinite(o.dt_s), "sample period " + num(o.dt_s) + " s; expected >= 0");
  need(o.compute_delay_s >= 0 && std::isfinite(o.compute_delay_s), "computation delay " + num(o.compute_delay_s) + " s; expected >= 0");
  need(o.error_sigmas >= 0 && o.error_sigmas <= 10, "error bound " + num(o.error_sigmas) + " s.d.; expected 0 to 10");
  need(o.notch_depth_db > 0 && o.notch_depth_db <= 80, "notch depth " + num(o.notch_depth_db) + " dB; expected above 0 and at most 80");
  need(o.notch_width_factor > 0 && o.notch_width_factor <= 50, "notch width factor " + num(o.notch_width_factor) + "; expected above 0 and at most 50");
  for (const NotchSetting& n : o.notches)
    need(n.freq_hz > 0 && n.width_hz > 0 && n.width_hz < 2 * n.freq_hz && n.depth_db > 0,
         "notch f=" + num(n.freq_hz) + ",width=" + num(n.width_hz) + ",depth=" + num(n.depth_db) +
             ": expected f > 0 Hz, 0 < width < 2 f Hz and depth > 0 dB");
  if (o.dt_s > 0)
    for (const NotchSetting& n : o.notches)
      need(n.freq_hz < 0.5 / o.dt_s, "notch at " + num(n.freq_hz) + " Hz is at or above the Nyquist frequency " +
                                          num(0.5 / o.dt_s) + " Hz of dt = " + num(o.dt_s) + " s");
}

std::vector<double> log_grid(double lo, double hi, std::size_t n) {
  std::vector<double> f;
  for (std::size_t i = 0; i < n; ++i) f.push_back(lo * std::pow(hi / lo, static_cast<double>(i) / static_cast<double>(n - 1)));
  return f;
}

// Extra points across a lightly damped pair (f_n, zeta): half-power widths at 1/4 of a width.
void add_resonance_points(std::vector<double>& f, double fn, double zeta, double lo, double hi) {
  if (!(zeta > 0 && zeta < 0.3)) return;
  for (double t = -10; t <= 10; t += std::abs(t) < 4 ? 0.125 : 0.5) {
    const double x = fn * (1 + zeta * t);
    if (x > lo && x < hi) f.push_back(x);
  }
}

void sort_unique(std::vector<double>& f) {
  std::sort(f.begin(), f.end());
  f.erase(std::unique(f.begin(), f.end(), [](double a, double b) { return std::abs(a - b) <= 1e-12 * b; }), f.end());
}

// Crossover candidates: every few grid points strictly inside the range.
std::vector<double> crossover_list(const std::vector<double>& base, double lo, double hi, const TuneOptions& o) {
  std::vector<double> out;
  const double from = std::max(lo, o.min_crossover_hz);
  for (std::size_t k = 0; k < base.size(); k += 8)
    if (base[k] >= from && base[k] <= hi) out.push_back(base[k]);
  return out;
}

std::string method_name(const TuneOptions& o) {
  return o.objective == TuneObjective::integral
             ? "MIGO: the largest integral gain under the Ms, PM and GM constraints (Astrom, Panagopoulos & Hagglund, "
               "Automatica 1998; Astrom & Hagglund, Advanced PID Control, 2006)"
             : "loop shaping: the highest gain crossover meeting the constraints, integral corner at 1/" +
                   num(o.integral_ratio) + " of it (Astrom & Murray, Feedback Systems, 2008)";
}

// Notes on a PID whose shape an engineer may not expect from the structure's name.
void describe_shape(TuneResult& r, const TuneOptions& o) {
  if (o.structure != TuneStructure::pid) return;
  if (r.kd == 0) {
    r.notes.push_back("no derivative action: on this plant it did not raise the objective under the targets (the proposal is a PI)");
    return;
  }
  const double corner_hz = 1 / (kTwoPi * r.tf_s);
  if (corner_hz < r.nominal.crossover_hz)
    r.notes.push_back("the derivative filter corner " + num(corner_hz) + " Hz lies below the crossover " +
                      num(r.nominal.crossover_hz) + " Hz: from there up the D term adds a constant gain kd/tf = " +
                      num(r.kd / r.tf_s) + " (a lag-lead shape rather than a derivative at crossover)");
}

// Runs the search, widening the slack until the final check passes.
// verify(r, misses) fills r.nominal / r.at_bound, says whether the targets
// hold, and names the frequencies of the exact crossings and peaks; when it
// fails, points are added around them and the search runs again.
TuneResult run(Engine& e, const TuneOptions& o, const std::vector<double>& fcs,
               const std::function<bool(TuneResult&, std::vector<double>&)>& verify,
               const std::vector<NotchSetting>& notches) {
  TuneResult r;
  r.method = method_name(o);
  r.notches = notches;
  e.set_notches(notches);
  const Slack slacks[] = {Slack{}, Slack{}, Slack{}, Slack{0.15, 0.6, 0.3}, Slack{0.5, 2, 1}};
  for (const Slack& sl : slacks) {
    const Candidate c = search(e, o, fcs, sl);
    if (!c.ok) break;
    fill_parameters(c, o, r);
    r.spec = tune_spec(r, o);
    r.nominal.stable = c.fig.stable;  // the grid's Nyquist count, for loops no other routine judges
    std::vector<double> where;
    const bool pass = verify(r, where);
    if (pass) {
      r.found = true;
      r.candidates = e.evaluated();
      describe_shape(r, o);
      return r;
    }
    // the grid missed something near these frequencies: look closer there
    std::vector<double> extra;
    for (double f : where)
      if (std::isfinite(f) && f > 0)
        for (int i = -40; i <= 40; ++i) extra.push_back(f * std::pow(1.002, i));
    e.add_points(extra);
  }
  r.spec.clear();
  best_achievable(e, o, fcs, r);
  r.candidates = e.evaluated();
  return r;
}

bool meets(const TuneFigures& f, const TuneOptions& o) {
  return f.stable && f.pm_deg >= o.pm_min_deg && f.gm_db >= o.gm_min_db && f.ms_db <= o.ms_max_db &&
         !(f.crossover_hz < o.min_crossover_hz);
}

// Rounded parameters back from the printed spec (so the figures belong to it).
void reread(TuneResult& r) {
  auto value = [&](const std::string& key, std::size_t from) {
    const std::size_t p = r.spec.find(key, from);
    return p == std::string::npos ? 0.0 : std::strtod(r.spec.c_str() + p + key.size(), nullptr);
  };
  r.kp = value("kp=", 0);
  r.ki = value("ki=", 0);
  r.kd = value("kd=", 0);
  r.tf_s = value("tf=", 0);
  const std::size_t lead = r.spec.find("lead:");
  if (lead != std::string::npos) r.lead_zero_hz = value("z=", lead), r.lead_pole_hz = value("p=", lead);
  r.integral_gain = r.ki;
}

}  // namespace

const char* structure_name(TuneStructure s) {
  switch (s) {
    case TuneStructure::pi: return "pi";
    case TuneStructure::pid: return "pid";
    case TuneStructure::pi_lead: return "pi+lead";
  }
  return "";
}

std::string tune_spec(const TuneResult& r, const TuneOptions& o) {
  std::string s = "pid:kp=" + num(r.kp) + ",ki=" + num(r.ki);
  if (r.kd > 0) s += ",kd=" + num(r.kd) + ",tf=" + num(r.tf_s);
  if (r.lead_zero_hz > 0) s += "*lead:z=" + num(r.lead_zero_hz) + ",p=" + num(r.lead_pole_hz);
  for (const NotchSetting& n : r.notches)
    s += "*notch:f=" + num(n.freq_hz) + ",width=" + num(n.width_hz) + ",depth=" + num(n.depth_db);
  if (o.dt_s > 0) {
    s += "@dt=" + num(o.dt_s);
    if (o.compute_delay_s > 0) s += ",delay=" + num(o.compute_delay_s);
  } else if (o.compute_delay_s > 0) {
    s += "@delay=" + num(o.compute_delay_s);
  }
  return s;
}

TuneResult tune_model(const fit::RationalModel& plant, const TuneOptions& o) {
  check_options(o);
  if (plant.domain != fit::Domain::s)
    throw InputError("tune takes an s-domain model (or a measured FRF); this model is in z");
  Controller unity = parse_controller("gain:k=1");
  // Plain variables, not a structured binding: lambdas below capture them (C++17).
  const std::pair<double, double> range = loop_range(plant, unity);
  double lo = range.first / 10, hi = range.second * 10;
  if (o.dt_s > 0) hi = std::min(hi, 0.4999 / o.dt_s);
  if (o.dt_s > 0 && o.min_crossover_hz >= hi)
    throw InputError("minimum crossover " + num(o.min_crossover_hz) + " Hz is at or above the Nyquist frequency of dt = " +
                     num(o.dt_s) + " s");
  std::vector<double> base = log_grid(lo, hi, std::max<std::size_t>(o.grid_points, 100));
  const std::vector<double> fcs = crossover_list(base, std::max(lo * 30, o.band_lo_hz), o.band_hi_hz > 0 ? std::min(hi / 30, o.band_hi_hz) : hi / 30, o);
  int unstable = 0;
  for (const cplx& p : plant.poles)
    if (p.real() > 0) ++unstable;
  std::vector<double> grid = base;
  for (const cplx& p : plant.poles)
    if (p.imag() > 0) add_resonance_points(grid, std::abs(p) / kTwoPi, fit::mode_of(p).damping, lo, hi);

  Engine e(o, [&](double f) { return plant.response(f); });
  e.set_nyquist(unstable, plant.integrators + 1);
  const auto make_grid = [&](const std::vector<NotchSetting>& notches) {
    std::vector<double> g = grid;
    for (const NotchSetting& n : notches) add_resonance_points(g, n.freq_hz, n.width_hz / (2 * n.freq_hz), lo, hi);
    sort_unique(g);
    return g;
  };
  MarginOptions mo;
  const auto verify = [&](TuneResult& r, std::vector<double>& where) {
    reread(r);
    const Controller c = parse_controller(r.spec);
    const Margins m = model_margins(plant, c, mo);
    for (const Crossing& x : m.crossings)
      if (x.kind == Crossing::Kind::gain) where.push_back(x.freq_hz);
    where.insert(where.end(), {m.ms_hz, m.gain_margin_hz});
    const Stability st = closed_loop_stability(plant, c, m.f_lo_hz, m.f_hi_hz);
    TuneFigures f;
    f.pm_deg = m.phase_margin_deg;
    f.gm_db = std::min(m.gain_margin_db, std::isfinite(m.lower_gain_margin_db) ? m.lower_gain_margin_db
                                                                               : std::numeric_limits<double>::infinity());
    f.ms_db = 20 * std::log10(m.ms);
    f.crossover_hz = m.crossover_hz;
    // A discrete controller on a continuous plant: stability of the sampled-
    // data loop is not judged by stability.h; the search's Nyquist count of
    // the frequency response below Nyquist (no aliasing) stands in for it.
    f.stable = st.judged ? st.stable : (o.dt_s > 0 && r.nominal.stable);
    r.nominal = r.at_bound = f;
    const auto inside = [&](double fr) {
      return o.band_hi_hz <= 0 || !std::isfinite(fr) || (fr >= o.band_lo_hz && fr <= o.band_hi_hz);
    };
    // every gain crossover, and the gain margin and Ms where loop reports
    // them, inside the fitted band: loop's verdict requires it
    bool in_band = inside(m.ms_hz) && (!std::isfinite(m.gain_margin_db) || inside(m.gain_margin_hz));
    for (const Crossing& x : m.crossings)
      if (x.kind == Crossing::Kind::gain) in_band = in_band && inside(x.freq_hz);
    return in_band && meets(f, o);
  };
  const auto attempt = [&](const std::vector<NotchSetting>& notches) {
    e.set_grid(make_grid(notches));
    return run(e, o, fcs, verify, notches);
  };
  TuneResult r0 = attempt(o.notches);
  if (!o.auto_notch) return r0;
  // lightly damped resonances, the lightest first, above the crossover found without them
  std::vector<std::pair<double, double>> res;  // zeta, f_n
  for (const cplx& p : plant.poles)
    if (p.imag() > 0) {
      const fit::Mode md = fit::mode_of(p);
      if (md.damping <= o.auto_notch_damping && (!r0.found || md.freq_hz > r0.nominal.crossover_hz) &&
          (o.dt_s == 0 || md.freq_hz < 0.45 / o.dt_s))
        res.emplace_back(md.damping, md.freq_hz);
    }
  std::sort(res.begin(), res.end());
  if (res.size() > o.max_auto_notches) res.resize(o.max_auto_notches);
  if (res.empty()) {
    r0.notes.push_back("auto notch: no resonance with damping <= " + num(o.auto_notch_damping) +
                       " above the crossover; none placed");
    return r0;
  }
  std::vector<NotchSetting> notches = o.notches;
  std::string placed;
  for (const auto& [z, fn] : res) {
    notches.push_back({fn, std::min(o.notch_width_factor * 2 * z * fn, 1.5 * fn), o.notch_depth_db});
    placed += (placed.empty() ? "" : ", ") + num(fn) + " Hz (damping " + num(z) + ")";
  }
  TuneResult r1 = attempt(notches);
  if (r1.found && (!r0.found || r1.integral_gain * (o.objective == TuneObjective::integral ? 1 : 0) +
                                        r1.nominal.crossover_hz * (o.objective == TuneObjective::crossover ? 1 : 0) >
                                    r0.integral_gain * (o.objective == TuneObjective::integral ? 1 : 0) +
                                        r0.nominal.crossover_hz * (o.objective == TuneObjective::crossover ? 1 : 0))) {
    r1.notes.push_back("auto notch: placed at " + placed + ", depth " + num(o.notch_depth_db) + " dB, width " +
                       num(o.notch_width_factor) + " x the resonance's half-power bandwidth");
    r1.candidates += r0.candidates;
    return r1;
  }
  e.set_grid(make_grid(o.notches));
  r0.notes.push_back("auto notch: notches at " + placed + " did not improve the objective; left out");
  r0.candidates += r1.candidates;
  return r0;
}

TuneResult tune_frf(const ident::Frf& frf, const TuneOptions& o) {
  check_options(o);
  if (o.auto_notch)
    throw InputError("--notch auto needs a model plant (its resonances are read from the poles); give notches "
                     "as f=HZ,width=HZ,depth=DB for a measured FRF");
  FrfLoopOptions fo;
  fo.draws = 0;
  fo.plant_integrators = o.plant_integrators;
  fo.band_given = o.frf_band_given;
  fo.band_lo_hz = o.frf_band_lo_hz, fo.band_hi_hz = o.frf_band_hi_hz;
  const FrfMargins fm = frf_margins(frf, parse_controller("gain:k=1"), fo);
  // the lines used (frf_margins' band and rule), and their error bound
  std::vector<double> lf, le;
  for (std::size_t k = 0; k < frf.size(); ++k) {
    const double e = k < frf.rel_err.size() ? frf.rel_err[k] : std::numeric_limits<double>::quiet_NaN();
    if (frf.freq_hz[k] < fm.band_lo_hz || frf.freq_hz[k] > fm.band_hi_hz || !ident::is_trusted(frf, k))
      continue;
    lf.push_back(frf.freq_hz[k]);
    le.push_back(std::isfinite(e) ? o.error_sigmas * e : 0.0);
  }
  if (lf.size() < 8) throw InputError("the FRF has " + std::to_string(lf.size()) + " usable lines; expected at least 8");
  const double lo = lf.front(), hi = lf.back();
  if (o.dt_s > 0 && hi >= 0.5 / o.dt_s)
    throw InputError("the FRF reaches " + num(hi) + " Hz, at or above the Nyquist frequency " + num(0.5 / o.dt_s) +
                     " Hz of dt = " + num(o.dt_s) + " s; expected a measured band below it (frf --band)");
  std::vector<double> grid = log_grid(lo, hi, std::max<std::size_t>(o.grid_points, 100));
  const std::vector<double> fcs = crossover_list(grid, lo, hi, o);
  // every line too (with a point halfway to the next), so that no measured detail falls between points
  for (std::size_t k = 0; k < lf.size(); ++k) {
    grid.push_back(lf[k]);
    if (k + 1 < lf.size()) grid.push_back(std::sqrt(lf[k] * lf[k + 1]));
  }
  sort_unique(grid);
  // the bound between lines: the larger of the two neighbours'
  const std::function<double(double)> unc_at = [&lf, &le](double f) {
    const auto it = std::lower_bound(lf.begin(), lf.end(), f * (1 - 1e-12));
    const std::size_t k = static_cast<std::size_t>(it - lf.begin());
    return std::max(le[std::min(k, le.size() - 1)], le[k > 0 ? k - 1 : 0]);
  };
  const std::function<cplx(double)> plant = [&fm](double f) { return margins_loop_value(fm, f); };
  Engine e(o, plant);
  e.set_nyquist(0, o.plant_integrators + 1);
  e.set_band_top_rule(true);
  e.set_below_band(plant(lo), lo, o.plant_integrators);
  e.set_grid(grid, unc_at);
  const auto verify = [&](TuneResult& r, std::vector<double>& where) {
    reread(r);
    // at the bound: the engine's figures without slack, on the rounded parameters
    // (the same shape and the crossover the rounded kp gives)
    const Controller c = parse_controller(r.spec);
    FrfLoopOptions v = fo;
    const FrfMargins m = frf_margins(frf, c, v);
    for (const Crossing& x : m.nominal.crossings)
      if (x.kind == Crossing::Kind::gain) where.push_back(x.freq_hz);
    where.insert(where.end(), {m.nominal.ms_hz, m.nominal.gain_margin_hz});
    TuneFigures n;
    n.pm_deg = m.nominal.phase_margin_deg;
    n.gm_db = std::min(m.nominal.gain_margin_db, std::isfinite(m.nominal.lower_gain_margin_db)
                                                     ? m.nominal.lower_gain_margin_db
                                                     : std::numeric_limits<double>::infinity());
    n.ms_db = 20 * std::log10(m.nominal.ms);
    n.crossover_hz = m.nominal.crossover_hz;
    n.stable = m.inferred_unstable == 0;
    const bool inside = std::abs(margins_loop_value(m, hi)) < 1;
    r.nominal = n;
    // the bound from the same disk rule, evaluated on the printed controller
    double ms = 0, pm = std::numeric_limits<double>::infinity(), gm = std::numeric_limits<double>::infinity();
    cplx prev{};
    double u_prev = 0;
    for (std::size_t k = 0; k < grid.size(); ++k) {
      const cplx l = plant(grid[k]) * c.model.response(grid[k]);
      const double u = unc_at(grid[k]), al = std::abs(l);
      const double dist = std::abs(1.0 + l) - u * al;
      ms = std::max(ms, dist > 1e-12 ? 1 / dist : 1e12);
      if (k > 0) {
        const double a0 = std::abs(prev), u2 = std::max(u, u_prev);
        if ((a0 - 1) * (al - 1) < 0) {
          const double t = std::log(a0) / (std::log(a0) - std::log(al));
          const double ang = std::remainder(std::arg(prev) + t * std::arg(l / prev), kTwoPi);
          pm = std::min(pm, 180 - std::abs(ang) * kDeg - std::asin(std::min(1.0, u2)) * kDeg);
        }
        const double i0 = prev.imag(), i1 = l.imag();
        if ((i0 < 0) != (i1 < 0) && i0 != i1) {
          const double t = i0 / (i0 - i1);
          if (prev.real() + t * (l.real() - prev.real()) < 0) {
            const double mag = std::exp(std::log(a0) + t * (std::log(al) - std::log(a0)));
            gm = std::min(gm, mag < 1 ? -20 * std::log10(mag) - 20 * std::log10(1 + u2)
                                      : (u2 < 1 ? 20 * std::log10(mag) + 20 * std::log10(1 - u2) : -1e9));
          }
        }
      }
      prev = l;
      u_prev = u;
    }
    TuneFigures b = n;
    b.ms_db = 20 * std::log10(ms);
    b.pm_deg = pm;
    b.gm_db = gm;
    r.at_bound = b;
    return inside && meets(n, o) && meets(b, o);
  };
  TuneResult r = run(e, o, fcs, verify, o.notches);
  r.frf_plant = true;
  return r;
}

std::vector<std::vector<double>> controller_sections(const std::string& spec) {
  const std::size_t at = spec.find('@');
  if (at == std::string::npos || spec.find("dt=", at) == std::string::npos)
    throw InputError("controller '" + spec + "': expected a discrete controller (@dt=SECONDS) for sections");
  // the sample period (and prewarp) without the delay, which is not a section
  std::string tail;
  {
    std::string rest = spec.substr(at + 1);
    std::size_t p = 0;
    while (p <= rest.size()) {
      const std::size_t q = std::min(rest.find_first_of(",;", p), rest.size());
      const std::string item = rest.substr(p, q - p);
      if (item.rfind("delay=", 0) != 0 && !item.empty()) tail += (tail.empty() ? "@" : ",") + item;
      p = q + 1;
    }
  }
  std::vector<std::vector<double>> out;
  std::size_t p = 0;
  const std::string body = spec.substr(0, at);
  while (p <= body.size()) {
    const std::size_t q = std::min(body.find('*', p), body.size());
    const Controller c = parse_controller(body.substr(p, q - p) + tail);
    const fit::Polynomial poly = c.model.polynomial();
    const std::size_t n = poly.den.size() - 1;
    if (n > 2 || poly.num.size() > poly.den.size())
      throw InputError("controller factor '" + body.substr(p, q - p) + "': more than second order; expected pid, lead, lag, notch or gain factors");
    std::vector<double> sec(6, 0.0);
    // H(z) = sum num_j z^(deg_j) / sum den_j z^(n - j); dividing by z^n gives powers of z^-1
    for (std::size_t j = 0; j < poly.num.size(); ++j) sec[n - (poly.num.size() - 1 - j)] = poly.num[j];
    for (std::size_t j = 0; j <= n; ++j) sec[3 + j] = poly.den[j] / poly.den[0];
    for (std::size_t j = 0; j < 3; ++j) sec[j] /= poly.den[0];
    out.push_back(sec);
    p = q + 1;
  }
  return out;
}

}  // namespace benchid::loop
