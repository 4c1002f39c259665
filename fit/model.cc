#include "fit/model.h"

#include <Eigen/Dense>
#include <cmath>
#include <limits>
#include <numbers>

#include "ident/error.h"

namespace benchid::fit {

cplx RationalModel::rational(cplx x) const {
  cplx v = direct + proportional * x;
  // r/(x - p) as r conj(x - p)/|x - p|^2: the library's guarded complex
  // division costs several times more, and loop analysis evaluates this
  // millions of times
  for (std::size_t i = 0; i < poles.size(); ++i) {
    const cplx d = x - poles[i];
    v += residues[i] * std::conj(d) / std::norm(d);
  }
  for (int k = 0; k < integrators; ++k) v /= domain == Domain::s ? x : x - 1.0;
  return v;
}

cplx RationalModel::response(double freq_hz) const {
  const double w = 2 * std::numbers::pi * freq_hz;
  if (domain == Domain::s) return rational(cplx(0, w)) * std::polar(1.0, -w * delay_s);
  return rational(std::polar(1.0, w * sample_time_s)) * std::polar(1.0, -w * delay_s);
}

std::vector<cplx> polynomial_roots(const std::vector<double>& coef_in) {
  std::vector<double> coef = coef_in;
  while (!coef.empty() && coef.front() == 0.0) coef.erase(coef.begin());
  std::vector<cplx> roots;
  while (coef.size() > 1 && coef.back() == 0.0) {  // roots at the origin
    roots.emplace_back(0.0);
    coef.pop_back();
  }
  const std::size_t n = coef.size() - 1;
  if (coef.empty() || n == 0) return roots;
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(n));
  for (std::size_t j = 0; j < n; ++j) c(0, static_cast<Eigen::Index>(j)) = -coef[j + 1] / coef[0];
  for (std::size_t i = 1; i < n; ++i) c(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(i - 1)) = 1.0;
  Eigen::EigenSolver<Eigen::MatrixXd> es(c, false);
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) roots.push_back(es.eigenvalues()(i));
  return roots;
}

std::vector<double> poly_from_roots(const std::vector<cplx>& roots) {
  std::vector<cplx> p{1.0};
  for (const cplx& r : roots) {
    std::vector<cplx> q(p.size() + 1, 0.0);
    for (std::size_t i = 0; i < p.size(); ++i) {
      q[i] += p[i];
      q[i + 1] -= r * p[i];
    }
    p = q;
  }
  std::vector<double> out(p.size());
  for (std::size_t i = 0; i < p.size(); ++i) out[i] = p[i].real();
  return out;
}

namespace {
// a (descending) + b (descending), aligned at the constant term
std::vector<double> add(std::vector<double> a, const std::vector<double>& b) {
  if (b.size() > a.size()) a.insert(a.begin(), b.size() - a.size(), 0.0);
  for (std::size_t i = 0; i < b.size(); ++i) a[a.size() - b.size() + i] += b[i];
  return a;
}
std::vector<double> mul(const std::vector<double>& a, const std::vector<double>& b) {
  std::vector<double> r(a.size() + b.size() - 1, 0.0);
  for (std::size_t i = 0; i < a.size(); ++i)
    for (std::size_t j = 0; j < b.size(); ++j) r[i + j] += a[i] * b[j];
  return r;
}
}  // namespace

Polynomial RationalModel::polynomial() const {
  // den = prod (x - p_i) * x^K; num = sum over poles (and pairs, kept real)
  // of r/(x - p) * den + (d + h x) * den
  Polynomial p;
  std::vector<double> den = poly_from_roots(poles);
  std::vector<double> num = mul(den, {proportional, direct});
  std::vector<bool> used(poles.size(), false);
  for (std::size_t i = 0; i < poles.size(); ++i) {
    if (used[i]) continue;
    used[i] = true;
    std::size_t partner = poles.size();  // the conjugate of a complex pole
    if (poles[i].imag() != 0)
      for (std::size_t j = 0; j < poles.size(); ++j)
        if (!used[j] && poles[j] == std::conj(poles[i])) {
          partner = j;
          used[j] = true;
          break;
        }
    std::vector<cplx> others;
    for (std::size_t j = 0; j < poles.size(); ++j)
      if (j != i && j != partner) others.push_back(poles[j]);
    if (partner == poles.size()) {
      num = add(num, mul(poly_from_roots(others), {residues[i].real()}));
    } else {
      // r/(x - p) + r*/(x - p*) = (2 Re(r) x - 2 Re(r p*)) / ((x - p)(x - p*))
      const std::vector<double> pair{2 * residues[i].real(), -2 * (residues[i] * std::conj(poles[i])).real()};
      num = add(num, mul(poly_from_roots(others), pair));
    }
  }
  // Leading coefficients that are rounding left over from the expansion (a
  // strictly proper model's s^n terms cancel to ~1e-16 of the others) would
  // become spurious far-away zeros: a term is dropped when, at ten times the
  // largest pole magnitude, it is below 1e-10 of the largest term.
  double scale = 1.0;
  for (const cplx& q : poles) scale = std::max(scale, 10 * std::abs(q));
  auto term = [&](std::size_t i) { return std::fabs(num[i]) * std::pow(scale, static_cast<double>(num.size() - 1 - i)); };
  double biggest = 0;
  for (std::size_t i = 0; i < num.size(); ++i) biggest = std::max(biggest, term(i));
  while (num.size() > 1 && term(0) <= 1e-10 * biggest) num.erase(num.begin());
  for (int k = 0; k < integrators; ++k) den = mul(den, domain == Domain::s ? std::vector<double>{1.0, 0.0} : std::vector<double>{1.0, -1.0});
  p.num = num;
  p.den = den;
  return p;
}

namespace {

// log(x - r) summed over roots, for gains of high-order products without overflow
cplx log_prod(cplx x, const std::vector<cplx>& roots) {
  cplx acc = 0;
  for (const cplx& r : roots) acc += std::log(x - r);
  return acc;
}

}  // namespace

std::vector<cplx> RationalModel::transmission_zeros() const {
  if (proportional !=
      0) {  // improper: H = (h s^2 + ...)/...; the polynomial form (rare, low order)
    const Polynomial p = polynomial();
    return polynomial_roots(p.num);
  }
  const StateSpace ss = state_space();
  const auto n = static_cast<Eigen::Index>(ss.a.size());
  if (n == 0) return {};
  // Frequency scaling: s = w0 sigma with w0 the largest pole magnitude, so
  // that A' = A/w0 has norm about 1 and C' = C/w0; then the output row and
  // the input column are scaled to unit norm (neither changes the zeros).
  double w0 = 0;
  if (domain == Domain::s)
    for (const cplx& p : poles) w0 = std::max(w0, std::abs(p));
  if (!(w0 > 0)) w0 = 1.0;
  Eigen::MatrixXd m = Eigen::MatrixXd::Zero(n + 1, n + 1), e = Eigen::MatrixXd::Zero(n + 1, n + 1);
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < n; ++j)
      m(i, j) = ss.a[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)] / w0;
    m(i, n) = ss.b[static_cast<std::size_t>(i)];
    m(n, i) = ss.c[static_cast<std::size_t>(i)] / w0;
    e(i, i) = 1.0;
  }
  m(n, n) = ss.d;
  const double row = m.row(n).norm(), col = m.col(n).head(n).norm();
  if (!(row > 0)) return {};  // H = 0
  m.row(n) /= row;
  if (col > 0) m.col(n) /= col, e.col(n) /= col;  // e's last column is zero: unchanged
  // zeros of C (sI - A)^-1 B + D: the finite generalised eigenvalues of the
  // pencil [A B; C D] - sigma [I 0; 0 0] (Emami-Naeini & Van Dooren 1982)
  Eigen::GeneralizedEigenSolver<Eigen::MatrixXd> ges;
  ges.compute(m, e, false);
  if (ges.info() != Eigen::Success) {
    const Polynomial p = polynomial();  // the QZ iteration did not converge: the older route
    return polynomial_roots(p.num);
  }
  std::vector<cplx> z;
  const auto alphas = ges.alphas();
  const auto betas = ges.betas();
  for (Eigen::Index i = 0; i < alphas.size(); ++i) {
    const cplx a = alphas(i);
    const double b = betas(i);
    // infinite eigenvalues (the relative degree, plus one) come back with
    // beta at rounding level; a finite zero beyond 1e12 of the largest pole
    // is none that a measured band could show
    if (!(std::fabs(b) > 1e-12 * std::abs(a))) continue;
    z.push_back(a / b * w0);
  }
  // the real QZ gives complex pairs as exact conjugates (2x2 blocks); a
  // near-real one at rounding level is real
  for (cplx& q : z)
    if (std::fabs(q.imag()) <= 1e-12 * std::abs(q)) q = q.real();
  for (std::size_t i = 0; i + 1 < z.size();
       ++i)  // each pair upper member first, as the poles are listed
    if (z[i].imag() < 0 && z[i + 1] == std::conj(z[i])) std::swap(z[i], z[i + 1]), ++i;
  return z;
}

Zpk RationalModel::zpk() const {
  Zpk z;
  z.zeros = transmission_zeros();
  z.poles = poles;
  for (int k = 0; k < integrators; ++k) z.poles.emplace_back(domain == Domain::s ? 0.0 : 1.0);
  // k from H at a point away from every pole and zero, in logarithms (a
  // 40-pole product in rad/s overflows nothing this way): k = H(x) prod(x -
  // p)/prod(x - z). The point is on a circle of the poles' scale, at the
  // angle (of a few) farthest from every root.
  double scale = 0;
  for (const cplx& p : z.poles) scale = std::max(scale, std::abs(p));
  for (const cplx& q : z.zeros)
    scale = std::max(scale, std::min(std::abs(q), 1e3 * std::max(scale, 1.0)));
  if (domain == Domain::z) scale = 1.0;  // the unit circle is where z models live
  if (!(scale > 0)) scale = 1.0;
  cplx best = 0;
  double best_gap = -1;
  for (int i = 0; i < 12; ++i) {
    const cplx x = std::polar(1.3 * scale, std::numbers::pi * (0.5 + 0.45 * i / 11.0) + 0.01);
    double gap = std::numeric_limits<double>::infinity();
    for (const cplx& r : z.poles) gap = std::min(gap, std::abs(x - r));
    for (const cplx& r : z.zeros) gap = std::min(gap, std::abs(x - r));
    if (gap > best_gap) best_gap = gap, best = x;
  }
  const cplx hx = rational(best);
  if (std::abs(hx) == 0 || !std::isfinite(std::abs(hx))) {
    z.gain = 0;
    return z;
  }
  const cplx lk = std::log(hx) + log_prod(best, z.poles) - log_prod(best, z.zeros);
  const double mag = std::exp(lk.real());
  z.gain = std::cos(lk.imag()) >= 0 ? mag : -mag;  // k is real: its sign from the phase
  return z;
}

StateSpace RationalModel::state_space() const {
  StateSpace ss;
  std::vector<std::size_t> idx;  // real poles and upper members of pairs
  for (std::size_t i = 0; i < poles.size(); ++i)
    if (poles[i].imag() >= 0) idx.push_back(i);
  std::size_t n = 0;
  for (std::size_t i : idx) n += poles[i].imag() > 0 ? 2 : 1;
  const std::size_t nk = static_cast<std::size_t>(integrators);
  const std::size_t total = n + nk;
  ss.a.assign(total, std::vector<double>(total, 0.0));
  ss.b.assign(total, 0.0);
  ss.c.assign(total, 0.0);
  // modal blocks of the rational part sum_i r_i/(x - p_i) + d, feeding the
  // integrator chain when K > 0 (then the chain's last state is the output)
  std::size_t k = 0;
  for (std::size_t i : idx) {
    const cplx p = poles[i], r = residues[i];
    if (p.imag() == 0) {
      ss.a[k][k] = p.real();
      ss.b[k] = 1.0;
      ss.c[k] = r.real();
      ++k;
    } else {
      // A = [[a, b], [-b, a]], B = [2, 0], C = [Re r, Im r] (see vector_fit.cc)
      ss.a[k][k] = p.real(), ss.a[k][k + 1] = p.imag();
      ss.a[k + 1][k] = -p.imag(), ss.a[k + 1][k + 1] = p.real();
      ss.b[k] = 2.0;
      ss.c[k] = r.real(), ss.c[k + 1] = r.imag();
      k += 2;
    }
  }
  ss.d = direct;
  if (nk > 0) {
    // z1' = C x + d u, z2' = z1, ..., y = z_K
    for (std::size_t j = 0; j < n; ++j) ss.a[n][j] = ss.c[j];
    ss.b[n] = direct;
    for (std::size_t j = 1; j < nk; ++j) ss.a[n + j][n + j - 1] = 1.0;
    std::fill(ss.c.begin(), ss.c.end(), 0.0);
    ss.c[total - 1] = 1.0;
    ss.d = 0.0;
  }
  return ss;
}

double RationalModel::dc_gain() const {
  if (integrators > 0) return std::numeric_limits<double>::quiet_NaN();
  return rational(domain == Domain::s ? cplx(0.0) : cplx(1.0)).real();
}

RationalModel from_zpk(const Zpk& z, Domain domain, double sample_time_s) {
  if (z.zeros.size() > z.poles.size())
    throw benchid::InputError(std::to_string(z.zeros.size()) + " zeros but " + std::to_string(z.poles.size()) +
                              " poles: an improper transfer function has no pole-residue form here");
  for (std::size_t i = 0; i < z.poles.size(); ++i)
    for (std::size_t j = i + 1; j < z.poles.size(); ++j)
      if (std::abs(z.poles[i] - z.poles[j]) <= 1e-12 * std::max(1.0, std::abs(z.poles[i])))
        throw benchid::InputError("repeated pole at " + benchid::fmt_num(z.poles[i].real()) + (z.poles[i].imag() != 0 ? "+" + benchid::fmt_num(z.poles[i].imag()) + "j" : "") +
                                  ": the pole-residue form needs distinct poles");
  RationalModel m;
  m.domain = domain;
  m.sample_time_s = sample_time_s;
  for (std::size_t i = 0; i < z.poles.size(); ++i) {
    cplx v = z.gain;
    for (const cplx& q : z.zeros) v *= z.poles[i] - q;
    for (std::size_t j = 0; j < z.poles.size(); ++j)
      if (j != i) v /= z.poles[i] - z.poles[j];
    m.poles.push_back(z.poles[i]);
    m.residues.push_back(z.poles[i].imag() == 0 ? cplx(v.real()) : v);
  }
  m.direct = z.zeros.size() == z.poles.size() ? z.gain : 0.0;
  return m;
}

Mode mode_of(cplx p) {
  Mode m;
  const double wn = std::abs(p);
  m.freq_hz = wn / (2 * std::numbers::pi);
  m.damping = wn > 0 ? -p.real() / wn : 1.0;
  m.real = p.imag() == 0;
  return m;
}

}  // namespace benchid::fit
