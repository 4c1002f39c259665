#include "fit/vector_fit.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>
#include <numbers>

#include "ident/error.h"

namespace benchid::fit {

using benchid::InputError;
using benchid::fmt_num;

Weighting parse_weighting(const std::string& s) {
  if (s == "variance") return Weighting::inverse_variance;
  if (s == "uniform") return Weighting::uniform;
  if (s == "relative") return Weighting::relative;
  throw InputError("weighting '" + s + "' is unknown; expected variance, uniform or relative");
}

const char* weighting_name(Weighting w) {
  switch (w) {
    case Weighting::inverse_variance: return "variance";
    case Weighting::uniform: return "uniform";
    case Weighting::relative: return "relative";
  }
  return "?";
}

void validate(const VectorFitOptions& o) {
  if (o.order < 1 || o.order > 200) throw InputError("order = " + std::to_string(o.order) + ": must be in [1, 200]");
  if (o.integrators < 0 || o.integrators > 4)
    throw InputError("integrators = " + std::to_string(o.integrators) + ": must be in [0, 4]");
  if (!(o.delay_s >= 0) || !std::isfinite(o.delay_s)) throw InputError("delay = " + fmt_num(o.delay_s) + " s: must be >= 0");
  if (o.max_iterations < 1) throw InputError("max_iterations must be at least 1");
  if (o.domain == Domain::z) {
    if (!(o.sample_time_s > 0) || !std::isfinite(o.sample_time_s))
      throw InputError("sample time = " + fmt_num(o.sample_time_s) + " s: a z-domain fit needs a positive sample time");
    if (o.improper) throw InputError("a z-domain model has no term in s; expected no --improper");
  }
  if (!o.start_poles.empty() && static_cast<int>(o.start_poles.size()) != o.order)
    throw InputError(std::to_string(o.start_poles.size()) + " starting poles for an order-" +
                     std::to_string(o.order) + " fit; expected as many as the order");
}

namespace {

using Mat = Eigen::MatrixXd;
using Vec = Eigen::VectorXd;

// Poles in a canonical order: real ones, then pairs as (a, conj a) with Im a > 0.
// Unstable ones reflected when asked: -conj p in s, 1/conj p in z.
std::vector<cplx> canonical(const std::vector<cplx>& in, bool reflect, int* reflected, Domain dom = Domain::s) {
  std::vector<cplx> real, upper;
  for (cplx p : in) {
    const double tol = 1e-12 * std::max(1.0, std::abs(p));
    if (reflect && dom == Domain::s && p.real() > 0) {
      p = cplx(-p.real(), p.imag());
      if (reflected) ++*reflected;
    }
    if (reflect && dom == Domain::z && std::abs(p) > 1) {
      p = 1.0 / std::conj(p);
      if (reflected) ++*reflected;
    }
    if (std::fabs(p.imag()) <= tol) real.push_back(p.real());
    else if (p.imag() > 0) upper.push_back(p);
  }
  std::sort(real.begin(), real.end(), [](cplx a, cplx b) { return a.real() < b.real(); });
  std::sort(upper.begin(), upper.end(), [](cplx a, cplx b) { return a.imag() < b.imag(); });
  std::vector<cplx> out(real);
  for (cplx p : upper) {
    out.push_back(p);
    out.push_back(std::conj(p));
  }
  return out;
}

// 1/z as conj(z)/|z|^2: the library's complex division guards against
// overflow at a cost that dominates here, and |s - p| is never extreme
inline cplx inv(cplx z) { return std::conj(z) / std::norm(z); }

// Real basis columns of the partial fractions at s: one per real pole, two
// per pair (phi1, phi2 of the header).
void basis(const std::vector<cplx>& poles, cplx s, std::vector<cplx>& phi) {
  phi.clear();
  for (std::size_t i = 0; i < poles.size(); ++i) {
    const cplx p = poles[i];
    if (p.imag() == 0) {
      phi.push_back(inv(s - p));
    } else {
      const cplx a = inv(s - p), b = inv(s - std::conj(p));
      phi.push_back(a + b);
      phi.push_back(cplx(0, 1) * a - cplx(0, 1) * b);
      ++i;  // skip the conjugate
    }
  }
}

// Solves min ||A x - y|| with columns scaled to unit length: by Householder
// QR, or, when `normal` (the relocation's large problem), by refined normal
// equations at a third of the cost, falling back to QR when they cannot give
// the answer to working accuracy.
// Storage kept across the iterations of one fit, so that the large
// least-squares matrix and the QR factorisation's copy of it are allocated
// once, not once per iteration (on a 5000-line order-60 fit each is 20 MB,
// and fresh pages cost more than the arithmetic).
struct Workspace {
  Mat a;
  Vec y;
  Eigen::HouseholderQR<Mat> qr;
  Eigen::ColPivHouseholderQR<Mat> pqr;
  bool pivoted = false;        // the unpivoted QR found the problem rank-deficient: the
                               // pivoted one from then on
  bool normal_failed = false;  // the normal equations could not give an exact answer in this
                               // fit: the QR from then on (a nearly rank-deficient problem
                               // stays so while the poles settle)
};

// Blocked Householder QR (no pivoting: the columns are scaled to unit length,
// so a tiny diagonal of R means a nearly dependent column); when R's diagonal
// spans more than 1e10, the rank-revealing pivoted QR decides instead.
// `pivoted`, when given, remembers a rank-deficient answer: the pivoted QR at
// once from then on.
Vec qr_solve(const Mat& a, const Vec& y, Eigen::HouseholderQR<Mat>* qr, bool* pivoted = nullptr,
             Eigen::ColPivHouseholderQR<Mat>* pqr = nullptr) {
  if (!pivoted || !*pivoted) {
    Eigen::HouseholderQR<Mat> local;
    Eigen::HouseholderQR<Mat>& q = qr ? *qr : local;
    q.compute(a);
    const auto d = q.matrixQR().diagonal().cwiseAbs();
    if (d.size() > 0 && d.minCoeff() > 1e-10 * d.maxCoeff()) {
      Vec x = q.solve(y);
      if (x.allFinite()) return x;
    }
    if (pivoted) *pivoted = true;
  }
  if (pqr) return pqr->compute(a).solve(y);
  return a.colPivHouseholderQr().solve(y);
}

// How solve_scaled may use the normal equations: not at all (QR), for a step
// (the poles are still far from their places: a relative error of 1e-4 in
// the answer does not matter), or to working accuracy.
enum class Normal { no, step, exact };

// (qr, pqr: storage kept across calls; residual: ||A x - y||; normal_failed,
// pivoted: see Workspace)
Vec solve_scaled(Mat& a, const Vec& y, Normal normal = Normal::no,
                 Eigen::HouseholderQR<Mat>* qr = nullptr, double* residual = nullptr,
                 bool* normal_failed = nullptr, bool* pivoted = nullptr,
                 Eigen::ColPivHouseholderQR<Mat>* pqr = nullptr) {
  if (normal != Normal::no) {
    // semi-normal equations with a step of refinement (Bjorck 1987), the
    // column scaling done on the Gram matrix: a third of a QR's cost. The
    // correction measures the error of the first solution (about cond^2
    // eps); when it is below 1e-6 of x, the refined one is accurate to about
    // its square, else (for an exact answer) the QR decides. A column within
    // 1e-5 of the span of the others (a diagonal of the scaled Cholesky
    // factor below 1e-5: cond(A) >= 1e5, the problem nearly rank-deficient,
    // as when poles cancel zeros) goes to the QR at once, whose pivoting
    // gives the basic solution.
    Mat g = Mat::Zero(a.cols(), a.cols());
    g.selfadjointView<Eigen::Lower>().rankUpdate(a.transpose());
    Vec d(a.cols());
    for (Eigen::Index j = 0; j < a.cols(); ++j) d(j) = g(j, j) > 0 ? 1.0 / std::sqrt(g(j, j)) : 1.0;
    g = g.selfadjointView<Eigen::Lower>();  // both triangles
    g = d.asDiagonal() * g * d.asDiagonal();
    Eigen::LLT<Mat> llt(g);
    const auto ld = llt.matrixLLT().diagonal().cwiseAbs();
    if (llt.info() == Eigen::Success && ld.minCoeff() >= 1e-5 * ld.maxCoeff()) {
      Vec x = d.cwiseProduct(llt.solve(d.cwiseProduct(a.transpose() * y)));
      Vec r = y - a * x;
      const Vec dx = d.cwiseProduct(llt.solve(d.cwiseProduct(a.transpose() * r)));
      x += dx;
      if (x.allFinite() && (normal == Normal::step || dx.norm() <= 1e-6 * x.norm())) {
        if (residual) *residual = (y - a * x).norm();
        return x;
      }
    }
    if (normal_failed && normal == Normal::exact) *normal_failed = true;
  }
  Vec scale(a.cols());
  for (Eigen::Index j = 0; j < a.cols(); ++j) {
    const double n = a.col(j).norm();
    scale(j) = n > 0 ? 1.0 / n : 1.0;
    a.col(j) *= scale(j);
  }
  const Vec x = qr_solve(a, y, qr, pivoted, pqr);
  if (residual) *residual = (a * x - y).norm();
  Vec unscaled = x.cwiseProduct(scale);
  for (Eigen::Index j = 0; j < a.cols(); ++j) a.col(j) /= scale(j);
  return unscaled;
}

struct Prepared {
  std::vector<cplx> s, g;   // the variable (s = j w, or z = e^{j w T}) and the response
                            // with integrators and delay removed
  std::vector<double> w;    // weights for g
  std::vector<double> omega;  // rad/s
};

Prepared prepare(const FitData& d, const VectorFitOptions& o) {
  Prepared p;
  for (std::size_t k = 0; k < d.freq_hz.size(); ++k) {
    const double om = 2 * std::numbers::pi * d.freq_hz[k];
    const cplx x = o.domain == Domain::s ? cplx(0, om) : std::polar(1.0, om * o.sample_time_s);
    cplx g = d.h[k] * std::polar(1.0, om * o.delay_s);
    double w = d.weight[k];
    const cplx q = o.domain == Domain::s ? x : x - 1.0;
    for (int i = 0; i < o.integrators; ++i) {
      g *= q;
      w /= std::abs(q);
    }
    p.s.push_back(x);
    p.g.push_back(g);
    p.w.push_back(w);
    p.omega.push_back(om);
  }
  return p;
}

// Linear fit of sum c phi + d + h s to g with fixed poles; returns residues etc.
void fit_residues(const Prepared& p, const std::vector<cplx>& poles, const VectorFitOptions& o, RationalModel& m) {
  std::vector<cplx> phi;
  basis(poles, p.s[0], phi);
  const auto n = static_cast<Eigen::Index>(phi.size());
  const Eigen::Index cols = n + (o.proper ? 1 : 0) + (o.improper ? 1 : 0);
  const auto rows = static_cast<Eigen::Index>(2 * p.s.size());
  Mat a(rows, cols);
  Vec y(rows);
  for (std::size_t k = 0; k < p.s.size(); ++k) {
    basis(poles, p.s[k], phi);
    const auto r = static_cast<Eigen::Index>(2 * k);
    Eigen::Index c = 0;
    for (const cplx& v : phi) {
      a(r, c) = p.w[k] * v.real();
      a(r + 1, c) = p.w[k] * v.imag();
      ++c;
    }
    if (o.proper) a(r, c) = p.w[k], a(r + 1, c) = 0, ++c;
    if (o.improper) a(r, c) = 0.0, a(r + 1, c) = p.w[k] * p.s[k].imag(), ++c;  // h s, s = j w
    y(r) = p.w[k] * p.g[k].real();
    y(r + 1) = p.w[k] * p.g[k].imag();
  }
  const Vec x = solve_scaled(a, y, Normal::exact);
  m.poles = poles;
  m.residues.assign(poles.size(), 0.0);
  Eigen::Index c = 0;
  for (std::size_t i = 0; i < poles.size(); ++i) {
    if (poles[i].imag() == 0) {
      m.residues[i] = x(c++);
    } else {
      m.residues[i] = cplx(x(c), x(c + 1));
      m.residues[i + 1] = cplx(x(c), -x(c + 1));
      c += 2;
      ++i;
    }
  }
  m.direct = o.proper ? x(c++) : 0.0;
  m.proportional = o.improper ? x(c++) : 0.0;
}

// One pole relocation; returns the new poles.
std::vector<cplx> relocate(const Prepared& p, const std::vector<cplx>& poles, const VectorFitOptions& o, int* reflected,
                           double* residual, bool rough, Workspace& ws) {
  std::vector<cplx> phi;
  basis(poles, p.s[0], phi);
  const auto n = static_cast<Eigen::Index>(phi.size());
  const Eigen::Index num_cols = n + (o.proper ? 1 : 0) + (o.improper ? 1 : 0);
  const Eigen::Index cols = num_cols + n + 1;  // + sigma's c~ and d~
  const auto lines = p.s.size();
  const auto rows = static_cast<Eigen::Index>(2 * lines + 1);
  Mat& a = ws.a;
  a.setZero(rows, cols);  // no new storage when the size is unchanged
  Vec& y = ws.y;
  y.setZero(rows);
  double wg = 0;
  for (std::size_t k = 0; k < lines; ++k) wg += std::norm(p.w[k] * p.g[k]);
  const double relax_w = std::sqrt(wg) / static_cast<double>(lines);
  for (std::size_t k = 0; k < lines; ++k) {
    basis(poles, p.s[k], phi);
    const auto r = static_cast<Eigen::Index>(2 * k);
    const double w = p.w[k];
    Eigen::Index c = 0;
    for (const cplx& v : phi) {
      a(r, c) = w * v.real();
      a(r + 1, c) = w * v.imag();
      ++c;
    }
    if (o.proper) a(r, c) = w, ++c;
    if (o.improper) a(r + 1, c) = w * p.s[k].imag(), ++c;
    for (const cplx& v : phi) {
      const cplx t = -p.g[k] * v;
      a(r, c) = w * t.real();
      a(r + 1, c) = w * t.imag();
      ++c;
    }
    a(r, c) = -w * p.g[k].real();
    a(r + 1, c) = -w * p.g[k].imag();
    // relaxation row: Re sum_k sigma(s_k) = K
    Eigen::Index cs = num_cols;
    for (const cplx& v : phi) a(rows - 1, cs++) += relax_w * v.real();
    a(rows - 1, cs) += relax_w;
  }
  y(rows - 1) = relax_w * static_cast<double>(lines);
  Vec x = solve_scaled(a, y,
                       ws.normal_failed ? Normal::no
                       : rough          ? Normal::step
                                        : Normal::exact,
                       &ws.qr, residual, &ws.normal_failed, &ws.pivoted, &ws.pqr);
  Vec ct = x.segment(num_cols, n);
  double dt = x(cols - 1);
  if (std::fabs(dt) < 1e-8) {
    // sigma's constant came out ~0: fall back to the non-relaxed problem
    // with d~ = 1 (Gustavsen 2006 recommends this safeguard)
    Mat a2 = a.topLeftCorner(rows - 1, cols - 1);
    Vec y2(rows - 1);
    for (std::size_t k = 0; k < lines; ++k) {
      y2(static_cast<Eigen::Index>(2 * k)) = p.w[k] * p.g[k].real();
      y2(static_cast<Eigen::Index>(2 * k + 1)) = p.w[k] * p.g[k].imag();
    }
    const Vec x2 = solve_scaled(a2, y2);
    ct = x2.segment(num_cols, n);
    dt = 1.0;
  }
  // zeros of sigma: eig(A - b c~^T / d~), real block form
  Mat am = Mat::Zero(n, n);
  Vec b = Vec::Zero(n);
  Eigen::Index c = 0;
  for (std::size_t i = 0; i < poles.size(); ++i) {
    const cplx q = poles[i];
    if (q.imag() == 0) {
      am(c, c) = q.real();
      b(c) = 1;
      ++c;
    } else {
      am(c, c) = q.real(), am(c, c + 1) = q.imag();
      am(c + 1, c) = -q.imag(), am(c + 1, c + 1) = q.real();
      b(c) = 2;
      c += 2;
      ++i;
    }
  }
  const Mat h = am - b * ct.transpose() / dt;
  Eigen::EigenSolver<Mat> es(h, false);
  std::vector<cplx> z;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) z.push_back(es.eigenvalues()(i));
  return canonical(z, !o.allow_unstable, reflected, o.domain);
}

std::vector<cplx> starting_poles(int order, double w_lo, double w_hi) {
  // pairs -b/100 +- j b, b log-spaced over the band; a real pole at the
  // band's geometric middle when the order is odd (Gustavsen & Semlyen 1999)
  std::vector<cplx> p;
  const int pairs = order / 2;
  if (order % 2) p.emplace_back(-std::sqrt(w_lo * w_hi));
  for (int i = 0; i < pairs; ++i) {
    const double t = pairs == 1 ? 0.5 : static_cast<double>(i) / (pairs - 1);
    const double b = w_lo * std::pow(w_hi / w_lo, t);
    p.emplace_back(-b / 100, b);
    p.emplace_back(-b / 100, -b);
  }
  return canonical(p, false, nullptr);
}

}  // namespace

void score(FitResult& r, const FitData& d) {
  double e2 = 0, h2 = 0;
  r.chi2 = 0;
  r.max_err_db = r.max_err_deg = 0;
  for (std::size_t k = 0; k < d.freq_hz.size(); ++k) {
    const cplx m = r.model.response(d.freq_hz[k]);
    const cplx e = m - d.h[k];
    e2 += std::norm(e);
    h2 += std::norm(d.h[k]);
    r.chi2 += d.weight[k] * d.weight[k] * std::norm(e);
    const double db = std::fabs(20 * std::log10(std::abs(m) / std::abs(d.h[k])));
    const double deg = std::fabs(std::arg(m / d.h[k])) * 180 / std::numbers::pi;
    if (db > r.max_err_db) r.max_err_db = db, r.max_err_db_hz = d.freq_hz[k];
    if (deg > r.max_err_deg) r.max_err_deg = deg, r.max_err_deg_hz = d.freq_hz[k];
  }
  r.nrmse = h2 > 0 ? std::sqrt(e2 / h2) : 0;
  const int params = 2 * static_cast<int>(r.model.poles.size()) + (r.model.direct != 0 ? 1 : 0) +
                     (r.model.proportional != 0 ? 1 : 0);
  r.dof = 2 * static_cast<int>(d.freq_hz.size()) - params;
}

FitResult vector_fit(const FitData& d, const VectorFitOptions& o) {
  validate(o);
  const std::size_t lines = d.freq_hz.size();
  // at least one line (two real equations) per real parameter: poles and
  // residues, plus d and h
  const std::size_t params = 2 * static_cast<std::size_t>(o.order) + (o.proper ? 1 : 0) + (o.improper ? 1 : 0);
  if (lines == 0) throw InputError("no lines to fit; expected an FRF with lines in the band");
  if (lines < params)
    throw InputError(std::to_string(lines) + " lines cannot carry an order-" + std::to_string(o.order) +
                     " fit (" + std::to_string(params) + " real parameters); expected at least one line per "
                     "parameter, or a lower --order");
  const Prepared p = prepare(d, o);
  // starting poles span the band's positive lines (a DC line, omega = 0, is fitted like any other)
  const auto first_ac = std::find_if(p.omega.begin(), p.omega.end(), [](double w) { return w > 0; });
  if (first_ac == p.omega.end()) throw InputError("only a DC line to fit; expected lines above 0 Hz");
  const double w_lo = *first_ac, w_hi = p.omega.back();
  if (o.domain == Domain::z && w_hi * o.sample_time_s >= std::numbers::pi * (1 + 1e-9))
    throw InputError("lines above Nyquist of the sample time " + fmt_num(o.sample_time_s) +
                     " s; expected a band below " + fmt_num(0.5 / o.sample_time_s) + " Hz");
  std::vector<cplx> poles = starting_poles(o.order, w_lo, w_hi);
  if (!o.start_poles.empty()) {
    poles = canonical(o.start_poles, false, nullptr, o.domain);
    if (poles.size() != o.start_poles.size())
      throw InputError("the starting poles are not closed under conjugation");
  } else if (o.domain == Domain::z) {
    for (cplx& q : poles) q = std::exp(q * o.sample_time_s);
    poles = canonical(poles, false, nullptr, Domain::z);
  }
  FitResult r;
  auto ws = std::make_unique<Workspace>();
  int reflected = 0, still = 0;
  double last_res = -1, last_move = 1.0;
  // the best iterate by the relocation residual, and when it was reached:
  // poles that cycle at the noise level instead of settling are judged by
  // it (converged when the residual has stopped improving), not failed
  std::vector<cplx> best_poles = poles;
  double best_res = std::numeric_limits<double>::infinity();
  int best_reflected = 0, stall_at = 0;
  double stall_res = std::numeric_limits<double>::infinity();
  for (int it = 0; it < o.max_iterations; ++it) {
    int refl_now = 0;
    double res = 0;
    std::vector<cplx> next = relocate(p, poles, o, &refl_now, &res, last_move > 1e-2, *ws);
    double move = 0;
    if (next.size() == poles.size()) {
      for (std::size_t i = 0; i < next.size(); ++i)
        move = std::max(move, std::abs(next[i] - poles[i]) / std::max(std::abs(poles[i]), 1e-300));
    } else {
      move = 1.0;  // a pair became two real poles or back
    }
    if (res < best_res) best_res = res, best_poles = next, best_reflected = refl_now;
    poles = next;
    last_move = move;
    reflected = refl_now;
    r.iterations = it + 1;
    if (move < o.tolerance) {
      r.converged = true;
      break;
    }
    // With noisy data the poles keep jittering at the noise level: once they
    // move by less than 1e-3, a weighted residual of the relocation problem
    // that no longer changes (1e-7 relative, three iterations running)
    // counts as converged too.
    still = move < 1e-3 && last_res >= 0 &&
                    std::fabs(res - last_res) <= 100 * o.tolerance * std::max(res, 1e-300)
                ? still + 1
                : 0;
    last_res = res;
    if (still >= 3) {
      r.converged = true;
      break;
    }
    // cycling: 15 iterations (10 when stopping when stalled) in which the
    // residual did not fall 0.1 % below its best (steady progress is not
    // cycling), the poles moving less than 5 %: the best iterate; stalled
    // with the poles still moving: not converged, and the fit ends when
    // asked to
    if (res < stall_res * (1 - 1e-3)) stall_res = res, stall_at = it;
    if (it - stall_at >= (o.stop_when_stalled ? 10 : 15)) {
      if (move < 0.05) {
        r.converged = true;
        r.cycled = true;
        break;
      }
      if (o.stop_when_stalled) break;
    }
  }
  ws.reset();  // freed before the residue fit allocates its own matrix
  auto finish = [&](const std::vector<cplx>& ps, int refl, FitResult& out) {
    fit_residues(p, ps, o, out.model);
    out.model.integrators = o.integrators;
    out.model.delay_s = o.delay_s;
    out.model.domain = o.domain;
    out.model.sample_time_s = o.domain == Domain::z ? o.sample_time_s : 0.0;
    out.model.reflected = refl;
    score(out, d);
  };
  finish(poles, reflected, r);
  if (r.cycled &&
      best_poles != poles) {  // the better of the last and the best iterate, by the fit itself
    FitResult b = r;
    finish(best_poles, best_reflected, b);
    if (b.chi2 < r.chi2) r = std::move(b);
  }
  return r;
}

FitResult sk_fit(const FitData& d, const VectorFitOptions& o) {
  validate(o);
  if (o.domain != Domain::s || o.integrators != 0 || o.improper)
    throw InputError("the polynomial method fits s-domain models without integrators or a term in s; use vector fitting");
  const std::size_t lines = d.freq_hz.size();
  const auto n = static_cast<Eigen::Index>(o.order);
  const Eigen::Index nnum = o.proper ? n + 1 : n;  // numerator coefficients
  if (lines < static_cast<std::size_t>(nnum + n)) throw InputError(std::to_string(lines) + " lines cannot carry an order-" + std::to_string(o.order) + " polynomial fit");
  const Prepared p = prepare(d, o);
  const double w0 = p.omega.back();  // s' = s / w0
  std::vector<double> dprev(lines, 1.0);
  Vec coef;
  std::vector<cplx> poles;
  FitResult r;
  for (int it = 0; it < o.max_iterations; ++it) {
    Mat a(static_cast<Eigen::Index>(2 * lines), nnum + n);
    Vec y(static_cast<Eigen::Index>(2 * lines));
    for (std::size_t k = 0; k < lines; ++k) {
      const cplx s = p.s[k] / w0;
      const double w = p.w[k] / dprev[k];
      const auto row = static_cast<Eigen::Index>(2 * k);
      cplx sp = 1.0;
      for (Eigen::Index i = 0; i < std::max(nnum, n); ++i) {
        if (i < nnum) a(row, i) = w * sp.real(), a(row + 1, i) = w * sp.imag();
        if (i < n) {
          const cplx t = -p.g[k] * sp;
          a(row, nnum + i) = w * t.real(), a(row + 1, nnum + i) = w * t.imag();
        }
        sp *= s;
      }
      // monic D: the s^n term moves to the right-hand side
      cplx sn = 1.0;
      for (Eigen::Index i = 0; i < n; ++i) sn *= s;
      const cplx rhs = p.g[k] * sn;
      y(row) = w * rhs.real();
      y(row + 1) = w * rhs.imag();
    }
    coef = solve_scaled(a, y);
    std::vector<double> den(static_cast<std::size_t>(n) + 1);  // descending, in s'
    den[0] = 1.0;
    for (Eigen::Index i = 0; i < n; ++i) den[static_cast<std::size_t>(n - i)] = coef(nnum + i);
    std::vector<cplx> roots = polynomial_roots(den);
    for (cplx& q : roots) q *= w0;
    int refl = 0;
    const std::vector<cplx> next = canonical(roots, !o.allow_unstable, &refl);
    r.model.reflected = refl;
    double move = next.size() == poles.size() ? 0.0 : 1.0;
    if (next.size() == poles.size())
      for (std::size_t i = 0; i < next.size(); ++i) move = std::max(move, std::abs(next[i] - poles[i]) / std::abs(next[i]));
    poles = next;
    r.iterations = it + 1;
    for (std::size_t k = 0; k < lines; ++k) {
      cplx dv = 1.0;
      for (const cplx& q : poles) dv *= (p.s[k] - q) / w0;
      dprev[k] = std::max(std::abs(dv), 1e-300);
    }
    if (move < std::max(o.tolerance, 1e-10)) {
      r.converged = true;
      break;
    }
  }
  const int refl = r.model.reflected;
  fit_residues(p, poles, o, r.model);
  r.model.reflected = refl;
  r.model.delay_s = o.delay_s;
  score(r, d);
  return r;
}

}  // namespace benchid::fit
