// Measuring-chain corrections of `frf` (--lag, --invert, --calibrate,
// --from/--to). The records are periodic multisines whose responses are
// made exactly in the frequency domain (a circular response per period), so
// a fractional-sample delay is exact too, and the periodic estimate of a
// noise-free record is the true response to rounding: the corrections must
// give it back to 1e-9. The plants and chains are made up for the test.
#include <gtest/gtest.h>

#include <algorithm>
#include <cstdint>
#include <filesystem>
#include <cmath>
#include <complex>
#include <cstdio>
#include <fstream>
#include <functional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "ident/frf_csv.h"
#include "tests/support/run_cli.h"
#include "tests/support/signals.h"
#include "tests/support/temp_dir.h"

using benchid::test::run_benchid;
using benchid::test::slurp;
using benchid::test::TempDir;
using cplx = std::complex<double>;

namespace {

constexpr double kRate = 1000;  // Hz
constexpr int kPeriod = 1000;   // samples: 1 Hz lines
constexpr int kLines = 120;     // lines 1..120 Hz excited

// x[n] of one period from its one-sided spectrum X[k], k = 1..kLines (plain DFT)
std::vector<double> synthesize(const std::function<cplx(int)>& spectrum) {
  std::vector<double> x(kPeriod, 0.0);
  for (int k = 1; k <= kLines; ++k) {
    const cplx X = spectrum(k);
    for (int n = 0; n < kPeriod; ++n) x[n] += 2 * std::real(X * std::polar(1.0, 2 * M_PI * k * n / kPeriod)) / kPeriod;
  }
  return x;
}

cplx input_line(int k) { return std::polar(300.0, 0.7 * k * k); }  // Schroeder-like phases
cplx plant(double f) { return 4.0 / cplx(1, f / 25) / cplx(1 - f * f / 6400, 0.1 * f / 80); }
cplx chain(double f) { return cplx(0, f / 0.8) / cplx(1, f / 0.8) / cplx(1 - f * f / 90000, 1.2 * f / 300); }

// Writes time_s,u,y of `periods` periods: u from input_line (times u_sign),
// y = response(f) * input, delayed by delay_s (exact: periodic).
std::string write_record(const TempDir& d, const std::string& name, const std::function<cplx(double)>& response,
                         double delay_s, double u_sign, int periods = 4) {
  const std::vector<double> u = synthesize(input_line);
  const std::vector<double> y = synthesize([&](int k) {
    return response(k) * input_line(k) * std::polar(1.0, -2 * M_PI * k * delay_s);
  });
  std::string s = "time_s,u,y\n";
  char row[96];
  for (int p = 0; p < periods; ++p)
    for (int n = 0; n < kPeriod; ++n) {
      std::snprintf(row, sizeof row, "%.6f,%.17g,%.17g\n", (p * kPeriod + n) / kRate, u_sign * u[n], y[n]);
      s += row;
    }
  return d.write(name, s);
}

// Worst relative error of the FRF file against `truth` over its lines.
double worst_error(const std::string& frf_path, const std::function<cplx(double)>& truth,
                   std::size_t lines = kLines) {
  const benchid::ident::Frf f = benchid::ident::read_frf_csv(frf_path);
  EXPECT_EQ(f.size(), lines);
  double worst = 0;
  for (std::size_t i = 0; i < f.size(); ++i)
    worst = std::max(worst, std::abs(f.h[i] - truth(f.freq_hz[i])) / std::abs(truth(f.freq_hz[i])));
  return worst;
}

TEST(Chain, AFractionalLagAndAPolarityFlipAreUndoneExactly) {
  TempDir d;
  const double lag_s = 2.37 / kRate;  // 2.37 samples
  const std::string rec = write_record(d, "rec.csv", plant, lag_s, -1.0);
  // uncorrected: wrong by the flip and by 2 pi f lag (85 deg at 100 Hz)
  ASSERT_EQ(run_benchid(d, "frf " + rec + " --input u --output y --periods 4 -q -o " + d.file("raw.csv")).code, 0);
  EXPECT_GT(worst_error(d.file("raw.csv"), plant), 1.0);
  const auto r = run_benchid(d, "frf " + rec + " --input u --output y --periods 4 -q --lag y:" +
                                    std::to_string(lag_s) + " --invert u -o " + d.file("h.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_LT(worst_error(d.file("h.csv"), plant), 1e-9);
  // the same by an input lead: the input's samples early by the lag is the same relative shift
  const auto r2 = run_benchid(d, "frf " + rec + " --input u --output y --periods 4 -q --lag u:-" +
                                     std::to_string(lag_s) + " --invert 2 -o " + d.file("h2.csv"));
  ASSERT_EQ(r2.code, 0) << r2.err;
  EXPECT_LT(worst_error(d.file("h2.csv"), plant), 1e-9);
  // what was done is in the metadata
  const std::string text = slurp(d.file("h.csv"));
  EXPECT_NE(text.find("# corrections=output lag 0.00237 s; input polarity inverted"), std::string::npos) << text.substr(0, 600);
}

TEST(Chain, ALoopbackCalibrationRestoresThePlant) {
  TempDir d;
  // the chain (AC coupling at 0.8 Hz and a 300 Hz anti-alias filter) is in
  // the measurement; the loopback is the chain alone, measured the same way
  const std::string meas = write_record(d, "meas.csv", [](double f) { return plant(f) * chain(f); }, 0, 1.0);
  const std::string loop = write_record(d, "loop.csv", chain, 0, 1.0);
  ASSERT_EQ(run_benchid(d, "frf " + loop + " --input u --output y --periods 4 -q -o " + d.file("chain.csv")).code, 0);
  const auto r = run_benchid(d, "frf " + meas + " --input u --output y --periods 4 -q --calibrate " + d.file("chain.csv") +
                                    " -o " + d.file("plant.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_LT(worst_error(d.file("plant.csv"), plant), 1e-9);
  // without the calibration the chain shows (the AC coupling alone is -3 dB at 0.8 Hz)
  ASSERT_EQ(run_benchid(d, "frf " + meas + " --input u --output y --periods 4 -q -o " + d.file("raw.csv")).code, 0);
  EXPECT_GT(worst_error(d.file("raw.csv"), plant), 0.1);
}

TEST(Chain, TrimmingKeepsExactlyTheSamplesAsACutRecord) {
  TempDir d;
  // 8 periods; the FRF of seconds 2 to 6 must equal that of a file holding only them
  const std::string rec = write_record(d, "rec.csv", plant, 0, 1.0, 8);
  std::string cut = "time_s,u,y\n";
  {
    std::ifstream in(rec);
    std::string line;
    std::getline(in, line);
    for (int n = 0; std::getline(in, line); ++n)
      if (n >= 2 * kPeriod && n < 6 * kPeriod) cut += line + "\n";
  }
  d.write("cut.csv", cut);
  ASSERT_EQ(run_benchid(d, "frf " + rec + " --input u --output y --segment 1000 --from 2 --to 6 -q -o " + d.file("a.csv")).code, 0);
  ASSERT_EQ(run_benchid(d, "frf " + d.file("cut.csv") + " --input u --output y --segment 1000 -q -o " + d.file("b.csv")).code, 0);
  const benchid::ident::Frf a = benchid::ident::read_frf_csv(d.file("a.csv")), b = benchid::ident::read_frf_csv(d.file("b.csv"));
  ASSERT_EQ(a.size(), b.size());
  EXPECT_EQ(a.samples, 4u * kPeriod);
  for (std::size_t i = 0; i < a.size(); ++i) {
    EXPECT_EQ(a.h[i], b.h[i]) << a.freq_hz[i];
    EXPECT_EQ(a.coherence[i], b.coherence[i]) << a.freq_hz[i];
  }
  EXPECT_NE(slurp(d.file("a.csv")).find("samples 2000 to 6000 (2 to 6 s) kept"), std::string::npos);
}

TEST(Chain, BadCorrectionsAreRefusedNamingWhatIsWrong) {
  TempDir d;
  const std::string rec = write_record(d, "rec.csv", plant, 0, 1.0);
  const std::string base = "frf " + rec + " --input u --output y --periods 4 -o " + d.file("h.csv") + " ";
  // a calibration FRF on another grid (2 Hz lines)
  std::string other = "time_s,u,y\n";
  for (int n = 0; n < 2000; ++n) other += std::to_string(n / kRate) + "," + std::to_string(std::sin(n * 0.3)) + "," + std::to_string(std::cos(n * 0.3)) + "\n";
  d.write("other.csv", other);
  ASSERT_EQ(run_benchid(d, "frf " + d.file("other.csv") + " --input u --output y --segment 500 -q -o " + d.file("c.csv")).code, 0);
  const struct {
    std::string args, fragment;
  } cases[] = {
      {"--calibrate " + d.file("c.csv"), "lines from 2 to 500 Hz, but the measurement has 120 lines from 1 to 120 Hz"},
      {"--lag y:5", "--lag of the output 5 s is not shorter than the record (4 s)"},
      {"--lag time_s:0.001", "channel 'time_s' is neither the input nor the output"},
      {"--lag y", "--lag 'y': expected CH:SECONDS"},
      {"--invert volts", "no channel 'volts'"},
      {"--from 9", "no samples from 9 s"},
      {"--from 3 --to 2", "expected 0 <= from < to"},
      {"--from 1 --split 0.2", "--split with --from/--to"},
  };
  for (const auto& c : cases) {
    const auto r = run_benchid(d, base + c.args);
    EXPECT_EQ(r.code, 2) << c.args << "\n" << r.err;
    EXPECT_NE(r.err.find(c.fragment), std::string::npos) << c.args << "\n" << r.err;
    EXPECT_FALSE(std::filesystem::exists(d.file("h.csv"))) << c.args;
  }
}

// A noisy run: white input through a resonance, output noise 30 % of the
// output's rms; seed per run.
std::string noisy_run(const TempDir& d, const std::string& name, std::uint64_t seed, double rate = 1000,
                      std::size_t n = 32768) {
  benchid::test::Gaussian g(seed);
  const std::vector<double> u = g.take(n);
  const std::vector<double> y = benchid::test::Biquad::resonance(0.05, 0.1).filter(u);
  std::string s = "time_s,u,y\n";
  char row[96];
  for (std::size_t i = 0; i < n; ++i) {
    std::snprintf(row, sizeof row, "%.8f,%.9g,%.9g\n", static_cast<double>(i) / rate, u[i], y[i] + 0.3 * g());
    s += row;
  }
  return d.write(name, s);
}

double median(std::vector<double> v) {
  std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
  return v[v.size() / 2];
}

// Repeated runs averaged into one FRF (issue 9): with the same settings N
// runs hold N times the averages, so rel_err = sqrt(1 - g2)/(|g| sqrt(2 n_d))
// (Bendat & Piersol) falls by sqrt(N) where the coherence is the same. Per
// line the coherence estimates scatter by about rel_err itself (a few %
// here), so the median over the lines of the ratio must be 2 for N = 4
// within 5 %; and the averaged FRF lies closer to the true response.
TEST(Runs, FourRunsHalveTheRandomError) {
  TempDir d;
  std::vector<std::string> runs;
  for (int i = 0; i < 4; ++i) runs.push_back(noisy_run(d, "run" + std::to_string(i) + ".csv", 100 + i));
  const std::string opts = " --input u --output y --segment 512 -q -o ";
  ASSERT_EQ(run_benchid(d, "frf " + runs[0] + opts + d.file("one.csv")).code, 0);
  const auto r = run_benchid(d, "frf " + runs[0] + " " + runs[1] + " " + runs[2] + " " + runs[3] + opts + d.file("four.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const benchid::ident::Frf one = benchid::ident::read_frf_csv(d.file("one.csv")),
                            four = benchid::ident::read_frf_csv(d.file("four.csv"));
  ASSERT_EQ(one.size(), four.size());
  EXPECT_NEAR(four.effective_averages, 4 * one.effective_averages, 1e-5 * four.effective_averages);  // printed to 6 digits
  EXPECT_EQ(four.samples, 4 * one.samples);
  std::vector<double> ratio;
  double err1 = 0, err4 = 0;
  const auto truth = [](double f) { return benchid::test::Biquad::resonance(0.05, 0.1).response(f / 1000); };
  for (std::size_t k = 0; k < one.size(); ++k) {
    if (one.freq_hz[k] > 200) break;  // where the output stands above its noise
    ratio.push_back(one.rel_err[k] / four.rel_err[k]);
    err1 += std::norm((one.h[k] - truth(one.freq_hz[k])) / truth(one.freq_hz[k]));
    err4 += std::norm((four.h[k] - truth(four.freq_hz[k])) / truth(four.freq_hz[k]));
  }
  EXPECT_NEAR(median(ratio), 2.0, 0.1);
  EXPECT_NEAR(std::sqrt(err1 / err4), 2.0, 0.4);  // the actual error falls by about sqrt(4) too
  EXPECT_NE(slurp(d.file("four.csv")).find("# corrections=averaged over 4 records: "), std::string::npos);
  // runs at another rate are refused, naming the odd one
  const std::string fast = noisy_run(d, "fast.csv", 9, 2000);
  const auto bad = run_benchid(d, "frf " + runs[0] + " " + fast + opts + d.file("bad.csv"));
  EXPECT_EQ(bad.code, 2);
  EXPECT_NE(bad.err.find("fast.csv: sampled at 2000 Hz, but"), std::string::npos) << bad.err;
  EXPECT_FALSE(std::filesystem::exists(d.file("bad.csv")));
}

TEST(Runs, PeriodicRunsAverageTheirPeriodsAndKeepTheResponse) {
  TempDir d;
  const std::string a = write_record(d, "a.csv", plant, 0, 1.0), b = write_record(d, "b.csv", plant, 0, 1.0);
  const auto r = run_benchid(d, "frf " + a + " " + b + " --input u --output y --periods 4 -q -o " + d.file("h.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_LT(worst_error(d.file("h.csv"), plant), 1e-9);
  EXPECT_EQ(benchid::ident::read_frf_csv(d.file("h.csv")).averages, 8u);  // 4 periods from each record
  // a run of another length gives another period: refused
  const std::string c = write_record(d, "c.csv", plant, 0, 1.0, 5);
  const auto bad = run_benchid(d, "frf " + a + " " + c + " --input u --output y --periods 4 -q -o " + d.file("x.csv"));
  EXPECT_EQ(bad.code, 2);
  EXPECT_NE(bad.err.find("c.csv: 5000 samples give 1250-sample periods"), std::string::npos) << bad.err;
}

// `benchid stitch` as a user runs it: a periodic FRF (1..120 Hz, noise-free
// periods, so a random error of 0) joined with a Welch FRF of a noisy record
// reaching 500 Hz; the file says which source gave which band and where the
// seams are (the choice itself is tested in tests/ident/stitch_test.cc).
TEST(StitchCli, JoinsTwoMeasurementsAndRecordsTheSeam) {
  TempDir d;
  const std::string rec = write_record(d, "rec.csv", plant, 0, 1.0, 8);
  ASSERT_EQ(run_benchid(d, "frf " + rec + " --input u --output y --periods 8 -q -o " + d.file("periodic.csv")).code, 0);
  ASSERT_EQ(run_benchid(d, "frf " + noisy_run(d, "noise.csv", 5) + " --input u --output y --segment 256 -q -o " +
                               d.file("welch.csv")).code, 0);
  const auto r = run_benchid(d, "stitch " + d.file("periodic.csv") + " " + d.file("welch.csv") + " -o " + d.file("s.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const benchid::ident::Frf s = benchid::ident::read_frf_csv(d.file("s.csv"));
  EXPECT_EQ(s.freq_hz.back(), 500);
  const std::string text = slurp(d.file("s.csv"));
  EXPECT_NE(text.find("stitched from " + d.file("periodic.csv") + " ("), std::string::npos) << text.substr(0, 800);
  EXPECT_NE(text.find("seams at"), std::string::npos);
  EXPECT_NE(r.err.find("seam at"), std::string::npos) << r.err;
  // one FRF is not a stitch
  const auto one = run_benchid(d, "stitch " + d.file("welch.csv") + " -o " + d.file("t.csv"));
  EXPECT_EQ(one.code, 2);
  EXPECT_FALSE(std::filesystem::exists(d.file("t.csv")));
}

// The two-level linearity check (issue 9): `excite multisine --levels 0.2,1`
// plays the signal at 20 % and then at full amplitude; `frf --excitation`
// measures each half and compares them. A linear plant (a Butterworth
// low-pass, noise-free) gives the same response at both levels; the same
// plant followed by a saturation that only the full level reaches is
// flagged at the excited lines. The plant is made up; that a saturation
// makes the describing function depend on the level is common practice.
TEST(Linearity, TwoLevelsFlagASaturationAndPassALinearPlant) {
  TempDir d;
  const auto ex = run_benchid(d, "excite multisine -q --rate 1000 --f0 2 --f1 200 --resolution 2 --amplitude 1 "
                                 "--levels 0.2,1 -o " + d.file("two.csv"));
  ASSERT_EQ(ex.code, 0) << ex.err;
  std::ifstream in(d.file("two.csv"));
  std::string line, lin = "time_s,u,y\n", sat = lin;
  const benchid::test::Biquad lp = benchid::test::Biquad::butterworth_lowpass(0.05);
  std::vector<double> t, u;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || line[0] == 't') continue;
    t.push_back(std::stod(line));
    u.push_back(std::stod(line.substr(line.find(',') + 1)));
  }
  const std::vector<double> y = lp.filter(u);
  double peak = 0;
  for (double v : y) peak = std::max(peak, std::fabs(v));
  char row[128];
  for (std::size_t i = 0; i < u.size(); ++i) {
    std::snprintf(row, sizeof row, "%.6f,%.17g,%.17g\n", t[i], u[i], y[i]);
    lin += row;
    // clipped at 35 % of the full-level peak: the 20 % level (its peak 20 %) never reaches it
    std::snprintf(row, sizeof row, "%.6f,%.17g,%.17g\n", t[i], u[i], std::clamp(y[i], -0.35 * peak, 0.35 * peak));
    sat += row;
  }
  d.write("lin.csv", lin);
  d.write("sat.csv", sat);
  const std::string args = " --input u --output y --excitation " + d.file("two.excite.json") + " -o ";
  const auto a = run_benchid(d, "frf " + d.file("lin.csv") + args + d.file("lin_frf.csv"));
  ASSERT_EQ(a.code, 0) << a.err;
  EXPECT_EQ(a.err.find("not linear"), std::string::npos) << a.err;
  EXPECT_NE(slurp(d.file("lin_frf.csv")).find("linearity check: levels 0.2 and 1, 0 of 40 lines differ"), std::string::npos);
  // the linear plant's FRF is the low-pass itself
  EXPECT_LT(worst_error(d.file("lin_frf.csv"), [&](double f) { return lp.response(f / 1000); }, 40), 1e-6);
  const auto b = run_benchid(d, "frf " + d.file("sat.csv") + args + d.file("sat_frf.csv"));
  ASSERT_EQ(b.code, 0) << b.err;
  EXPECT_NE(b.err.find("the plant is not linear at these levels"), std::string::npos) << b.err;
  EXPECT_NE(slurp(d.file("sat_frf.csv")).find("linearity check: levels 0.2 and 1, 40 of 40 lines differ"), std::string::npos);
  // --levels needs a periodic signal
  const auto bad = run_benchid(d, "excite chirp -q --rate 1000 --f1 100 --duration 1 --levels 0.2,1 -o " + d.file("c.csv"));
  EXPECT_EQ(bad.code, 2);
  EXPECT_NE(bad.err.find("--levels needs"), std::string::npos) << bad.err;
}

// One period of a written signal CSV (the last), and the magnitudes of its
// response through `plant` at each excited line, from a plain DFT.
std::vector<double> last_period(const std::string& csv, int period) {
  std::vector<double> x;
  std::ifstream in(csv);
  for (std::string line; std::getline(in, line);)
    if (!line.empty() && line[0] != '#' && line[0] != 't') x.push_back(std::stod(line.substr(line.find(',') + 1)));
  return std::vector<double>(x.end() - period, x.end());
}
cplx dft(const std::vector<double>& x, int k) {
  cplx s = 0;
  for (std::size_t n = 0; n < x.size(); ++n) s += x[n] * std::polar(1.0, -2 * M_PI * k * static_cast<double>(n) / static_cast<double>(x.size()));
  return 2.0 * s / static_cast<double>(x.size());
}

// Excitation that respects the machine (issue 9): with an earlier FRF of
// the plant, excite predicts the peak response before writing anything,
// refuses a signal above --response-limit, and with --flat-response shapes
// the drive so that every line of the response has the same amplitude.
// The prediction is checked against the exact periodic response of the
// written signal through the plant (its lines are the FRF's lines, so no
// interpolation enters).
TEST(ShapedExcitation, PredictsThePeakRefusesAboveTheLimitAndFlattensTheResponse) {
  TempDir d;
  const std::string rec = write_record(d, "rec.csv", plant, 0, 1.0);
  ASSERT_EQ(run_benchid(d, "frf " + rec + " --input u --output y --periods 4 -q -o " + d.file("plant.csv")).code, 0);
  const std::string base = "excite multisine --rate 1000 --resolution 1 --f0 1 --f1 120 --spacing lin --amplitude 1 "
                           "--plant " + d.file("plant.csv");
  const auto r = run_benchid(d, base + " -o " + d.file("sig.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const auto at = r.err.find("predicted peak response ");
  ASSERT_NE(at, std::string::npos) << r.err;
  const double predicted = std::stod(r.err.substr(at + 24));
  // the exact response of one period of the written signal
  const std::vector<double> u = last_period(d.file("sig.csv"), kPeriod);
  double peak = 0;
  std::vector<cplx> yk(kLines + 1);
  for (int k = 1; k <= kLines; ++k) yk[k] = dft(u, k) * plant(k);
  for (int n = 0; n < kPeriod; ++n) {
    double y = 0;
    for (int k = 1; k <= kLines; ++k) y += std::real(yk[k] * std::polar(1.0, 2 * M_PI * k * n / kPeriod));
    peak = std::max(peak, std::fabs(y));
  }
  EXPECT_NEAR(predicted, peak, 1e-5 * peak);  // printed to 6 digits
  // a limit below the prediction: refused, nothing written, the amplitude that would pass named
  const auto lim = run_benchid(d, base + " --response-limit " + std::to_string(peak / 2) + " -o " + d.file("sig2.csv"));
  EXPECT_EQ(lim.code, 2);
  EXPECT_NE(lim.err.find("exceeds --response-limit"), std::string::npos) << lim.err;
  EXPECT_NE(lim.err.find("expected --amplitude at most 0.5"), std::string::npos) << lim.err;
  EXPECT_FALSE(std::filesystem::exists(d.file("sig2.csv")));
  EXPECT_FALSE(std::filesystem::exists(d.file("sig2.excite.json")));
  // flat response: |U_k H_k| the same on every line
  const auto flat = run_benchid(d, base + " --flat-response -q -o " + d.file("flat.csv"));
  ASSERT_EQ(flat.code, 0) << flat.err;
  EXPECT_NE(flat.err.find("predicted peak response"), std::string::npos);  // printed even with -q
  const std::vector<double> uf = last_period(d.file("flat.csv"), kPeriod);
  double lo = 1e300, hi = 0;
  for (int k = 1; k <= kLines; ++k) {
    const double m = std::abs(dft(uf, k) * plant(k));
    lo = std::min(lo, m), hi = std::max(hi, m);
  }
  EXPECT_LT(20 * std::log10(hi / lo), 0.01);  // flat to 0.01 dB (the signal is printed to 10 digits)
  // a stepped sine: every step's response the same (to the interpolation of
  // H between the FRF's 1 Hz lines, 1 %), and a limit below it refused
  const std::string steps = "excite steps --rate 1000 --f0 2 --f1 100 --count 7 --amplitude 1 --plant " + d.file("plant.csv");
  const auto st = run_benchid(d, steps + " --flat-response --plan " + d.file("plan.json"));
  ASSERT_EQ(st.code, 0) << st.err;
  const auto plan = nlohmann::json::parse(slurp(d.file("plan.json")));
  double r_lo = 1e300, r_hi = 0, a_max = 0;
  for (const auto& step : plan["steps"]) {
    const double resp = step["amplitude"].get<double>() * std::abs(plant(step["freq_hz"].get<double>()));
    r_lo = std::min(r_lo, resp), r_hi = std::max(r_hi, resp);
    a_max = std::max(a_max, step["amplitude"].get<double>());
  }
  EXPECT_LT(r_hi / r_lo, 1.01);
  EXPECT_NEAR(a_max, 1.0, 1e-9);  // the largest step at --amplitude
  const auto st_lim = run_benchid(d, steps + " --response-limit " + std::to_string(r_lo / 2) + " --plan " + d.file("p2.json"));
  EXPECT_EQ(st_lim.code, 2);
  EXPECT_NE(st_lim.err.find("exceeds --response-limit"), std::string::npos) << st_lim.err;
  EXPECT_FALSE(std::filesystem::exists(d.file("p2.json")));
  // PRBS: predicted over its useful band, said to leave out the lines above; refused above a limit
  const auto pr = run_benchid(d, "excite prbs --rate 1000 --order 6 --divider 4 --plant " + d.file("plant.csv") +
                                     " --response-limit 1e-6 -o " + d.file("pr.csv"));
  EXPECT_EQ(pr.code, 2);
  EXPECT_NE(pr.err.find("are left out: an underestimate"), std::string::npos) << pr.err;
  EXPECT_NE(pr.err.find("exceeds --response-limit"), std::string::npos) << pr.err;
  EXPECT_FALSE(std::filesystem::exists(d.file("pr.csv")));
  // a slow sweep: amplitude x the largest |H| over the sweep (quasi-steady), to 1 % (interpolation)
  const auto ch = run_benchid(d, "excite chirp -q --rate 1000 --f0 2 --f1 100 --duration 20 --amplitude 0.5 --plant " +
                                     d.file("plant.csv") + " -o " + d.file("ch.csv"));
  ASSERT_EQ(ch.code, 0) << ch.err;
  double h_max = 0;
  for (double f = 2; f <= 100; f += 0.01) h_max = std::max(h_max, std::abs(plant(f)));
  const auto at_ch = ch.err.find("predicted peak response ");
  ASSERT_NE(at_ch, std::string::npos) << ch.err;
  EXPECT_NEAR(std::stod(ch.err.substr(at_ch + 24)), 0.5 * h_max, 0.01 * 0.5 * h_max);
  // the FRF must cover the signal's band
  const auto wide = run_benchid(d, "excite multisine --rate 1000 --resolution 1 --f0 1 --f1 300 --plant " + d.file("plant.csv") +
                                       " -o " + d.file("w.csv"));
  EXPECT_EQ(wide.code, 2);
  EXPECT_NE(wide.err.find("expected --f0/--f1 within the measured band"), std::string::npos) << wide.err;
}

}  // namespace
