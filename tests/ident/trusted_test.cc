// The trusted-line rule (ident/trusted.h) on Welch estimates of simulated
// measurements, on FRF files without the `reliable` column, and the trusted band.
#include "ident/trusted.h"

#include <gtest/gtest.h>

#include <cmath>
#include <sstream>

#include "ident/error.h"
#include "ident/excite.h"
#include "ident/frf_csv.h"
#include "ident/welch.h"
#include "tests/support/signals.h"
#include "tests/support/temp_dir.h"

using namespace benchid::ident;
using benchid::test::Biquad;
using benchid::test::Gaussian;
using benchid::test::TempDir;

namespace {

Frf welch_h1(const std::vector<double>& u, const std::vector<double>& y, std::size_t segment,
             double fs) {
  FrfOptions o;
  o.welch.segment = segment;
  WelchAccumulator acc(o.welch, 2);
  acc.push({u, y});
  return frf_from_spectra(acc.finish(fs), 0, 1, -1, o);
}

// Band-limited random input (4th-order Butterworth at fc), a resonant plant,
// white output noise: the usual bench measurement.
struct Measured {
  Frf frf;
  double fc_hz;
};
Measured band_limited(std::uint64_t seed, double snr_db) {
  const double fs = 2000, fc = 40;
  Gaussian g(seed);
  const Biquad lp = Biquad::butterworth_lowpass(fc / fs);
  std::vector<double> u = lp.filter(lp.filter(g.take(1 << 17)));
  const std::vector<double> x = Biquad::resonance(25 / fs, 0.05).filter(u);
  double px = 0;
  for (double v : x) px += v * v / static_cast<double>(x.size());
  std::vector<double> y = x;
  const std::vector<double> n = g.take(y.size(), std::sqrt(px) * std::pow(10.0, -snr_db / 20));
  for (std::size_t i = 0; i < y.size(); ++i) y[i] += n[i];
  return {welch_h1(u, y, 1024, fs), fc};
}

}  // namespace

// Above a band-limited excitation G_uu ~ 0, and about 1 - confidence (5 %)
// of those lines pass the zero-coherence bound by chance (Carter, Knapp &
// Nuttall 1973) with wild |H|. Far above the band (beyond 8 fc: over 72 dB
// down for a 4th-order filter, common practice) no line may be trusted; in
// the band (below fc/2, where the plant output stands 30 dB above the noise)
// every line is. Five seeds.
TEST(TrustedLines, NothingAboveABandLimitedExcitationIsTrusted) {
  for (std::uint64_t seed = 1; seed <= 5; ++seed) {
    const Measured m = band_limited(seed, 30);
    const Frf& f = m.frf;
    std::size_t above = 0, chance = 0, below = 0, below_ok = 0;
    for (std::size_t k = 0; k < f.size(); ++k) {
      if (f.freq_hz[k] > 8 * m.fc_hz) {
        ++above;
        chance += f.coherence[k] > f.coherence_bound;
        EXPECT_FALSE(f.reliable[k]) << "seed " << seed << " line " << f.freq_hz[k] << " Hz";
      }
      if (f.freq_hz[k] < m.fc_hz / 2) ++below, below_ok += f.reliable[k];
    }
    EXPECT_GT(above, 300u);
    EXPECT_EQ(below_ok, below) << "seed " << seed;
    // the case the rule is for: some lines pass the coherence bound by chance
    if (seed == 1) EXPECT_GT(chance, 0u);
    // and the trusted band ends where the excitation ends, not at a chance line
    const TrustedBand b = trusted_band(f);
    EXPECT_TRUE(b.found());
    EXPECT_LT(b.lo_hz, 2.0);
    EXPECT_GT(b.hi_hz, m.fc_hz);
    EXPECT_LT(b.hi_hz, 8 * m.fc_hz);
  }
}

// A multisine on every 16th line of the Welch segment: a Hann window leaks a
// bin-centred tone into its two neighbours only (common practice), so the
// lines between hold no input; they must not be trusted, however they fall
// against the coherence bound.
TEST(TrustedLines, LinesBetweenTheTonesOfAMultisineAreNotExcited) {
  const std::size_t seg = 512, n = seg * 200;
  std::vector<double> u(n, 0.0);
  for (std::size_t tone = 16; tone < 200; tone += 16)
    for (std::size_t i = 0; i < n; ++i)
      u[i] += std::cos(2 * M_PI * static_cast<double>(tone * i) / seg +
                       0.37 * static_cast<double>(tone));
  Gaussian g(7);
  std::vector<double> y = Biquad::butterworth_lowpass(0.1).filter(u);
  const std::vector<double> noise = g.take(n, 0.05);
  for (std::size_t i = 0; i < n; ++i) y[i] += noise[i];
  const Frf f = welch_h1(u, y, seg, 1.0);
  for (std::size_t k = 0; k < f.size(); ++k) {
    const std::size_t bin = k + 1;  // the DC line is left out
    const std::size_t off = bin % 16 < 8 ? bin % 16 : 16 - bin % 16;
    if (bin < 200 && off <= 1 && bin >= 15) {
      if (off == 0) EXPECT_TRUE(f.reliable[k]) << "tone bin " << bin;
    } else {
      EXPECT_FALSE(f.reliable[k]) << "bin " << bin;
    }
  }
}

// A file without the `reliable` column: the coherence and error rule.
TEST(TrustedLines, AFileWithoutTheColumnFallsBackToCoherenceAndError) {
  TempDir d;
  const std::string path = d.write("old.csv",
                                   "# benchid frf 1\n# coherence_bound=0.05\n"
                                   "freq_hz,re,im,coherence,rel_err\n"
                                   "1,1,0,0.99,0.01\n"  // trusted
                                   "2,1,0,0.04,0.01\n"  // under the coherence bound
                                   "3,1,0,0.6,0.25\n"   // random error above 20 %
                                   "4,1,0,0.9,\n"       // error undefined
                                   "5,1,0,1,0\n");      // perfect
  const Frf f = read_frf_csv(path);
  ASSERT_EQ(f.size(), 5u);
  EXPECT_EQ(std::vector<int>(f.reliable.begin(), f.reliable.end()),
            (std::vector<int>{1, 0, 0, 0, 1}));
  // a hand-made file with a response only: nothing known against it
  const Frf bare = read_frf_csv(d.write("bare.csv", "freq_hz,re,im\n1,1,0\n2,1,0\n"));
  EXPECT_EQ(std::vector<int>(bare.reliable.begin(), bare.reliable.end()), (std::vector<int>{1, 1}));
}

// The band: up to the last trusted line below which 90 % (and 12 of the last
// 16) are trusted; scattered chance lines above do not stretch it.
TEST(TrustedLines, TheTrustedBandIgnoresScatteredLinesAbove) {
  Frf f;
  for (int k = 1; k <= 400; ++k) {
    f.freq_hz.push_back(k);
    f.h.push_back(1.0);
    f.coherence.push_back(0.9);
    f.rel_err.push_back(0.02);
    f.reliable.push_back(k <= 150 ? (k % 25 != 0)
                                  : (k % 20 == 0));  // 4 % missing below, 5 % passing above
  }
  const TrustedBand b = trusted_band(f);
  EXPECT_EQ(b.lo_hz, 1.0);
  EXPECT_EQ(b.hi_hz, 149.0);  // line 150 is one of the missing ones
  EXPECT_EQ(b.lines, 144u);
  const ChosenBand c = choose_band(f, false, 0, 0);
  EXPECT_NE(c.note.find("the trusted band"), std::string::npos) << c.note;
  const ChosenBand given = choose_band(f, true, 10, 0);
  EXPECT_EQ(given.hi_hz, 400.0);
  EXPECT_THROW(choose_band(f, true, 500, 600), benchid::InputError);
}

// The input autospectrum of a Welch estimate (Hann, 4096-sample segments,
// 50 % overlap) of each excitation benchid makes, at 1 kHz for 60 s: only
// the multisines have a line spectrum (the rule in ident/trusted.h; common
// practice: a periodic signal's power sits on its tones).
TEST(LineSpectrum, FoundForMultisinesOnly) {
  const double fs = 1000;
  const std::size_t n = 60000;
  auto spectrum = [&](std::vector<double> u) {
    u.resize(n, 0.0);
    Gaussian g(3);
    std::vector<double> y(n);
    for (std::size_t i = 0; i < n; ++i) y[i] = u[i] + 0.01 * g();
    const Frf f = welch_h1(u, y, 4096, fs);
    return line_spectrum(f.freq_hz, f.guu);
  };
  auto repeated = [&](const Excitation& e) {
    std::vector<double> u;
    while (u.size() < n) u.insert(u.end(), e.samples.begin(), e.samples.end());
    return u;
  };
  {  // log-spaced, 57 lines 1-200 Hz on a 0.5 Hz grid
    MultisineOptions o;
    o.rate_hz = fs, o.resolution_hz = 0.5, o.f0_hz = 1, o.f1_hz = 200, o.repeats = 1;
    const LineSpectrum ls = spectrum(repeated(make_multisine(o)));
    EXPECT_TRUE(ls.found) << ls.tones << " tones, 90 % on " << ls.lines_90 << " of "
                          << ls.band_lines;
  }
  {  // linear, every 8th line of a 0.25 Hz grid, 5-100 Hz
    MultisineOptions o;
    o.rate_hz = fs, o.resolution_hz = 0.25, o.f0_hz = 5, o.f1_hz = 100, o.repeats = 1;
    o.spacing = Spacing::lin, o.every = 8;
    const LineSpectrum ls = spectrum(repeated(make_multisine(o)));
    EXPECT_TRUE(ls.found) << ls.tones << " tones, 90 % on " << ls.lines_90 << " of "
                          << ls.band_lines;
  }
  {  // white noise, low-pass noise (steep but smooth), PRBS, linear and log sweeps
    Gaussian g(5);
    std::vector<double> white(n), low(n);
    double s = 0;
    for (std::size_t i = 0; i < n; ++i) {
      white[i] = g();
      s = 0.99 * s + white[i];
      low[i] = s;
    }
    PrbsOptions p;
    p.rate_hz = fs, p.order = 10, p.repeats = 1;
    SweepOptions c;
    c.rate_hz = fs, c.f0_hz = 1, c.f1_hz = 200, c.duration_s = 10;
    SweepOptions lc = c;
    lc.logarithmic = true;
    for (const auto& [name, u] : std::vector<std::pair<std::string, std::vector<double>>>{
             {"white", white},
             {"low-pass", low},
             {"prbs", repeated(make_prbs(p))},
             {"chirp", repeated(make_sweep(c))},
             {"logchirp", repeated(make_sweep(lc))}}) {
      const LineSpectrum ls = spectrum(u);
      EXPECT_FALSE(ls.found) << name << ": " << ls.tones << " tones, 90 % on " << ls.lines_90
                             << " of " << ls.band_lines;
    }
  }
}
