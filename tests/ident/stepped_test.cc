// Sine fits against IEEE Std 1057's equations (values of CHECK_VALUES.md s.8,
// computed with SciPy), and the stepped-sine FRF against known filters.
#include "ident/stepped.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>

#include "ident/error.h"
#include "ident/sine_fit.h"
#include "tests/support/expect_close.h"
#include "tests/support/signals.h"
#include "tests/support/temp_dir.h"

using namespace benchid::ident;
using benchid::test::Biquad;
using benchid::test::Gaussian;
using benchid::test::TempDir;

namespace {

std::vector<double> test_tone(bool with_harmonic) {
  std::vector<double> y(1000);
  for (int i = 0; i < 1000; ++i) {
    const double t = i / 1000.0;
    y[i] = 1.5 * std::cos(2 * M_PI * 50.3 * t + 0.7) + 0.2;
    if (with_harmonic) y[i] += 0.05 * std::cos(2 * M_PI * 150.9 * t + 0.3);
  }
  return y;
}

TEST(SineFit, ThreeAndFourParameterFitsMatchIeee1057Values) {
  // CHECK_VALUES.md s.8 [S]: y = 1.5 cos(2 pi 50.3 t + 0.7) + 0.2, 1 kHz, 1000
  // samples: both fits exact; with 0.05 cos(2 pi 150.9 t + 0.3) added the LS
  // solutions below (4-parameter started at 50.0 Hz; = scipy least_squares).
  const auto clean = test_tone(false);
  const SineFit a = fit_sine3(clean.data(), 1000, 50.3, 1000);
  EXPECT_NEAR(a.amplitude, 1.5, 1e-12);
  EXPECT_NEAR(a.phase_rad, 0.7, 1e-12);
  EXPECT_NEAR(a.offset, 0.2, 1e-12);
  const SineFit b = fit_sine4(clean.data(), 1000, 50.0, 1000);
  EXPECT_TRUE(b.converged);
  EXPECT_NEAR(b.freq_hz, 50.3, 1e-9);
  EXPECT_NEAR(b.amplitude, 1.5, 1e-9);
  const auto y = test_tone(true);
  const SineFit c = fit_sine3(y.data(), 1000, 50.3, 1000);
  EXPECT_NEAR(c.amplitude, 1.500087223, 1e-9);  // printed to 9 decimals
  EXPECT_NEAR(c.phase_rad, 0.700065662, 1e-9);
  EXPECT_NEAR(c.offset, 0.199970574, 1e-9);
  const SineFit d = fit_sine4(y.data(), 1000, 50.0, 1000);
  EXPECT_NEAR(d.amplitude, 1.500087059, 1e-9);
  EXPECT_NEAR(d.phase_rad, 0.699953359, 1e-9);
  EXPECT_NEAR(d.offset, 0.199970521, 1e-9);
  EXPECT_NEAR(d.freq_hz, 50.300035776, 1e-9);
  // residual = the harmonic: rms 0.05/sqrt 2 to within what the fit absorbs
  EXPECT_NEAR(c.residual_rms, 0.05 / std::sqrt(2.0), 2e-4);
}

std::string write_record(const TempDir& d, const std::vector<double>& u, const std::vector<double>& y, double rate) {
  std::string s = "# rate_hz=" + std::to_string(rate) + "\nu,y\n";
  char b[80];
  for (std::size_t i = 0; i < u.size(); ++i) {
    std::snprintf(b, sizeof b, "%.17g,%.17g\n", u[i], y[i]);
    s += b;
  }
  return d.write("rec.csv", s);
}

TEST(Stepped, KnownFilterAtTwentyStepsRecoveredTo1e6) {
  // issue 3: no noise, 20 log-spaced steps through a Butterworth low-pass
  // (bilinear, common practice). The filter's transient decays as
  // e^{-zeta w_n t} = e^{-444 t}: at least 0.1 s of settling leaves e^{-44}.
  const double rate = 2000;
  StepsOptions so;
  so.rate_hz = rate, so.f0_hz = 5, so.f1_hz = 500, so.count = 20, so.settle_cycles = 10, so.measure_cycles = 20;
  so.min_settle_s = 0.1;
  const Excitation e = make_steps(so);
  const Biquad lp = Biquad::butterworth_lowpass(100.0 / rate);
  const auto y = lp.filter(e.samples);
  TempDir d;
  auto reader = open_record(write_record(d, e.samples, y, rate));
  const Frf f = estimate_stepped(*reader, {"u", "y", ""}, e.steps, rate, {});
  ASSERT_EQ(f.size(), 20u);
  for (std::size_t i = 0; i < f.size(); ++i) {
    const auto h = lp.response(f.freq_hz[i] / rate);
    EXPECT_NEAR(std::abs(f.h[i]) / std::abs(h), 1.0, 1e-6) << f.freq_hz[i];
    EXPECT_NEAR(std::arg(f.h[i] / h), 0.0, 1e-6) << f.freq_hz[i];
    EXPECT_TRUE(f.reliable[i]);
    EXPECT_LT(f.distortion_pct[i], 1e-6);  // percent: rounding only
  }
  EXPECT_EQ(f.estimator, Estimator::stepped);
}

TEST(Stepped, ErrorBarsCoverNoiseAndDistortionIsReported) {
  // white output noise sigma: the fitted amplitude's s.d. is sigma sqrt(2/N)
  // (LS covariance of the cos/sin columns [D]); every point within 4 of its own
  // sigma (complex error s.d. sqrt(2) rel_err |H|).
  const double rate = 1000;
  StepsOptions so;
  so.rate_hz = rate, so.f0_hz = 5, so.f1_hz = 200, so.count = 12, so.measure_cycles = 40, so.min_settle_s = 0.2;
  const Excitation e = make_steps(so);
  const Biquad lp = Biquad::butterworth_lowpass(50.0 / rate);
  auto y = lp.filter(e.samples);
  Gaussian g(31);
  for (auto& v : y) v += 0.02 * g() + 0.1 * v * v;  // noise and a square-law distortion
  TempDir d;
  auto reader = open_record(write_record(d, e.samples, y, rate));
  const Frf f = estimate_stepped(*reader, {"u", "y", ""}, e.steps, rate, {});
  for (std::size_t i = 0; i < f.size(); ++i) {
    const auto h = lp.response(f.freq_hz[i] / rate);
    EXPECT_LT(std::abs(f.h[i] - h), 4 * std::sqrt(2.0) * f.rel_err[i] * std::abs(h)) << f.freq_hz[i];
  }
  // 0.1 y^2 on a 0.5-amplitude sine: 2nd harmonic 0.1 A^2/2 = 0.0125 against
  // A = 0.5: 2.5 % in the pass band (plus noise)
  EXPECT_GT(f.distortion_pct[0], 2.0);
}

TEST(Stepped, StepsFromAListAndAnOffsetRecord) {
  // a record that starts 0.3 s before the plan: --plan-offset 0.3 finds the steps
  const double rate = 1000;
  const std::vector<double> freqs{7, 31, 90};
  auto steps = steps_from_list(freqs, 2.0, 0.5, rate);
  ASSERT_EQ(steps.size(), 3u);
  EXPECT_EQ(steps[1].measure_start, 2500u);
  EXPECT_EQ(steps[1].measure_samples, 1500u);
  std::vector<double> u(300, 0.0);
  for (std::size_t i = 0; i < 6000; ++i) {
    const double f = freqs[i / 2000];
    u.push_back(std::sin(2 * M_PI * f * static_cast<double>(i) / rate));
  }
  std::vector<double> y(u.size());
  for (std::size_t i = 1; i < u.size(); ++i) y[i] = 2.0 * u[i - 1];  // gain 2, one-sample delay
  TempDir d;
  auto reader = open_record(write_record(d, u, y, rate));
  SteppedOptions o;
  o.offset_s = 0.3;
  const Frf f = estimate_stepped(*reader, {"u", "y", ""}, steps, rate, o);
  ASSERT_EQ(f.size(), 3u);
  for (std::size_t i = 0; i < 3; ++i) {
    EXPECT_NEAR(std::abs(f.h[i]), 2.0, 1e-9);
    EXPECT_NEAR(std::arg(f.h[i]), -2 * M_PI * freqs[i] / rate, 1e-9);  // one sample of delay
  }
  EXPECT_THROW(steps_from_list({10}, 1.0, 1.5, rate), benchid::InputError);
  EXPECT_THROW(steps_from_list({600}, 1.0, 0.5, rate), benchid::InputError);
}

}  // namespace
