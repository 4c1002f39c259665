// Excitation signals against scipy.signal (chirp, max_len_seq), Farina's
// exponential-sweep formulas, Schroeder's crest factors and the
// maximum-length-sequence properties.
#include "ident/excite.h"

#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <set>
#include <sstream>

#include "ident/error.h"
#include "ident/frf.h"
#include "ident/sine_fit.h"
#include "ident/welch.h"
#include "tests/support/expect_close.h"
#include "tests/support/signals.h"

using namespace benchid::ident;
using benchid::test::Biquad;

namespace {

const std::string kData = BENCHID_TEST_DATA_DIR;

// tests/reference/excite_reference.txt, made by make_excite_reference.py (SciPy 1.10.1)
std::vector<std::vector<std::string>> reference(const std::string& kind) {
  std::ifstream in(kData + "/reference/excite_reference.txt");
  std::vector<std::vector<std::string>> rows;
  std::string line;
  while (std::getline(in, line)) {
    std::stringstream s(line);
    std::vector<std::string> f;
    std::string w;
    while (s >> w) f.push_back(w);
    if (!f.empty() && f[0] == kind) rows.push_back(f);
  }
  return rows;
}

TEST(Prbs, MatchesScipyMaxLenSeqBitForBit) {
  const auto rows = reference("mls");
  ASSERT_EQ(rows.size(), 13u);
  for (const auto& r : rows) {
    const int n = std::stoi(r[1]);
    const auto seq = max_length_sequence(n);
    ASSERT_GE(seq.size(), r[2].size());
    std::string got;
    for (std::size_t i = 0; i < r[2].size(); ++i) got += seq[i] ? '1' : '0';
    EXPECT_EQ(got, r[2]) << "order " << n;
  }
}

TEST(Prbs, SequencesAreMaximalBalancedWithTwoLevelAutocorrelation) {
  // m-sequence facts (Golomb, Shift Register Sequences, 1967, from memory;
  // CHECK_VALUES.md s.7 [D]): length 2^n - 1, 2^(n-1) ones, and the +-1
  // sequence's circular autocorrelation is N at lag 0 and -1 at every other lag.
  for (int n = 2; n <= 20; ++n) {
    const auto s = max_length_sequence(n);
    ASSERT_EQ(s.size(), (std::size_t{1} << n) - 1);
    std::size_t ones = 0;
    for (auto b : s) ones += b;
    EXPECT_EQ(ones, std::size_t{1} << (n - 1)) << n;
    if (n > 11) continue;  // O(N^2) check below
    const long len = static_cast<long>(s.size());
    for (long lag = 0; lag < len; ++lag) {
      long acc = 0;
      for (long i = 0; i < len; ++i) acc += (2 * s[i] - 1) * (2 * s[(i + lag) % len] - 1);
      ASSERT_EQ(acc, lag == 0 ? len : -1) << "order " << n << " lag " << lag;
    }
  }
}

TEST(Prbs, HoldsEachBitAndReportsTheBandWithin3dB) {
  PrbsOptions o;
  o.order = 5;
  o.divider = 4;
  o.rate_hz = 1000;
  o.amplitude = 2;
  o.repeats = 2;
  const Excitation e = make_prbs(o);
  ASSERT_EQ(e.period, 31u * 4u);
  ASSERT_EQ(e.samples.size(), 2 * e.period);
  for (std::size_t i = 0; i < e.samples.size(); ++i) {
    EXPECT_EQ(std::fabs(e.samples[i]), 2.0);
    EXPECT_EQ(e.samples[i], e.samples[i / 4 * 4]) << i;  // held for 4 samples
  }
  // line power relative to flat, [sin(pi k d/P)/(d sin(pi k/P))]^2 [D]:
  // 0.506 at k = 14, 0.453 at k = 15, so the 3 dB band is lines 1..14
  // (14/124 * 1000 = 112.9 Hz, 0.45 x the 250 Hz clock; the continuous-time
  // figure is 0.443 x clock, common practice)
  EXPECT_EQ(e.lines.front(), 1u);
  EXPECT_EQ(e.lines.back(), 14u);
  // +-A with one more 1 than 0 (N = 31): mean A/N, so crest factor
  // (1 + 1/N)/sqrt(1 - 1/N^2) = 1.032796 [D]
  EXPECT_NEAR(e.crest_factor, (1 + 1 / 31.0) / std::sqrt(1 - 1 / 961.0), 1e-12);
}

TEST(Sweep, MatchesScipyChirp) {
  const auto rows = reference("chirp");
  ASSERT_GT(rows.size(), 100u);
  for (const auto& r : rows) {
    SweepOptions o;
    o.logarithmic = r[1] == "logarithmic";
    o.f0_hz = std::stod(r[2]);
    o.duration_s = std::stod(r[3]);
    o.f1_hz = std::stod(r[4]);
    o.phase_deg = std::stod(r[5]);
    const double t = std::stod(r[6]), want = std::stod(r[7]);
    // phase up to 2 pi * 2000 * 2 rad: double rounding ~1e-12 absolute
    EXPECT_NEAR(sweep_value(o, t), want, 1e-9) << r[1] << " t=" << t;
  }
  // CHECK_VALUES.md s.7 [S], printed to 6 decimals: chirp(t, 1, 10, 100) at t = 1.234
  SweepOptions lin;
  lin.f0_hz = 1, lin.f1_hz = 100, lin.duration_s = 10, lin.phase_deg = 0;
  EXPECT_NEAR(sweep_value(lin, 1.234), 0.135563, 5e-7);
  lin.logarithmic = true;
  EXPECT_NEAR(sweep_value(lin, 1.234), -0.526968, 5e-7);
}

TEST(Sweep, ExponentialInstantaneousFrequencyFollowsFarina) {
  // f(t) = f1 exp((t/T) ln(f2/f1)) (Farina, AES 108th Conv., 2000): f1 at the
  // start, the geometric mean in the middle, f2 at the end; the k-th harmonic
  // leads by T ln k / ln(f2/f1): 1.50515 s for k = 2, T = 10 s, 10-1000 Hz
  // (CHECK_VALUES.md s.7 [D]).
  SweepOptions o;
  o.logarithmic = true;
  o.f0_hz = 10, o.f1_hz = 1000, o.duration_s = 10;
  EXPECT_NEAR(sweep_frequency_hz(o, 0), 10, 1e-12);
  EXPECT_NEAR(sweep_frequency_hz(o, 5), 100, 1e-10);
  EXPECT_NEAR(sweep_frequency_hz(o, 10), 1000, 1e-9);
  const double dt2 = 10 * std::log(2.0) / std::log(100.0);
  EXPECT_NEAR(dt2, 1.50515, 5e-6);
  EXPECT_NEAR(sweep_frequency_hz(o, 3 + dt2), 2 * sweep_frequency_hz(o, 3), 1e-9);
  // the phase's derivative is 2 pi f(t): central difference of the signal's phase
  o.phase_deg = 0;
  const double t = 6.1, h = 1e-6;
  const double k = std::log(100.0);
  auto theta = [&](double tt) { return 2 * M_PI * 10 * 10 / k * (std::exp(k * tt / 10) - 1); };
  EXPECT_NEAR((theta(t + h) - theta(t - h)) / (2 * h) / (2 * M_PI), sweep_frequency_hz(o, t), 1e-4);
  EXPECT_NEAR(std::cos(theta(t)), sweep_value(o, t), 1e-12);
}

TEST(Sweep, FadesAndRepeats) {
  SweepOptions o;
  o.rate_hz = 8000, o.f0_hz = 20, o.f1_hz = 2000, o.duration_s = 1, o.fade_s = 0.05, o.repeats = 3, o.amplitude = 0.4;
  const Excitation e = make_sweep(o);
  ASSERT_EQ(e.samples.size(), 3u * 8000u);
  EXPECT_EQ(e.period, 8000u);
  EXPECT_NEAR(e.samples[0], 0.0, 1e-12);            // faded in
  EXPECT_NEAR(e.samples[7999], 0.0, 1e-12);         // faded out
  EXPECT_EQ(e.samples[100], e.samples[8100]);       // periodic
  double peak = 0;
  for (double v : e.samples) peak = std::max(peak, std::fabs(v));
  EXPECT_LE(peak, 0.4);
}

TEST(Multisine, SchroederPhasesGiveTheTabulatedLowCrestFactor) {
  // Schroeder 1970, flat spectrum, harmonics 1..F: crest factor 1.9162 (F = 10),
  // 1.7819 (31), 1.6761 (100), CHECK_VALUES.md s.7 [S] at 64x oversampling;
  // here 128 F samples per period, so the sampled peak is within 0.2 % of the
  // true one. A zero-phase multisine has sqrt(2F) [D].
  const double table[][2] = {{10, 1.9162}, {31, 1.7819}, {100, 1.6761}};
  for (const auto& [F, cf] : table) {
    MultisineOptions o;
    o.period = static_cast<std::size_t>(128 * F);
    o.rate_hz = static_cast<double>(o.period);  // 1 Hz lines
    o.f0_hz = 1, o.f1_hz = F;
    o.spacing = Spacing::lin;
    o.repeats = 1;
    const Excitation e = make_multisine(o);
    ASSERT_EQ(e.lines.size(), static_cast<std::size_t>(F));
    EXPECT_NEAR(e.crest_factor, cf, 0.003 * cf) << "F = " << F;
    EXPECT_LT(e.crest_factor, 0.5 * std::sqrt(2 * F));
  }
}

TEST(Multisine, CrestFactorReductionLowersRandomPhaseCrest) {
  MultisineOptions o;
  o.rate_hz = 4096, o.period = 4096, o.f0_hz = 1, o.f1_hz = 400, o.spacing = Spacing::lin;
  o.phases = Phases::random, o.seed = 5, o.repeats = 1;
  const Excitation a = make_multisine(o);
  o.crest_iterations = 100;
  const Excitation b = make_multisine(o);
  // random phases: ~3 for 400 lines (CHECK_VALUES.md s.7, median 3.12 at F = 100);
  // clipping passes bring it well under 2.5 with the spectrum kept on the lines
  EXPECT_GT(a.crest_factor, 2.5);
  EXPECT_LT(b.crest_factor, 2.3);
  EXPECT_NEAR(b.crest_factor_initial, a.crest_factor, 1e-12);
  // the lines keep equal amplitudes: check two through a DFT of the period
  auto line_amp = [&](std::size_t k) {
    std::complex<double> s = 0;
    for (std::size_t n = 0; n < 4096; ++n) s += b.samples[n] * std::polar(1.0, -2 * M_PI * double(k * n) / 4096);
    return std::abs(s);
  };
  EXPECT_NEAR(line_amp(3) / line_amp(300), 1.0, 1e-9);
  EXPECT_LT(line_amp(500) / line_amp(3), 1e-9);  // nothing off the lines
}

TEST(Multisine, LogSpacedLinesAreUniqueAndInsideTheBand) {
  MultisineOptions o;
  o.rate_hz = 2000, o.resolution_hz = 0.25, o.f0_hz = 1, o.f1_hz = 500, o.lines_per_decade = 20;
  const Excitation e = make_multisine(o);
  EXPECT_EQ(e.period, 8000u);
  for (std::size_t i = 1; i < e.lines.size(); ++i) EXPECT_GT(e.lines[i], e.lines[i - 1]);
  EXPECT_EQ(e.lines.front(), 4u);     // 1 Hz / 0.25 Hz
  EXPECT_EQ(e.lines.back(), 2000u);   // 500 Hz
  EXPECT_NEAR(e.band_hi_hz, 500, 1e-12);
  double peak = 0;
  for (double v : e.samples) peak = std::max(peak, std::fabs(v));
  EXPECT_NEAR(peak, o.amplitude, 1e-12);
}

TEST(Multisine, KnownFilterIsRecoveredLeakageFreeTo1e6) {
  // issue 3: a multisine through a known filter, analysed by period, gives the
  // filter's response to better than 1e-6 with no noise. Resonator zeta = 0.05
  // at 0.05 fs; two periods settle it (e^{-zeta w 2P} ~ 1e-17).
  const Biquad res = Biquad::resonance(0.05, 0.05);
  MultisineOptions o;
  o.rate_hz = 1, o.period = 2048, o.f0_hz = 1.0 / 2048, o.f1_hz = 0.2, o.lines_per_decade = 40, o.repeats = 6;
  const Excitation e = make_multisine(o);
  auto y = res.filter(e.samples);
  std::vector<double> u(e.samples.begin() + 2 * 2048, e.samples.end());
  y.erase(y.begin(), y.begin() + 2 * 2048);
  PeriodicAccumulator acc(2048, 2);
  acc.push({u, y});
  FrfOptions fo;
  fo.lines = e.lines;
  const Frf f = frf_from_periodic(acc.finish(1.0), 0, 1, fo);
  ASSERT_EQ(f.size(), e.lines.size());
  double worst = 0;
  for (std::size_t i = 0; i < f.size(); ++i)
    worst = std::max(worst, std::abs(f.h[i] - res.response(f.freq_hz[i])) / std::abs(res.response(f.freq_hz[i])));
  EXPECT_LT(worst, 1e-6);
}

TEST(Steps, PlanPutsFadeSettleAndMeasureInOrder) {
  StepsOptions o;
  o.rate_hz = 1000, o.f0_hz = 2, o.f1_hz = 200, o.count = 5, o.settle_cycles = 4, o.measure_cycles = 10;
  o.profile = {{2, 1.0}, {200, 0.01}};
  const Excitation e = make_steps(o);
  ASSERT_EQ(e.steps.size(), 5u);
  EXPECT_NEAR(e.steps[2].freq_hz, 20, 1e-9);  // log spacing: the geometric middle
  EXPECT_NEAR(e.steps[2].amplitude, 0.1, 1e-12);  // log-log profile: half way
  for (std::size_t i = 0; i < 5; ++i) {
    const Step& s = e.steps[i];
    const double cycle = 1000 / s.freq_hz;
    EXPECT_NEAR(static_cast<double>(s.measure_start - s.start), std::round(4 * cycle), 1.0);
    EXPECT_NEAR(static_cast<double>(s.measure_samples), 10 * cycle, 0.5);
    if (i) {
      EXPECT_EQ(s.start, e.steps[i - 1].end);
    }
    // full amplitude through the measuring window (no fade there): a sine fit
    // at the step's frequency gives it exactly
    const SineFit fit = fit_sine3(e.samples.data() + s.measure_start, s.measure_samples, s.freq_hz, 1000);
    EXPECT_NEAR(fit.amplitude, s.amplitude, 1e-9 * s.amplitude);
    EXPECT_LT(fit.residual_rms, 1e-9 * s.amplitude);
  }
  EXPECT_EQ(e.samples.size(), e.steps.back().end);
}

TEST(Excite, RejectsBadParametersNamingThem) {
  auto msg = [](auto make, auto opts) {
    try {
      make(opts);
    } catch (const benchid::InputError& e) {
      return std::string(e.what());
    }
    return std::string("(no error)");
  };
  MultisineOptions m;
  m.f0_hz = 500, m.f1_hz = 100;
  EXPECT_NE(msg(make_multisine, m).find("the stop frequency must be above the start"), std::string::npos);
  m = {};
  m.rate_hz = 1000, m.f1_hz = 600;
  EXPECT_NE(msg(make_multisine, m).find("must be below Nyquist (500 Hz)"), std::string::npos);
  m = {};
  m.rate_hz = 1000, m.resolution_hz = 0.3;
  EXPECT_NE(msg(make_multisine, m).find("whole number of samples"), std::string::npos);
  SweepOptions s;
  s.amplitude = 0;
  EXPECT_NE(msg(make_sweep, s).find("amplitude = 0: must be positive"), std::string::npos);
  PrbsOptions p;
  p.order = 40;
  EXPECT_NE(msg(make_prbs, p).find("order = 40"), std::string::npos);
  StepsOptions st;
  st.measure_cycles = 0;
  EXPECT_NE(msg(make_steps, st).find("measure cycles = 0"), std::string::npos);
}

}  // namespace
