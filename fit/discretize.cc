#include "fit/discretize.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <numbers>

#include "fit/detail/hold.h"
#include "ident/error.h"

namespace benchid::fit {

using benchid::fmt_num;
using benchid::InputError;
using Mat = Eigen::MatrixXd;
using Vec = Eigen::VectorXd;

Discretization parse_discretization(const std::string& s) {
  if (s == "zoh") return Discretization::zoh;
  if (s == "tustin") return Discretization::tustin;
  throw InputError("discretisation '" + s + "' is unknown; expected zoh or tustin");
}

namespace {

// pole-residue form of C (zI - A)^-1 B + D by eigen-decomposition (distinct poles)
RationalModel from_state_space(const Mat& a, const Vec& b, const Vec& c, double d) {
  if (a.rows() == 0) {  // a pure gain
    RationalModel g;
    g.domain = Domain::z;
    g.direct = d;
    return g;
  }
  Eigen::EigenSolver<Mat> es(a, true);
  const Eigen::MatrixXcd v = es.eigenvectors();
  const Eigen::MatrixXcd w = v.inverse();
  RationalModel m;
  m.domain = Domain::z;
  for (Eigen::Index i = 0; i < a.rows(); ++i) {
    const cplx lam = es.eigenvalues()(i);
    const cplx cv = c.cast<cplx>().dot(v.col(i).conjugate());  // c^T v (dot conjugates its left side)
    const cplx wb = w.row(i).dot(b.cast<cplx>().conjugate());
    m.poles.push_back(lam);
    m.residues.push_back(std::conj(cv) * std::conj(wb));
  }
  m.direct = d;
  return m;
}

// Real model from (pole, residue) lists that should hold conjugate pairs.
void tidy(RationalModel& m) {
  for (std::size_t i = 0; i < m.poles.size(); ++i) {
    if (std::fabs(m.poles[i].imag()) <= 1e-12 * std::max(1.0, std::abs(m.poles[i]))) {
      m.poles[i] = m.poles[i].real();
      m.residues[i] = m.residues[i].real();
    }
  }
}

}  // namespace

Discretized discretize(const RationalModel& m, const DiscretizeOptions& o) {
  if (m.domain != Domain::s) throw InputError("the model is already discrete (domain z)");
  if (!(o.sample_time_s > 0) || !std::isfinite(o.sample_time_s))
    throw InputError("sample time " + fmt_num(o.sample_time_s) + " s: expected a positive time");
  if (m.proportional != 0) throw InputError("an improper model (a term in s) has no discrete equivalent by this method");
  const double t = o.sample_time_s;
  Discretized out;
  if (o.method == Discretization::zoh) {
    if (m.integrators > 1)
      throw InputError("zoh of more than one integrator is not supported yet (repeated poles at z = 1)");
    const detail::EigenStateSpace ss = detail::to_eigen(m.state_space());
    const Eigen::Index n = ss.a.rows();
    const double samples = m.delay_s / t;
    const auto whole = static_cast<long>(std::floor(samples + 1e-9));
    const double frac = samples - static_cast<double>(whole);
    const bool extra = frac > 1e-9;
    const Eigen::Index nn = n + (extra ? 1 : 0);
    auto hold = [&](double tau) { return detail::hold(ss.a, ss.b, tau); };
    Mat ad = Mat::Zero(nn, nn);
    Vec bd = Vec::Zero(nn), cd = Vec::Zero(nn);
    double dd = ss.d;
    const auto [phi, gam] = hold(t);
    ad.topLeftCorner(n, n) = phi;
    cd.head(n) = ss.c;
    if (!extra) {
      bd.head(n) = gam;
    } else {
      // state [x; u(k-1)]: x+ = Ad x + B1 u + B2 u(k-1); y = C x + D u(k-1)
      const auto [e1, i1] = hold((1 - frac) * t);
      const auto [unused, i2] = hold(frac * t);
      (void)unused;
      bd.head(n) = i1;
      ad.block(0, n, n, 1) = e1 * i2;
      bd(n) = 1.0;
      cd(n) = ss.d;
      dd = 0.0;
    }
    out.model = from_state_space(ad, bd, cd, dd);
    out.model.delay_s = static_cast<double>(whole) * t;
  } else {
    double cst = 2.0 / t;
    if (o.prewarp_hz > 0) {
      const double wp = 2 * std::numbers::pi * o.prewarp_hz;
      if (!(wp * t / 2 < std::numbers::pi / 2)) throw InputError("prewarp " + fmt_num(o.prewarp_hz) + " Hz: expected below Nyquist");
      cst = wp / std::tan(wp * t / 2);
    }
    // the bilinear map on the state space (as scipy.signal.cont2discrete
    // 'bilinear', with dt = 2/c so that prewarping is the same map): no
    // polynomial and no product over the roots, exact at any order
    if (m.integrators > 1)
      throw InputError(
          "tustin of more than one integrator is not supported yet (repeated poles at z = 1)");
    const detail::EigenStateSpace ss = detail::to_eigen(m.state_space());
    const Eigen::Index n = ss.a.rows();
    const double h = 2.0 / cst;  // the step of the equivalent trapezoidal rule
    const Mat ima = Mat::Identity(n, n) - 0.5 * h * ss.a;
    const Eigen::PartialPivLU<Mat> lu(ima);
    const Mat ad = lu.solve(Mat::Identity(n, n) + 0.5 * h * ss.a);
    const Vec bd = lu.solve(h * ss.b);
    const Vec cd = lu.transpose().solve(ss.c);
    const double dd = ss.d + 0.5 * ss.c.dot(bd);
    RationalModel r = from_state_space(ad, bd, cd, dd);
    r.sample_time_s = t;
    const double samples = std::round(m.delay_s / t);
    out.delay_rounding_s = samples * t - m.delay_s;
    r.delay_s = samples * t;
    out.model = r;
  }
  out.model.sample_time_s = t;
  tidy(out.model);
  return out;
}

std::vector<Section> second_order_sections(const RationalModel& zm) {
  if (zm.domain != Domain::z) throw InputError("second-order sections need a z-domain model");
  const Zpk z = zm.zpk();
  std::vector<cplx> poles = z.poles, zeros = z.zeros;
  // poles nearest the unit circle last (scaled sections stay small)
  std::vector<std::vector<cplx>> pgroups;
  std::vector<bool> used(poles.size(), false);
  for (std::size_t i = 0; i < poles.size(); ++i) {
    if (used[i]) continue;
    used[i] = true;
    std::vector<cplx> g{poles[i]};
    if (poles[i].imag() != 0) {
      for (std::size_t j = 0; j < poles.size(); ++j)
        if (!used[j] && std::abs(poles[j] - std::conj(poles[i])) < 1e-9 * std::max(1.0, std::abs(poles[i]))) {
          used[j] = true;
          g.push_back(poles[j]);
          break;
        }
    }
    pgroups.push_back(g);
  }
  // two real poles share a section
  std::vector<std::vector<cplx>> sections_p;
  std::vector<cplx> lone;
  for (auto& g : pgroups) {
    if (g.size() == 2) sections_p.push_back(g);
    else lone.push_back(g[0]);
  }
  std::sort(lone.begin(), lone.end(), [](cplx a, cplx b) { return std::abs(a) < std::abs(b); });
  for (std::size_t i = 0; i < lone.size(); i += 2) {
    std::vector<cplx> g{lone[i]};
    if (i + 1 < lone.size()) g.push_back(lone[i + 1]);
    sections_p.push_back(g);
  }
  std::sort(sections_p.begin(), sections_p.end(),
            [](const auto& a, const auto& b) { return std::abs(a[0]) < std::abs(b[0]); });
  // zeros in groups that keep a real section: conjugate pairs, and reals
  std::vector<std::vector<cplx>> zpairs;
  std::vector<cplx> zreal;
  {
    std::vector<bool> zu(zeros.size(), false);
    for (std::size_t i = 0; i < zeros.size(); ++i) {
      if (zu[i]) continue;
      zu[i] = true;
      if (zeros[i].imag() == 0) {
        zreal.push_back(zeros[i]);
        continue;
      }
      std::size_t best = zeros.size();
      for (std::size_t j = 0; j < zeros.size(); ++j)
        if (!zu[j] && (best == zeros.size() || std::abs(zeros[j] - std::conj(zeros[i])) <
                                                   std::abs(zeros[best] - std::conj(zeros[i]))))
          best = j;
      if (best == zeros.size()) {  // no partner: keep it real (rounding-level imaginary part)
        zreal.push_back(zeros[i].real());
        continue;
      }
      zu[best] = true;
      zpairs.push_back({zeros[i], std::conj(zeros[i])});
    }
  }
  // Each section takes the zeros nearest its poles, the poles nearest the
  // unit circle first (they need the best-matched zeros); a section of two
  // poles takes a conjugate pair or two reals, a pair always when the pairs
  // left would otherwise outnumber the two-pole sections left.
  std::vector<std::vector<cplx>> section_zeros(sections_p.size());
  std::size_t two_left = 0;
  for (const auto& g : sections_p) two_left += g.size() == 2;
  for (std::size_t k = sections_p.size(); k-- > 0;) {
    const auto& g = sections_p[k];
    std::vector<cplx>& zs = section_zeros[k];
    auto nearest_real = [&]() -> std::size_t {
      std::size_t best = zreal.size();
      for (std::size_t j = 0; j < zreal.size(); ++j)
        if (best == zreal.size() || std::abs(zreal[j] - g[0]) < std::abs(zreal[best] - g[0]))
          best = j;
      return best;
    };
    if (g.size() == 2) {
      --two_left;
      std::size_t bp = zpairs.size();
      for (std::size_t j = 0; j < zpairs.size(); ++j)
        if (bp == zpairs.size() || std::abs(zpairs[j][0] - g[0]) < std::abs(zpairs[bp][0] - g[0]))
          bp = j;
      const std::size_t br = nearest_real();
      const bool must_pair = zpairs.size() > two_left;
      const bool pair_nearer =
          bp < zpairs.size() && (br == zreal.size() || zreal.size() < 2 ||
                                 std::abs(zpairs[bp][0] - g[0]) <= std::abs(zreal[br] - g[0]));
      if (bp < zpairs.size() && (must_pair || pair_nearer)) {
        zs = zpairs[bp];
        zpairs.erase(zpairs.begin() + static_cast<long>(bp));
        continue;
      }
    }
    while (zs.size() < g.size()) {
      const std::size_t br = nearest_real();
      if (br == zreal.size()) break;
      zs.push_back(zreal[br]);
      zreal.erase(zreal.begin() + static_cast<long>(br));
    }
  }
  std::vector<Section> out;
  for (std::size_t s = 0; s < sections_p.size(); ++s) {
    const auto& g = sections_p[s];
    const std::vector<cplx>& zs = section_zeros[s];
    std::vector<double> num = poly_from_roots(zs), den = poly_from_roots(g);
    // z^-1 form: divide both by z^(poles): fewer zeros than poles means a
    // numerator that starts later (padded on the left: a delay)...
    while (num.size() < den.size()) num.insert(num.begin(), 0.0);
    // ...and a first-order section is padded on the right
    while (num.size() < 3) num.push_back(0.0);
    while (den.size() < 3) den.push_back(0.0);
    if (s == 0)
      for (double& v : num) v *= z.gain;
    out.push_back({num[0], num[1], num[2], den[0], den[1], den[2]});
  }
  return out;
}

}  // namespace benchid::fit
