// `benchid loop` as a user runs it: table, JSON, verdict and refusals.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>
#include <nlohmann/json.hpp>

#include "fit/model.h"
#include "fit/model_json.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

using benchid::test::Outcome;
using benchid::test::TempDir;

namespace {

Outcome run(const TempDir& d, const std::string& args) { return benchid::test::run_benchid(d, args); }

std::string textbook_plant(const TempDir& d, double band_hi_hz = 10) {
  // 1/(s(s+1)(s+2)) (CHECK_VALUES.md s.5), as if fitted over 0.01..band_hi Hz
  const auto m = benchid::fit::from_zpk(benchid::fit::Zpk{{}, {0.0, -1.0, -2.0}, 1.0});
  benchid::fit::FitSummary fs;
  fs.band_lo_hz = 0.01;
  fs.band_hi_hz = band_hi_hz;
  return d.write("plant.json", benchid::fit::model_json(m, &fs));
}

TEST(LoopCli, TableJsonAndVerdict) {
  TempDir d;
  const std::string p = textbook_plant(d);
  Outcome r = run(d, "loop " + p + " --controller gain:k=1 -o " + d.file("loop.json"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.out.find("gain margin      15.56 dB"), std::string::npos) << r.out;  // 20 log10 6
  EXPECT_NE(r.out.find("phase margin     53.41 deg"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("closed-loop stability: stable"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("verdict: pass"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("CAUTION"), std::string::npos) << r.out;
  const auto j = nlohmann::json::parse(benchid::test::slurp(d.file("loop.json")));
  EXPECT_EQ(j["format"], "benchid.loop/1");
  EXPECT_NEAR(j["gain_margin_db"].get<double>(), 20 * std::log10(6.0), 1e-4);
  EXPECT_EQ(j["closed_loop_stable"], true);
  // K = 4: GM 3.52 dB < 10 dB fails the verdict; --strict makes it exit 3
  r = run(d, "loop " + p + " --controller gain:k=4 --strict");
  EXPECT_EQ(r.code, 3) << r.out;
  EXPECT_NE(r.out.find("[>= 10 dB: FAIL]"), std::string::npos) << r.out;
  // K = 8: unstable
  r = run(d, "loop " + p + " --controller gain:k=8 --json");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_EQ(nlohmann::json::parse(r.out)["closed_loop_stable"], false);
  EXPECT_NE(r.err.find("UNSTABLE"), std::string::npos) << r.err;
}

TEST(LoopCli, InfiniteGainMarginIsNullAndOutOfBandFiguresAreFlagged) {
  TempDir d;
  // 4/(s+1)^2 has no phase crossover: GM infinite -> null (DESIGN.md)
  const auto m = benchid::fit::from_zpk(benchid::fit::Zpk{{}, {-1.0, -1.5}, 6.0});
  d.write("p2.json", benchid::fit::model_json(m));
  Outcome r = run(d, "loop " + d.file("p2.json") + " --controller gain:k=1 --json");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_TRUE(nlohmann::json::parse(r.out)["gain_margin_db"].is_null());
  // a model fitted only up to 0.1 Hz cannot vouch for a crossover at 0.07 Hz... and not at 0.23 Hz
  r = run(d, "loop " + textbook_plant(d, 0.1) + " --controller gain:k=1");
  EXPECT_NE(r.out.find("WARNING: outside the model's fitted band"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("verdict: FAIL"), std::string::npos) << r.out;
}

TEST(LoopCli, FrfPlantGivesMarginsWithUncertainty) {
  // the textbook plant as a measured FRF with 1 % error per line
  TempDir d;
  std::string s = "# benchid frf 1\nfreq_hz,re,im,rel_err,reliable\n";
  char b[128];
  for (int k = 0; k < 1500; ++k) {
    const double f = 1e-3 * std::pow(1e4, k / 1499.0);
    const std::complex<double> sj(0, 2 * M_PI * f), h = 1.0 / (sj * (sj + 1.0) * (sj + 2.0));
    std::snprintf(b, sizeof b, "%.12g,%.12g,%.12g,0.01,1\n", f, h.real(), h.imag());
    s += b;
  }
  d.write("plant_frf.csv", s);
  const Outcome r = run(d, "loop " + d.file("plant_frf.csv") + " --controller gain:k=1 --plant-integrators 1 --json");
  ASSERT_EQ(r.code, 0) << r.err;
  const auto j = nlohmann::json::parse(r.out);
  EXPECT_EQ(j["plant_kind"], "frf");
  EXPECT_NEAR(j["phase_margin_deg"].get<double>(), 53.4108, 2e-3);  // CHECK_VALUES.md s.5, interpolation ~1e-5
  EXPECT_GT(j["uncertainty"]["phase_margin_sd_deg"].get<double>(), 0.0);
  EXPECT_EQ(j["closed_loop_stable"], true);
  EXPECT_NE(r.err.find("(inferred)"), std::string::npos) << r.err;
}

TEST(LoopCli, StepMetricsAndSweep) {
  TempDir d;
  // L = 1/(s(s+1)(s+2)): T = 1/(s^3 + 3 s^2 + 2 s + 1), OS 14.462 %, t_r 2.677 s,
  // t_s 12.360 s (CHECK_VALUES.md s.6)
  const std::string p = textbook_plant(d);
  Outcome r = run(d, "loop " + p + " --controller gain:k=1 --json");
  ASSERT_EQ(r.code, 0) << r.err;
  const auto j = nlohmann::json::parse(r.out);
  EXPECT_NEAR(j["step"]["overshoot_pct"].get<double>(), 14.462, 0.02);
  EXPECT_NEAR(j["step"]["rise_time_s"].get<double>(), 2.677, 0.005);
  EXPECT_NEAR(j["step"]["settling_time_s"].get<double>(), 12.360, 0.02);
  // unstable: no step metrics
  r = run(d, "loop " + p + " --controller gain:k=8 --json");
  EXPECT_TRUE(nlohmann::json::parse(r.out)["step"].is_null());
  // the everyday question: how much gain can I add? GM = 20 log10(6/k) [D]
  r = run(d, "loop " + p + " --controller gain:k=1 --sweep k=1:7:4");
  ASSERT_EQ(r.code, 0) << r.err;
  auto row = [&](const std::string& k) {
    const auto at = r.out.find("\n  " + k + " ");
    return at == std::string::npos ? std::string() : r.out.substr(at + 1, r.out.find('\n', at + 1) - at - 1);
  };
  EXPECT_NE(row("1").find(" 15.6 "), std::string::npos) << r.out;      // 20 log10 6 = 15.56
  EXPECT_NE(row("3").find(" 6.02 "), std::string::npos) << r.out;      // 20 log10 2
  EXPECT_NE(row("7").find(" -1.34 "), std::string::npos) << r.out;     // 20 log10(6/7): the gain must fall
  EXPECT_NE(row("7").find("UNSTABLE"), std::string::npos) << r.out;
  d.write("ctrl.json", "{\"format\": \"benchid.controller/1\", \"spec\": \"gain:k=3\"}");
  r = run(d, "loop " + p + " --controller " + d.file("ctrl.json") + " --json");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NEAR(nlohmann::json::parse(r.out)["gain_margin_db"].get<double>(), 20 * std::log10(2.0), 1e-4);
  r = run(d, "loop " + p + " --controller gain:k=1 --sweep kp=1:2:3");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("has no parameter 'kp'"), std::string::npos) << r.err;
}

TEST(LoopCli, TrackingErrorAndALoopWithoutCrossover) {
  TempDir d;
  // 100/(s/10 + 1) with a unit controller: |L| = 100 at low frequency leaves
  // 1/(1 + 100) = 0.990 % (CHECK_VALUES.md s.9 [D]) at 0.01 Hz
  d.write("p100.json", benchid::fit::model_json(benchid::fit::from_zpk(benchid::fit::Zpk{{}, {-10.0}, 1000.0})));
  Outcome r = run(d, "loop " + d.file("p100.json") + " --controller gain:k=1 --tracking-hz 0.01 --json");
  ASSERT_EQ(r.code, 0) << r.err;
  auto j = nlohmann::json::parse(r.out);
  EXPECT_NEAR(j["tracking_error"]["fraction"].get<double>(), 1 / 101.0, 1e-5);
  // 0.5/(s + 1): |L| < 1 everywhere: no gain crossover, phase margin infinite (null)
  d.write("small.json", benchid::fit::model_json(benchid::fit::from_zpk(benchid::fit::Zpk{{}, {-1.0}, 0.5})));
  r = run(d, "loop " + d.file("small.json") + " --controller gain:k=1 --json");
  ASSERT_EQ(r.code, 0) << r.err;
  j = nlohmann::json::parse(r.out);
  EXPECT_TRUE(j["phase_margin_deg"].is_null());
  EXPECT_TRUE(j["gain_margin_db"].is_null());
  EXPECT_EQ(j["closed_loop_stable"], true);
  EXPECT_NE(r.err.find("infinite (no gain crossover)"), std::string::npos) << r.err;
}

TEST(LoopCli, RefusesWhatItCannotAnalyse) {
  TempDir d;
  const std::string p = textbook_plant(d);
  Outcome r = run(d, "loop " + p);
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("no controller"), std::string::npos) << r.err;
  r = run(d, "loop " + p + " --controller pid:kp=1,kd=2");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("improper"), std::string::npos) << r.err;
  d.write("frf.csv", "# benchid frf 1\nfreq_hz,re,im\n1,1,0\n");
  r = run(d, "loop " + d.file("frf.csv") + " --controller gain:k=1");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("expected at least 4 for loop figures"), std::string::npos) << r.err;
}

// Worst case over plants (issue 9): the same controller on k/(s(s+1)(s+2))
// with k = 1, 2 and 4 (a load that raises the gain). Each worst figure must
// equal the minimum (Ms: the maximum) over single-plant runs, naming its
// plant; the smallest gain margin is the largest k's, since the phase
// crossing does not move with k and |L| there grows with it.
TEST(LoopCli, WorstCaseOverPlantsIsTheWorstOfTheSingleRuns) {
  TempDir d;
  std::vector<std::string> plants;
  for (double k : {1.0, 4.0, 2.0}) {
    const auto m = benchid::fit::from_zpk(benchid::fit::Zpk{{}, {0.0, -1.0, -2.0}, k});
    plants.push_back(d.write("k" + std::to_string(static_cast<int>(k)) + ".json", benchid::fit::model_json(m)));
  }
  double gm_min = 1e300, pm_min = 1e300, dm_min = 1e300, ms_max = -1e300;
  std::string gm_plant, ms_plant;
  for (const auto& p : plants) {
    const Outcome r = run(d, "loop " + p + " --controller pid:kp=0.5,ki=0.05 --json");
    ASSERT_EQ(r.code, 0) << r.err;
    const auto j = nlohmann::json::parse(r.out);
    if (j["gain_margin_db"].get<double>() < gm_min) gm_min = j["gain_margin_db"].get<double>(), gm_plant = p;
    pm_min = std::min(pm_min, j["phase_margin_deg"].get<double>());
    dm_min = std::min(dm_min, j["delay_margin_s"].get<double>());
    if (j["peak_sensitivity_db"].get<double>() > ms_max) ms_max = j["peak_sensitivity_db"].get<double>(), ms_plant = p;
  }
  const Outcome r = run(d, "loop " + plants[0] + " " + plants[1] + " " + plants[2] +
                               " --controller pid:kp=0.5,ki=0.05 --strict -o " + d.file("wc.json"));
  const auto j = nlohmann::json::parse(benchid::test::slurp(d.file("wc.json")));
  const auto& w = j["worst_case"];
  EXPECT_EQ(w["gain_margin_db"]["value"].get<double>(), gm_min);
  EXPECT_EQ(w["gain_margin_db"]["plant"], gm_plant);
  EXPECT_EQ(gm_plant, plants[1]);  // k = 4
  EXPECT_EQ(w["phase_margin_deg"]["value"].get<double>(), pm_min);
  EXPECT_EQ(w["delay_margin_s"]["value"].get<double>(), dm_min);
  EXPECT_EQ(w["peak_sensitivity_db"]["value"].get<double>(), ms_max);
  EXPECT_EQ(w["peak_sensitivity_db"]["plant"], ms_plant);
  EXPECT_EQ(j["plants"].size(), 3u);
  EXPECT_NE(r.out.find("worst gain margin   " ), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("(" + plants[1] + ")"), std::string::npos) << r.out;
  // the verdict passes only when every plant passes: k = 4 fails GM >= 10 dB
  EXPECT_EQ(w["pass"], false);
  EXPECT_EQ(r.code, 3);  // --strict
  // with --sweep, one plant only
  const Outcome sw = run(d, "loop " + plants[0] + " " + plants[1] + " --controller gain:k=1 --sweep k=0.5:2:3");
  EXPECT_EQ(sw.code, 2);
  EXPECT_NE(sw.err.find("--sweep takes one plant"), std::string::npos) << sw.err;
}

}  // namespace
