// FRF estimators against exact responses of known discrete-time systems,
// against the random-error formulas of Bendat & Piersol, and against the
// closed-loop bias formula of CHECK_VALUES.md section 10.
#include "ident/frf.h"

#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <numeric>
#include <random>

#include "ident/error.h"
#include "tests/support/expect_close.h"
#include "tests/support/signals.h"

using namespace benchid::ident;
using benchid::test::Biquad;
using benchid::test::Gaussian;

namespace {

Frf welch_frf(const std::vector<std::vector<double>>& ch, std::size_t segment, int ref = -1,
              Estimator est = Estimator::h1, double fs = 1.0, Window w = Window::hann) {
  FrfOptions o;
  o.welch.segment = segment;
  o.welch.window = w;
  o.estimator = est;
  WelchAccumulator acc(o.welch, ch.size());
  acc.push(ch);
  return frf_from_spectra(acc.finish(fs), 0, 1, ref, o);
}

// Mean over lines of |H_est - H_true|^2 / (2 eps^2 |H_true|^2). With eps the
// normalized random error of |H| (which equals the phase s.d. in rad, Bendat &
// Piersol), the complex error has variance 2 eps^2 |H|^2, so this is ~1.
// Only lines with eps <= 0.2 count: the formulas are first-order and hold for
// small errors (Bendat & Piersol, ch. 9, from memory).
double normalized_error_ratio(const Frf& f, const std::function<std::complex<double>(double)>& truth,
                              double* frac_outside_95 = nullptr) {
  double sum = 0;
  std::size_t n = 0, outside = 0;
  for (std::size_t i = 0; i < f.size(); ++i) {
    if (!std::isfinite(f.rel_err[i]) || f.rel_err[i] <= 0 || f.rel_err[i] > 0.2) continue;
    const auto h = truth(f.freq_hz[i]);
    const double r = std::norm(f.h[i] - h) / (2 * f.rel_err[i] * f.rel_err[i] * std::norm(h));
    sum += r;
    // |err|/(eps|H|) is Rayleigh with scale 1: P(> 2.448) = exp(-2.448^2/2) = 0.05
    if (std::abs(f.h[i] - h) > 2.448 * f.rel_err[i] * std::abs(h)) ++outside;
    ++n;
  }
  if (frac_outside_95) *frac_outside_95 = static_cast<double>(outside) / static_cast<double>(n);
  return sum / static_cast<double>(n);
}

TEST(FrfError, BendatPiersolMagnitudeErrorMatchesTable) {
  // CHECK_VALUES.md s.3 [S] from B&P, Random Data 4th ed., ch. 9
  EXPECT_NEAR(frf_magnitude_error(0.8, 32), 0.06250, 5e-6);
  EXPECT_NEAR(frf_magnitude_error(0.9, 10), 0.07454, 5e-6);
  EXPECT_NEAR(frf_magnitude_error(0.5, 100), 0.07071, 5e-6);
  EXPECT_NEAR(frf_magnitude_error(0.99, 32), 0.01256, 5e-6);
  EXPECT_EQ(frf_magnitude_error(1.0, 32), 0.0);
  EXPECT_TRUE(std::isnan(frf_magnitude_error(0.0, 32)));
}

TEST(FrfError, ZeroCoherenceBoundMatchesCarterKnappNuttallTable) {
  // CHECK_VALUES.md s.3: 1 - alpha^(1/(n_d - 1)), printed to 4 decimals
  const double n[] = {4, 8, 10, 16, 20, 32, 50, 64, 100};
  const double b95[] = {0.6316, 0.3482, 0.2831, 0.1810, 0.1459, 0.0921, 0.0593, 0.0464, 0.0298};
  const double b99[] = {0.7846, 0.4821, 0.4005, 0.2644, 0.2152, 0.1381, 0.0897, 0.0705, 0.0455};
  // Tolerance one unit of the last printed digit: the n_d = 32, 99 % entry
  // 0.1381 is 0.138046 by the formula, rounded up in the table.
  for (int i = 0; i < 9; ++i) {
    EXPECT_NEAR(zero_coherence_bound(n[i], 0.95), b95[i], 1e-4) << n[i];
    EXPECT_NEAR(zero_coherence_bound(n[i], 0.99), b99[i], 1e-4) << n[i];
  }
}

TEST(Frf, NoiseFreeFilterGivesExactResponseAndUnitCoherence) {
  // Butterworth low-pass (bilinear, common practice), fc = 0.1 fs, white input.
  const Biquad lp = Biquad::butterworth_lowpass(0.1);
  Gaussian g(7);
  const auto u = g.take(1 << 18);
  const auto y = lp.filter(u);
  const Frf f = welch_frf({u, y}, 4096);
  double worst_mag = 0, worst_coh = 1;
  for (std::size_t i = 0; i < f.size(); ++i) {
    if (f.freq_hz[i] > 0.3) break;  // above 0.3 fs |H| < -35 dB
    worst_mag = std::max(worst_mag, std::abs(f.h[i] - lp.response(f.freq_hz[i])) / std::abs(lp.response(f.freq_hz[i])));
    worst_coh = std::min(worst_coh, f.coherence[i]);
  }
  // The only error left is leakage of the impulse response (~25 samples long)
  // across segment edges: of order 25/4096 in the cross-spectrum per segment,
  // averaged down; 2e-3 is an upper bound, measured ~4e-4.
  EXPECT_LT(worst_mag, 2e-3);
  EXPECT_GT(worst_coh, 0.999);
}

TEST(Frf, NoisyFilterStaysWithinItsOwnRandomErrorBound) {
  const Biquad lp = Biquad::butterworth_lowpass(0.1);
  Gaussian g(8);
  const auto u = g.take(1 << 19);
  auto y = lp.filter(u);
  for (auto& v : y) v += 0.3 * g();
  const Frf f = welch_frf({u, y}, 2048);
  double outside = 0;
  const double ratio = normalized_error_ratio(f, [&](double fr) { return lp.response(fr); }, &outside);
  // Lines: up to 1023 with Hann-correlated neighbours, ~680 independent. The ratio is
  // a mean of unit exponentials: s.d. 1/sqrt(680) = 0.038; allow 4 s.d.
  EXPECT_NEAR(ratio, 1.0, 0.16);
  // 95 % of lines inside 2.448 eps: binomial s.d. sqrt(.05*.95/680) = 0.0084; 4 s.d.
  EXPECT_NEAR(outside, 0.05, 0.034);
}

TEST(Frf, H1H2AndHvAreRelatedThroughCoherence) {
  // gamma^2 = H1/H2 and Hv = sqrt(H1 H2) for one input [D] (CHECK_VALUES.md s.3)
  const Biquad lp = Biquad::butterworth_lowpass(0.05);
  Gaussian g(9);
  const auto u = g.take(1 << 16);
  auto y = lp.filter(u);
  for (auto& v : y) v += 0.2 * g();
  const Frf h1 = welch_frf({u, y}, 1024, -1, Estimator::h1);
  const Frf h2 = welch_frf({u, y}, 1024, -1, Estimator::h2);
  const Frf hv = welch_frf({u, y}, 1024, -1, Estimator::hv);
  for (std::size_t i = 0; i < h1.size(); i += 37) {
    EXPECT_CLOSE(std::abs(h1.h[i]) / std::abs(h2.h[i]), h1.coherence[i], 1e-12);
    EXPECT_CLOSE(std::abs(hv.h[i]), std::sqrt(std::abs(h1.h[i]) * std::abs(h2.h[i])), 1e-12);
    EXPECT_NEAR(std::arg(hv.h[i]), std::arg(h1.h[i]), 1e-12);
    EXPECT_NEAR(std::arg(h2.h[i]), std::arg(h1.h[i]), 1e-12);
  }
}

TEST(Frf, H2IsBiasedByOutputNoiseButH1IsNot) {
  // CHECK_VALUES.md s.3 Monte Carlo [S]: H = 1, gamma^2 = 0.8: mean |H1| = 1.0009,
  // mean |H2| = 1.2513 = H/gamma^2. Here: y = u + n with var n = 0.25 var u.
  Gaussian g(10);
  const auto u = g.take(1 << 18);
  std::vector<double> y(u);
  for (auto& v : y) v += 0.5 * g();
  const Frf h1 = welch_frf({u, y}, 512, -1, Estimator::h1, 1.0, Window::rect);
  const Frf h2 = welch_frf({u, y}, 512, -1, Estimator::h2, 1.0, Window::rect);
  double m1 = 0, m2 = 0;
  for (std::size_t i = 0; i < h1.size(); ++i) m1 += std::abs(h1.h[i]), m2 += std::abs(h2.h[i]);
  m1 /= static_cast<double>(h1.size());
  m2 /= static_cast<double>(h2.size());
  // gamma^2 = 1/1.25 = 0.8; n_d = 512 averages per line, mean over 255 lines:
  // s.d. of the mean ~ eps/sqrt(255) = 0.0198/16 = 0.0012; allow 0.005.
  EXPECT_NEAR(m1, 1.0, 0.005);
  EXPECT_NEAR(m2, 1.25, 0.01);
}

// The loop of CHECK_VALUES.md s.10: P(z) = 0.2 z^-1/(1 - 0.8 z^-1), C = 2,
// var r = 1, var v = 0.25 (output noise), u = r - C y.
struct ClosedLoop {
  std::vector<double> r, u, y;
  static std::complex<double> plant(double f_over_fs) {
    const auto z1 = std::polar(1.0, -2 * M_PI * f_over_fs);
    return 0.2 * z1 / (1.0 - 0.8 * z1);
  }
  explicit ClosedLoop(std::size_t n) {
    Gaussian g(2026);
    r = g.take(n);
    const auto v = g.take(n, 0.5);
    u.resize(n);
    y.resize(n);
    double x = 0, u_prev = 0;
    for (std::size_t i = 0; i < n; ++i) {
      x = 0.8 * x + 0.2 * u_prev;
      y[i] = x + v[i];
      u[i] = r[i] - 2.0 * y[i];
      u_prev = u[i];
    }
  }
};

TEST(Frf, H1IsBiasedUnderFeedbackButIndirectIsNot) {
  const ClosedLoop cl(1 << 21);
  const Frf h1 = welch_frf({cl.u, cl.y, cl.r}, 512, -1);
  const Frf ind = welch_frf({cl.u, cl.y, cl.r}, 512, 2);
  ASSERT_EQ(ind.estimator, Estimator::indirect);
  // H1 -> (P Phi_rr - C* Phi_vv)/(Phi_rr + |C|^2 Phi_vv) = (P - 0.5)/2 [D]
  const double h1_ratio = normalized_error_ratio(h1, [](double f) { return (ClosedLoop::plant(f) - 0.5) / 2.0; });
  const double ind_ratio = normalized_error_ratio(ind, [](double f) { return ClosedLoop::plant(f); });
  // 255 lines, ~170 independent: s.d. of the mean of unit exponentials 0.077; 4 s.d.
  EXPECT_NEAR(h1_ratio, 1.0, 0.31);
  EXPECT_NEAR(ind_ratio, 1.0, 0.31);
  // H1 measured against the true plant is off by far more than its error bar
  const double h1_vs_plant = normalized_error_ratio(h1, [](double f) { return ClosedLoop::plant(f); });
  EXPECT_GT(h1_vs_plant, 1000.0);
  // the table rows of CHECK_VALUES.md s.10 (f/fs = 5/512, 50/512, 200/512): the
  // indirect estimate within 4 of its own sigma of the true plant
  for (std::size_t bin : {5u, 50u, 200u}) {
    const std::size_t i = bin - 1;  // DC left out
    const auto p = ClosedLoop::plant(ind.freq_hz[i]);
    EXPECT_LT(std::abs(ind.h[i] - p), 4 * std::sqrt(2.0) * ind.rel_err[i] * std::abs(p)) << "bin " << bin;
  }
  EXPECT_CLOSE(ClosedLoop::plant(5.0 / 512), std::complex<double>(0.92124, -0.28514), 1e-4);  // table "P true"
}

TEST(Frf, LoopGainFromInjectionIsMinusGdcOverGdu) {
  // Injection d at the plant input: u = c + d, c = -C y, y = P u + v, with the
  // plant and controller of CHECK_VALUES.md s.10. c = -C P u = -L u, so
  // -G_dc/G_du = L = C P [D]; output noise v must not bias it.
  const std::size_t n = 1 << 20;
  Gaussian g(77);
  const auto d = g.take(n);
  const auto v = g.take(n, 0.5);
  std::vector<double> u(n), c(n);
  double x = 0, u_prev = 0;
  for (std::size_t i = 0; i < n; ++i) {
    x = 0.8 * x + 0.2 * u_prev;
    c[i] = -2.0 * (x + v[i]);
    u[i] = c[i] + d[i];
    u_prev = u[i];
  }
  FrfOptions o;
  o.welch.segment = 512;
  o.loop_gain = true;
  WelchAccumulator acc(o.welch, 3);
  acc.push({u, c, d});
  const Frf f = frf_from_spectra(acc.finish(1.0), 0, 1, 2, o);
  const double ratio = normalized_error_ratio(f, [](double fr) { return 2.0 * ClosedLoop::plant(fr); });
  // as in the closed-loop test: ~170 independent lines, 4 s.d. of the mean
  EXPECT_NEAR(ratio, 1.0, 0.31);
}

TEST(Frf, IndirectWithInputAsReferenceReducesToH1) {
  // With r = u, G_ry/G_ru = G_uy/G_uu and the error formula reduces to B&P's [D].
  const Biquad lp = Biquad::butterworth_lowpass(0.1);
  Gaussian g(12);
  const auto u = g.take(1 << 15);
  auto y = lp.filter(u);
  for (auto& v : y) v += 0.1 * g();
  const Frf a = welch_frf({u, y}, 1024, -1);
  const Frf b = welch_frf({u, y}, 1024, 0);
  for (std::size_t i = 0; i < a.size(); i += 13) {
    EXPECT_CLOSE(b.h[i], a.h[i], 1e-12);
    EXPECT_CLOSE(b.coherence[i], a.coherence[i], 1e-9);
    EXPECT_CLOSE(b.rel_err[i], a.rel_err[i], 1e-7);
  }
}

// Random-phase multisine on lines 1..period/4 of a period of `period` samples.
std::vector<double> multisine(std::size_t period, std::size_t periods, std::uint64_t seed) {
  std::mt19937_64 gen(seed);
  std::uniform_real_distribution<double> ph(0, 2 * M_PI);
  std::vector<double> phases(period / 4 + 1);
  for (auto& p : phases) p = ph(gen);
  std::vector<double> x(period * periods);
  for (std::size_t i = 0; i < x.size(); ++i)
    for (std::size_t k = 1; k < phases.size(); ++k)
      x[i] += std::cos(2 * M_PI * static_cast<double>(k * (i % period)) / static_cast<double>(period) + phases[k]);
  return x;
}

TEST(Frf, PeriodicAveragingIsLeakageFreeForAMultisine) {
  const Biquad res = Biquad::resonance(0.05, 0.02);  // lightly damped: leakage would show
  const std::size_t period = 1024, m = 6;
  auto u = multisine(period, m + 2, 3);
  auto y = res.filter(u);
  // drop two periods of transient (decay time 1/(zeta w) = 160 samples)
  u.erase(u.begin(), u.begin() + 2 * period);
  y.erase(y.begin(), y.begin() + 2 * period);
  PeriodicAccumulator acc(period, 2);
  acc.push({u, y});
  FrfOptions o;
  const Frf f = frf_from_periodic(acc.finish(1.0), 0, 1, o);
  ASSERT_EQ(f.size(), period / 4);  // only excited lines are kept
  for (std::size_t i = 0; i < f.size(); ++i) {
    // remaining transient e^{-zeta w 2048} ~ 1e-5.6; rounding 1e-12
    EXPECT_CLOSE(f.h[i], res.response(f.freq_hz[i]), 1e-4) << f.freq_hz[i];
  }
}

TEST(Frf, PeriodicErrorComesFromPeriodToPeriodVariance) {
  const Biquad lp = Biquad::butterworth_lowpass(0.1);
  const std::size_t period = 1024, m = 16;
  auto u = multisine(period, m + 1, 4);
  auto y = lp.filter(u);
  Gaussian g(13);
  u.erase(u.begin(), u.begin() + period);
  y.erase(y.begin(), y.begin() + period);
  for (auto& v : y) v += 0.5 * g();
  PeriodicAccumulator acc(period, 2);
  acc.push({u, y});
  FrfOptions o;
  const Frf f = frf_from_periodic(acc.finish(1.0), 0, 1, o);
  double outside = 0;
  const double ratio = normalized_error_ratio(f, [&](double fr) { return lp.response(fr); }, &outside);
  // 256 independent lines (rectangular, periodic: no leakage); the variance is
  // itself estimated from 16 periods (15 dof), which widens the spread: the
  // ratio's s.d. ~ sqrt(1 + 2/15)/sqrt(256) = 0.067; allow 4 s.d.
  EXPECT_NEAR(ratio, 1.0, 0.27);
}

TEST(Frf, WarnsWhenAResonanceIsNarrowerThanTheResolution) {
  // zeta = 0.002 at 0.1 fs: half-power width 2 zeta f = 4e-4 fs; a 1/1024
  // resolution (9.8e-4 fs) cannot resolve it, 1/16384 (6.1e-5 fs) can.
  const Biquad res = Biquad::resonance(0.1, 0.002);
  Gaussian g(14);
  const auto u = g.take(1 << 21);
  const auto y = res.filter(u);
  const Frf coarse = welch_frf({u, y}, 1024);
  const Frf fine = welch_frf({u, y}, 16384);
  auto mentions = [](const Frf& f) {
    for (const auto& w : f.warnings)
      if (w.find("resonance near") != std::string::npos) return true;
    return false;
  };
  EXPECT_TRUE(mentions(coarse));
  EXPECT_FALSE(mentions(fine));
}

}  // namespace
