#include "loop/stability.h"

#include <Eigen/Dense>

#include "fit/detail/hold.h"

#include <cmath>
#include <numbers>
#include <sstream>

namespace benchid::loop {

using fit::cplx;
using fit::Domain;
using fit::RationalModel;

namespace {
std::vector<double> mul(const std::vector<double>& a, const std::vector<double>& b) {
  std::vector<double> r(a.size() + b.size() - 1, 0.0);
  for (std::size_t i = 0; i < a.size(); ++i)
    for (std::size_t j = 0; j < b.size(); ++j) r[i + j] += a[i] * b[j];
  return r;
}
std::vector<double> add(std::vector<double> a, std::vector<double> b) {
  if (a.size() < b.size()) std::swap(a, b);
  for (std::size_t i = 0; i < b.size(); ++i) a[a.size() - b.size() + i] += b[i];
  return a;
}
}  // namespace

Stability closed_loop_stability(const RationalModel& p, const Controller& c, double f_lo, double f_hi,
                                std::size_t nyquist_points) {
  Stability st;
  const RationalModel& k = c.model;
  const bool both_s = p.domain == Domain::s && k.domain == Domain::s;
  const bool both_z = p.domain == Domain::z && k.domain == Domain::z && std::fabs(p.sample_time_s - k.sample_time_s) <= 1e-12 * p.sample_time_s;
  if (!both_s && !both_z) {
    st.reason = "a discrete controller on a continuous plant: stability of the sampled-data loop is not judged here "
                "(figures below Nyquist only)";
    return st;
  }
  // open-loop poles
  int origin = p.integrators + k.integrators;
  for (const RationalModel* m : {&p, &k}) {
    for (const cplx& q : m->poles) {
      if (m->domain == Domain::s) {
        if (std::abs(q) == 0) ++origin;
        else if (std::fabs(q.real()) <= 1e-9 * std::abs(q)) {
          st.reason = "an open-loop pole on the imaginary axis (undamped): stability is not judged";
          return st;
        } else if (q.real() > 0) ++st.open_loop_unstable;
      } else if (std::abs(q) > 1 + 1e-12) {
        ++st.open_loop_unstable;
      }
    }
  }
  std::ostringstream why;
  if (both_s) {
    // Nyquist count along the grid
    const std::size_t n = std::max<std::size_t>(nyquist_points, 1000);
    double delta = 0, prev = 0;
    bool first = true;
    for (std::size_t i = 0; i < n; ++i) {
      const double f = f_lo * std::pow(f_hi / f_lo, static_cast<double>(i) / static_cast<double>(n - 1));
      const double a = std::arg(1.0 + p.response(f) * k.response(f));
      if (!first) {
        double d = a - prev;
        while (d > std::numbers::pi) d -= 2 * std::numbers::pi;
        while (d < -std::numbers::pi) d += 2 * std::numbers::pi;
        delta += d;
      }
      prev = a;
      first = false;
    }
    const double zf = st.open_loop_unstable - (2 * delta - origin * std::numbers::pi) / (2 * std::numbers::pi);
    const double low_end = std::abs(p.response(f_hi) * k.response(f_hi));
    if (std::fabs(zf - std::round(zf)) < 0.05 && low_end < 0.5) {
      st.nyquist_unstable = static_cast<int>(std::lround(zf));
      why << "Nyquist count: " << st.nyquist_unstable << " closed-loop poles in the right half plane (open loop: "
          << st.open_loop_unstable << " unstable, " << origin << " at the origin)";
    } else {
      why << "Nyquist count inconclusive (" << zf << "; |L| = " << low_end << " at the top of the range)";
    }
  }
  // closed-loop poles of a rational loop
  const bool rational = both_z || (p.delay_s == 0 && k.delay_s == 0);
  if (rational && p.proportional == 0 && k.proportional == 0) {
    if (both_s) {
      // eigenvalues of the closed-loop state matrix (well conditioned at any
      // order, unlike the roots of an expanded characteristic polynomial):
      // u = Cc xc + Dc e, e = -y, y = Cp xp + Dp u
      const fit::detail::EigenStateSpace ps = fit::detail::to_eigen(p.state_space()), ks = fit::detail::to_eigen(k.state_space());
      const Eigen::Index np = ps.a.rows(), nk = ks.a.rows();
      const double g = 1.0 + ks.d * ps.d;
      if (std::fabs(g) < 1e-12) {
        st.reason = "1 + Dc Dp = 0: the loop is not well posed";
        return st;
      }
      // u = (Cc xc - Dc Cp xp)/g, y = Cp xp + Dp u
      Eigen::MatrixXd acl = Eigen::MatrixXd::Zero(np + nk, np + nk);
      const Eigen::RowVectorXd u_xp = -ks.d * ps.c.transpose() / g, u_xc = ks.c.transpose() / g;
      const Eigen::RowVectorXd y_xp = ps.c.transpose() + ps.d * u_xp, y_xc = ps.d * u_xc;
      acl.topLeftCorner(np, np) = ps.a + ps.b * u_xp;
      acl.topRightCorner(np, nk) = ps.b * u_xc;
      acl.bottomLeftCorner(nk, np) = -ks.b * y_xp;
      acl.bottomRightCorner(nk, nk) = ks.a - ks.b * y_xc;
      Eigen::EigenSolver<Eigen::MatrixXd> es(acl, false);
      st.closed_loop_poles.clear();
      for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) st.closed_loop_poles.push_back(es.eigenvalues()(i));
    } else {
      const fit::Polynomial pp = p.polynomial(), kp = k.polynomial();
      std::vector<double> dd = mul(pp.den, kp.den), nn = mul(pp.num, kp.num);
      const long shift = std::lround((p.delay_s + k.delay_s) / p.sample_time_s);
      for (long i = 0; i < shift; ++i) dd.push_back(0.0);  // z^N in the denominator
      st.closed_loop_poles = fit::polynomial_roots(add(dd, nn));
    }
    st.poles_available = true;
    int unstable = 0;
    for (const cplx& q : st.closed_loop_poles)
      if (both_s ? q.real() >= -1e-9 * std::max(1.0, std::abs(q)) : std::abs(q) >= 1) ++unstable;
    if (st.nyquist_unstable >= 0 && unstable != st.nyquist_unstable) {
      why << "; DISAGREES with the closed-loop poles (" << unstable << " unstable): not judged";
      st.reason = why.str();
      return st;
    }
    if (!why.str().empty()) why << "; ";
    why << "closed-loop poles: " << unstable << " unstable of " << st.closed_loop_poles.size();
    st.judged = true;
    st.stable = unstable == 0;
  } else if (st.nyquist_unstable >= 0) {
    st.judged = true;
    st.stable = st.nyquist_unstable == 0;
  }
  st.reason = why.str();
  return st;
}

}  // namespace benchid::loop
