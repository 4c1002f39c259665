// `benchid excite` as a user runs it, and its sidecar driving `benchid frf`.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "ident/frf_csv.h"
#include "ident/record.h"
#include "tests/support/signals.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

using benchid::test::Outcome;
using benchid::test::slurp;
using benchid::test::TempDir;
namespace fs = std::filesystem;

namespace {

Outcome run(const TempDir& d, const std::string& args) { return benchid::test::run_benchid(d, args); }

std::size_t files_in(const TempDir& d) {
  std::size_t n = 0;
  for (const auto& e : fs::directory_iterator(d.path())) n += e.is_regular_file();
  return n;
}

struct BadExcite {
  const char* name;
  std::string args, fragment;
};
void PrintTo(const BadExcite& c, std::ostream* os) { *os << c.name; }

class ExciteCliBad : public ::testing::TestWithParam<BadExcite> {};

TEST_P(ExciteCliBad, ExitsTwoWithOneLineAndWritesNothing) {
  TempDir d;
  const std::string ext = std::string(GetParam().name) == "FlacFloat" ? ".flac" : ".wav";
  const Outcome r = run(d, "excite " + GetParam().args + " -o " + d.file("sig" + ext));
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_EQ(r.err.rfind("benchid: error: ", 0), 0u) << r.err;
  EXPECT_EQ(std::count(r.err.begin(), r.err.end(), '\n'), 1) << r.err;
  EXPECT_NE(r.err.find(GetParam().fragment), std::string::npos) << r.err;
  EXPECT_EQ(files_in(d), 0u) << "a signal, sidecar or temporary was left behind";
}

INSTANTIATE_TEST_SUITE_P(
    Catalogue, ExciteCliBad,
    ::testing::Values(
        BadExcite{"StopBelowStart", "multisine --f0 500 --f1 100", "stop frequency must be above the start"},
        BadExcite{"BandAboveNyquist", "chirp --rate 8000 --f1 5000", "f1 = 5000 Hz: must be below Nyquist (4000 Hz)"},
        BadExcite{"ZeroAmplitude", "prbs --amplitude 0", "amplitude = 0: must be positive"},
        BadExcite{"NonIntegerPeriod", "multisine --rate 1000 --resolution 0.3 --f1 100",
                  "expected a whole number of samples"},
        BadExcite{"NoHeadroom", "prbs --amplitude 0.95", "exceeds the -1 dBFS headroom limit"},
        BadExcite{"OffsetEatsHeadroom", "chirp --amplitude 0.5 --offset 0.5", "exceeds the -1 dBFS headroom limit"},
        BadExcite{"FlacFloat", "chirp --sample-format float", "FLAC holds integer samples"},
        BadExcite{"UnknownSpacing", "multisine --spacing octave", "spacing 'octave' is unknown"},
        BadExcite{"BadProfile", "steps --profile 10:1,100", "expected FREQ_HZ:AMPLITUDE"}),
    [](const auto& i) { return std::string(i.param.name); });

TEST(ExciteCli, MultisineSidecarDrivesPeriodicFrf) {
  // excite -> (a known filter, computed here) -> frf --excitation: periodic
  // averaging over exactly the excited lines, first period skipped.
  TempDir d;
  Outcome r = run(d, "excite multisine --rate 1000 --f0 2 --f1 200 --resolution 1 --repeat 5 -o " + d.file("ms.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  ASSERT_TRUE(fs::exists(d.file("ms.excite.json")));
  EXPECT_NE(r.err.find("caution"), std::string::npos);
  const auto sig = benchid::ident::read_record(d.file("ms.csv"));
  ASSERT_EQ(sig.samples[0].size(), 5000u);
  const auto lp = benchid::test::Biquad::butterworth_lowpass(0.05);
  const auto y = lp.filter(sig.samples[0]);
  std::string s = "u,y\n";  // no time column: the rate comes from the sidecar
  char b[80];
  for (std::size_t i = 0; i < y.size(); ++i) {
    std::snprintf(b, sizeof b, "%.17g,%.17g\n", sig.samples[0][i], y[i]);
    s += b;
  }
  d.write("rec.csv", s);
  r = run(d, "frf " + d.file("rec.csv") + " --input u --output y --excitation " + d.file("ms.excite.json") + " -o " +
                 d.file("frf.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const auto f = benchid::ident::read_frf_csv(d.file("frf.csv"));
  EXPECT_EQ(f.estimator, benchid::ident::Estimator::periodic);
  EXPECT_EQ(f.averages, 4u);  // 5 periods, the first skipped
  EXPECT_NE(f.excitation.find("multisine"), std::string::npos);
  for (std::size_t i = 0; i < f.size(); ++i) {
    const auto h = lp.response(f.freq_hz[i] / 1000.0);
    // the filter settles in far less than a period (e^{-zeta w 1000} ~ 1e-100);
    // the CSV prints 12 significant digits
    EXPECT_LT(std::abs(f.h[i] - h) / std::abs(h), 1e-9) << f.freq_hz[i];
  }
}

TEST(ExciteCli, MultisineRecordWithoutItsSidecarIsNoticed) {
  // the same chain, but frf without --excitation: Welch runs, and says the
  // input has a line spectrum and to give the sidecar (ident/trusted.h)
  TempDir d;
  Outcome r =
      run(d, "excite multisine --rate 1000 --f0 2 --f1 200 --resolution 0.5 --repeat 30 -o " +
                 d.file("ms.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const auto sig = benchid::ident::read_record(d.file("ms.csv"));
  const auto lp = benchid::test::Biquad::butterworth_lowpass(0.05);
  const auto y = lp.filter(sig.samples[0]);
  std::string s = "time_s,u,y\n";
  char b[100];
  for (std::size_t i = 0; i < y.size(); ++i) {
    std::snprintf(b, sizeof b, "%.17g,%.17g,%.17g\n", i / 1000.0, sig.samples[0][i], y[i]);
    s += b;
  }
  d.write("rec.csv", s);
  r = run(d, "frf " + d.file("rec.csv") + " --input u --output y -o " + d.file("frf.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.err.find("the input has a line spectrum"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("--excitation"), std::string::npos) << r.err;
  // a random input through the same filter: no such warning
  benchid::test::Gaussian g(1);
  std::vector<double> u(sig.samples[0].size());
  for (double& v : u) v = g();
  const auto y2 = lp.filter(u);
  s = "time_s,u,y\n";
  for (std::size_t i = 0; i < y2.size(); ++i) {
    std::snprintf(b, sizeof b, "%.17g,%.17g,%.17g\n", i / 1000.0, u[i], y2[i]);
    s += b;
  }
  d.write("rand.csv", s);
  r = run(d, "frf " + d.file("rand.csv") + " --input u --output y -o " + d.file("frf2.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_EQ(r.err.find("line spectrum"), std::string::npos) << r.err;
}

TEST(ExciteCli, LogSweepRecordReportsHarmonicDistortion) {
  // y = u + 0.1 u^2 + 0.01 u^3 on a 0.8-amplitude exponential sweep: a sine of
  // amplitude A gives a 2nd harmonic 0.1 A^2/2 and a 3rd 0.01 A^3/4 against a
  // fundamental A + 0.0075 A^3 [D]: -27.99 dB and -55.96 dB.
  TempDir d;
  Outcome r = run(d, "excite logchirp --rate 8000 --f0 20 --f1 2000 --duration 4 --fade 0.05 --repeat 3 "
                     "--amplitude 0.8 -o " + d.file("ls.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const auto sig = benchid::ident::read_record(d.file("ls.csv"));
  std::string s = "u,y\n";
  char b[80];
  for (double u : sig.samples[0]) {
    std::snprintf(b, sizeof b, "%.17g,%.17g\n", u, u + 0.1 * u * u + 0.01 * u * u * u);
    s += b;
  }
  d.write("rec.csv", s);
  r = run(d, "frf " + d.file("rec.csv") + " --input u --output y --excitation " + d.file("ls.excite.json") + " -o " +
                 d.file("frf.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const auto f = benchid::ident::read_frf_csv(d.file("frf.csv"));
  ASSERT_TRUE(f.harmonics.has_value());
  ASSERT_GE(f.harmonics->overall_db.size(), 2u);
  // separation of the deconvolved responses leaves a floor near -70 dB
  // (measured with no 4th/5th harmonic present), worth 0.2 dB at -56 dB
  EXPECT_NEAR(f.harmonics->overall_db[0], -27.99, 0.1);
  EXPECT_NEAR(f.harmonics->overall_db[1], -55.96, 0.3);
  EXPECT_NE(r.err.find("harmonic 2 stands at"), std::string::npos) << r.err;
  EXPECT_EQ(r.err.find("resonance near"), std::string::npos) << r.err;
}

TEST(ExciteCli, StepsPlanDrivesSteppedFrfAndBadPlansAreRefused) {
  TempDir d;
  Outcome r = run(d, "excite steps --rate 1000 --f0 5 --f1 100 --count 6 --plan " + d.file("plan.json") + " -o " +
                         d.file("steps.wav"));
  ASSERT_EQ(r.code, 0) << r.err;
  // a chirp's sidecar is not a plan
  r = run(d, "excite chirp --rate 1000 --f1 100 --duration 2 -o " + d.file("c.wav"));
  ASSERT_EQ(r.code, 0) << r.err;
  r = run(d, "frf " + d.file("steps.wav") + " --input 1 --output 1 --stepped " + d.file("c.excite.json"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("is not a stepped-sine plan"), std::string::npos) << r.err;
  // broken JSON names its line
  d.write("bad.json", "{\n  \"format\": \"benchid.excitation/1\",\n  \"kind\": steps\n}\n");
  r = run(d, "frf " + d.file("steps.wav") + " --input 1 --output 1 --stepped " + d.file("bad.json"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("bad.json:3: not valid JSON"), std::string::npos) << r.err;
  // the plan of a one-channel signal: input = output gives the same-channel refusal
  r = run(d, "frf " + d.file("steps.wav") + " --input 1 --output 1 --stepped " + d.file("plan.json"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("same channel"), std::string::npos) << r.err;
}

}  // namespace
