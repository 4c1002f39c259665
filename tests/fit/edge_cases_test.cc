// Numerical edge cases of fitting: very wide bands, extreme magnitudes,
// repeated poles, poles near the imaginary axis, DC and Nyquist lines,
// noise-free data, and the independence of the answers from the units of
// frequency and response (the solvers scale both). The systems are made up
// for the test; the expected answers are the systems themselves.
#include <gtest/gtest.h>

#include <cmath>
#include <complex>
#include <vector>

#include "fit/fit_frf.h"
#include "fit/model.h"
#include "fit/vector_fit.h"
#include "ident/error.h"
#include "tests/support/pole_error.h"

using namespace benchid::fit;

namespace {

constexpr double kTwoPi = 2 * M_PI;

cplx pole_at(double f_hz, double zeta) {
  const double w = kTwoPi * f_hz;
  return {-zeta * w, w * std::sqrt(1 - zeta * zeta)};
}

// k prod(s - z) / prod(s - p) in pole-residue form (distinct poles)
RationalModel model(const std::vector<cplx>& zeros, const std::vector<cplx>& poles, double k) {
  Zpk z;
  z.zeros = zeros;
  z.poles = poles;
  z.gain = k;
  return from_zpk(z);
}

// n log-spaced noise-free lines with a stated relative error of rel_err
benchid::ident::Frf frf_of(const RationalModel& m, double f_lo, double f_hi, int n, double rel_err = 1e-3) {
  benchid::ident::Frf f;
  for (int k = 0; k < n; ++k) {
    const double fk = f_lo * std::pow(f_hi / f_lo, static_cast<double>(k) / (n - 1));
    f.freq_hz.push_back(fk);
    f.h.push_back(m.response(fk));
    f.rel_err.push_back(rel_err);
    f.coherence.push_back(1.0);
    f.reliable.push_back(1);
  }
  return f;
}

using benchid::test::pole_error;

// Worst relative error of the fitted response over the lines.
double response_error(const RationalModel& m, const benchid::ident::Frf& f) {
  double worst = 0;
  for (std::size_t k = 0; k < f.size(); ++k)
    worst = std::max(worst, std::abs(m.response(f.freq_hz[k]) - f.h[k]) / std::abs(f.h[k]));
  return worst;
}

FrfFit fit(const benchid::ident::Frf& f, int order, bool proper = false) {
  FitOptions o;
  o.vf.order = order;
  o.vf.proper = proper;
  return fit_frf(f, o);
}

TEST(FitEdge, EightDecadesFromOneMillihertzToOneHundredKilohertz) {
  // a slow thermal-like pole at 10 mHz, a resonance at 40 Hz and a fast pole at 20 kHz
  const std::vector<cplx> poles{-kTwoPi * 0.01, pole_at(40, 0.05), std::conj(pole_at(40, 0.05)), -kTwoPi * 2e4};
  const RationalModel t = model({-kTwoPi * 5.0}, poles, 1e6);
  const auto f = frf_of(t, 1e-3, 1e5, 800);
  const FrfFit r = fit(f, 4);
  EXPECT_TRUE(r.result.converged);
  EXPECT_LT(pole_error(poles, r.result.model.poles), 1e-6);
  EXPECT_LT(response_error(r.result.model, f), 1e-6);
}

TEST(FitEdge, MagnitudesFromOneNanoToOneGigaGiveTheSamePoles) {
  const std::vector<cplx> poles{-kTwoPi * 3.0, pole_at(120, 0.02), std::conj(pole_at(120, 0.02))};
  for (double k : {1e-9, 1.0, 1e9}) {
    const RationalModel t = model({}, poles, k * 1e6);
    const auto f = frf_of(t, 0.1, 1e3, 400);
    const FrfFit r = fit(f, 3);
    EXPECT_TRUE(r.result.converged) << "gain " << k;
    EXPECT_LT(pole_error(poles, r.result.model.poles), 1e-8) << "gain " << k;
    EXPECT_LT(response_error(r.result.model, f), 1e-8) << "gain " << k;
  }
}

TEST(FitEdge, RepeatedPolesAreApproximatedToTheResponse) {
  // (s + 20)^-2 and a double resonance: simple-pole bases meet repeated
  // poles as close pairs; the response must still be matched
  const cplx p = pole_at(50, 0.1);
  const std::vector<cplx> poles{-20.0, -20.0, p, std::conj(p), p, std::conj(p)};
  Zpk z;
  z.poles = poles;
  z.gain = 1e8;
  // build the response by the product form (from_zpk needs distinct poles)
  benchid::ident::Frf f;
  for (int k = 0; k < 500; ++k) {
    const double fk = 0.1 * std::pow(1e4, k / 499.0);
    const cplx s(0, kTwoPi * fk);
    cplx h = z.gain;
    for (const cplx& q : poles) h /= (s - q);
    f.freq_hz.push_back(fk);
    f.h.push_back(h);
    f.rel_err.push_back(1e-3);
    f.coherence.push_back(1.0);
    f.reliable.push_back(1);
  }
  const FrfFit r = fit(f, 6);
  EXPECT_LT(response_error(r.result.model, f), 1e-4);
  EXPECT_LT(pole_error(poles, r.result.model.poles), 1e-2);
}

TEST(FitEdge, PolesNearTheImaginaryAxis) {
  // damping 1e-4 at 100 Hz: a half-power width of 0.02 Hz; lines 0.005 Hz apart around it
  const cplx p = pole_at(100, 1e-4);
  const std::vector<cplx> poles{p, std::conj(p), -kTwoPi * 10.0};
  const RationalModel t = model({}, poles, 1e6);
  benchid::ident::Frf f = frf_of(t, 1, 1000, 300);
  for (double fk = 99.5; fk < 100.5; fk += 0.005) {  // dense lines near the resonance, kept in order
    const auto it = std::lower_bound(f.freq_hz.begin(), f.freq_hz.end(), fk);
    if (it != f.freq_hz.end() && std::fabs(*it - fk) < 1e-9) continue;
    const auto i = it - f.freq_hz.begin();
    f.freq_hz.insert(it, fk);
    f.h.insert(f.h.begin() + i, t.response(fk));
    f.rel_err.insert(f.rel_err.begin() + i, 1e-3);
    f.coherence.insert(f.coherence.begin() + i, 1.0);
    f.reliable.insert(f.reliable.begin() + i, 1);
  }
  const FrfFit r = fit(f, 3);
  EXPECT_LT(pole_error(poles, r.result.model.poles), 1e-8);
  // damping within 1 % of 1e-4
  for (const cplx& q : r.result.model.poles)
    if (q.imag() > 0) {
      EXPECT_NEAR(-q.real() / std::abs(q), 1e-4, 1e-6);
    }
}

TEST(FitEdge, NoiseFreeDataWithZeroStatedError) {
  const std::vector<cplx> poles{-kTwoPi * 3.0, pole_at(120, 0.02), std::conj(pole_at(120, 0.02))};
  const RationalModel t = model({}, poles, 1e6);
  const auto f = frf_of(t, 0.1, 1e3, 400, 0.0);
  const FrfFit r = fit(f, 3);
  EXPECT_TRUE(r.result.converged);
  EXPECT_LT(pole_error(poles, r.result.model.poles), 1e-8);
  EXPECT_TRUE(std::isfinite(r.result.chi2));
}

TEST(FitEdge, DcAndNyquistLines) {
  const std::vector<cplx> poles{-kTwoPi * 3.0, pole_at(120, 0.02), std::conj(pole_at(120, 0.02))};
  const RationalModel t = model({}, poles, 1e6);
  // a DC line (0 Hz) first and the Nyquist line of a 1 kHz record last
  benchid::ident::Frf f = frf_of(t, 0.1, 500, 400);
  f.freq_hz.insert(f.freq_hz.begin(), 0.0);
  f.h.insert(f.h.begin(), t.response(0.0));
  f.rel_err.insert(f.rel_err.begin(), 1e-3);
  f.coherence.insert(f.coherence.begin(), 1.0);
  f.reliable.insert(f.reliable.begin(), 1);
  const FrfFit r = fit(f, 3);
  EXPECT_LT(pole_error(poles, r.result.model.poles), 1e-8);
  EXPECT_LT(response_error(r.result.model, f), 1e-8);
  // with an integrator the DC line is infinite: it must be left out, not divide by zero
  RationalModel ti = t;
  ti.integrators = 1;
  benchid::ident::Frf fi = frf_of(ti, 0.1, 500, 400);
  fi.freq_hz.insert(fi.freq_hz.begin(), 0.0);
  fi.h.insert(fi.h.begin(), cplx(1e300, 0));
  fi.rel_err.insert(fi.rel_err.begin(), 1e-3);
  fi.coherence.insert(fi.coherence.begin(), 1.0);
  fi.reliable.insert(fi.reliable.begin(), 1);
  FitOptions o;
  o.vf.order = 3;
  o.vf.proper = false;
  o.vf.integrators = 1;
  const FrfFit ri = fit_frf(fi, o);
  EXPECT_LT(pole_error(poles, ri.result.model.poles), 1e-8);
  EXPECT_EQ(ri.left_out_unreliable, 1u);
  ASSERT_FALSE(ri.warnings.empty());
  EXPECT_NE(ri.warnings.back().find("DC line is left out"), std::string::npos);
  // a z-domain fit with both the DC line (z = 1) and the Nyquist line (z = -1)
  // of a 1 kHz sample time: a first-order low-pass y[n] = 0.9 y[n-1] + 0.1 u[n-1]
  FitData d;
  for (int k = 0; k <= 200; ++k) {
    const double fk = 500.0 * k / 200;
    const cplx z = std::exp(cplx(0, kTwoPi * fk * 1e-3));
    d.freq_hz.push_back(fk);
    d.h.push_back(0.1 / (z - 0.9));
    d.weight.push_back(1.0 / std::abs(d.h.back()));
  }
  VectorFitOptions zo;
  zo.order = 1;
  zo.proper = false;
  zo.domain = Domain::z;
  zo.sample_time_s = 1e-3;
  const FitResult rz = vector_fit(d, zo);
  ASSERT_EQ(rz.model.poles.size(), 1u);
  EXPECT_NEAR(rz.model.poles[0].real(), 0.9, 1e-10);
  EXPECT_NEAR(rz.model.dc_gain(), 1.0, 1e-10);
}

TEST(FitEdge, HertzAndKilohertzScaleSystemsGiveTheSameRelativeAnswers) {
  // the same shape 1000 times faster: every pole and line x1000, and the
  // response x1e-6 (a change of units); the fit must scale exactly. It does
  // because the starting poles follow the band and every least-squares
  // column is scaled to unit length before the QR (solve_scaled), so the
  // arithmetic sees the same numbers whatever the units.
  const std::vector<cplx> poles{-kTwoPi * 2.0, pole_at(30, 0.03), std::conj(pole_at(30, 0.03)), -kTwoPi * 400.0};
  const RationalModel slow = model({pole_at(20, 0.05), std::conj(pole_at(20, 0.05))}, poles, 5e4);
  const auto fs = frf_of(slow, 0.05, 2e3, 500, 0.01);
  benchid::ident::Frf ff = fs;
  for (auto& x : ff.freq_hz) x *= 1e3;
  for (auto& h : ff.h) h *= 1e-6;
  const FrfFit a = fit(fs, 4), b = fit(ff, 4);
  ASSERT_EQ(a.result.model.poles.size(), b.result.model.poles.size());
  EXPECT_EQ(a.result.iterations, b.result.iterations);
  EXPECT_NEAR(a.result.nrmse, b.result.nrmse, 1e-9 + 1e-6 * a.result.nrmse);
  for (std::size_t i = 0; i < a.result.model.poles.size(); ++i)
    EXPECT_LT(std::abs(b.result.model.poles[i] / 1e3 - a.result.model.poles[i]) / std::abs(a.result.model.poles[i]), 1e-9);
}

}  // namespace
