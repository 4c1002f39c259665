// benchid tune as a user runs it: a proposal that `benchid loop` then passes,
// a controller JSON `loop` reads, exit 1 with the best achievable when no
// controller meets the targets, exit 2 for bad options, discrete sections.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <string>
#include <nlohmann/json.hpp>

#include "fit/model.h"
#include "fit/model_json.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

namespace {

using benchid::test::Outcome;
using benchid::test::TempDir;

Outcome run(const TempDir& d, const std::string& args) { return benchid::test::run_benchid(d, args); }

// 1/(1 + s/(2 pi 5)) e^{-0.01 s}, fitted band 0.1 to 100 Hz (a drive's speed loop, invented)
std::string plant(const TempDir& d, double delay_s = 0.01) {
  benchid::fit::RationalModel m = benchid::fit::from_zpk({{}, {benchid::fit::cplx(-2 * M_PI * 5, 0)}, 2 * M_PI * 5});
  m.delay_s = delay_s;
  benchid::fit::FitSummary s;
  s.band_lo_hz = 0.1;
  s.band_hi_hz = 100;
  s.order = 1;
  const std::string p = d.file("plant.model.json");
  std::ofstream(p) << benchid::fit::model_json(m, &s);
  return p;
}

TEST(TuneCli, ProposalPassesLoopAndJsonIsAController) {
  TempDir d;
  const std::string p = plant(d), out = d.file("pid.json");
  const Outcome t = run(d, "tune " + p + " --structure pid -o " + out);
  ASSERT_EQ(t.code, 0) << t.err;
  EXPECT_NE(t.out.find("CAUTION"), std::string::npos);
  EXPECT_NE(t.out.find("MIGO"), std::string::npos);
  const nlohmann::json j = nlohmann::json::parse(benchid::test::slurp(out));
  EXPECT_EQ(j["format"], "benchid.controller/1");
  EXPECT_GE(j["achieved"]["phase_margin_deg"].get<double>(), 45);
  EXPECT_TRUE(j["loop_verdict_pass"].get<bool>());
  // the controller file goes straight into loop, whose verdict passes
  const Outcome l = run(d, "loop " + p + " --controller " + out + " --strict");
  EXPECT_EQ(l.code, 0) << l.out << l.err;
  EXPECT_NE(l.out.find("verdict: pass"), std::string::npos);
  // a second run may replace its own output, never the plant
  EXPECT_EQ(run(d, "tune " + p + " -o " + out).code, 0);
  const Outcome same = run(d, "tune " + p + " -o " + p);
  EXPECT_EQ(same.code, 2);
}

TEST(TuneCli, NoSolutionExitsOneWithBestAchievable) {
  TempDir d;
  const std::string p = plant(d, 0.2);  // 200 ms of delay: no 5 Hz crossover with 45 deg
  const Outcome t = run(d, "tune " + p + " --structure pi --min-crossover 3");
  EXPECT_EQ(t.code, 1);
  EXPECT_NE(t.err.find("no pi controller meets"), std::string::npos) << t.err;
  EXPECT_NE(t.err.find("best achievable"), std::string::npos) << t.err;
  // 50 ms: at a 5 Hz crossover the delay lags 90 deg and the plant 45 deg, so
  // a PI (which only adds lag) leaves less than 45 deg: stable loops exist,
  // the closest is named with what it misses
  const std::string p2 = plant(d, 0.05);
  const Outcome t2 = run(d, "tune " + p2 + " --structure pi --min-crossover 5");
  EXPECT_EQ(t2.code, 1);
  EXPECT_NE(t2.err.find("closest to all targets: pid:"), std::string::npos) << t2.err;
  EXPECT_NE(t2.err.find("fails on: PM below target"), std::string::npos) << t2.err;
}

TEST(TuneCli, BadOptionsExitTwo) {
  TempDir d;
  const std::string p = plant(d);
  for (const std::string bad : {"--structure pd", "--objective fastest", "--pm-min 120", "--notch f=10,width=30",
                                "--notch f=10,width=5,depth=20,q=3", "--dt -1"}) {
    const Outcome t = run(d, "tune " + p + " " + bad);
    EXPECT_EQ(t.code, 2) << bad << ": " << t.err;
    EXPECT_NE(t.err.find("benchid: error:"), std::string::npos) << bad;
  }
}

TEST(TuneCli, DiscretePrintsSectionsAndDifferenceEquation) {
  TempDir d;
  const std::string p = plant(d);
  const Outcome t = run(d, "tune " + p + " --structure pi --dt 0.001 --compute-delay 0.001 --json");
  ASSERT_EQ(t.code, 0) << t.err;
  const nlohmann::json j = nlohmann::json::parse(t.out);
  ASSERT_TRUE(j["discrete"].is_object());
  EXPECT_EQ(j["discrete"]["sections"].size(), 1u);
  // a PI by Tustin: a pole at z = 1 (a1 = -1), and b0 + b1 = ki dt (its integrator's step)
  const auto& s = j["discrete"]["sections"][0];
  EXPECT_DOUBLE_EQ(s[4].get<double>(), -1.0);
  EXPECT_NEAR(s[0].get<double>() + s[1].get<double>(), j["parameters"]["ki"].get<double>() * 0.001, 1e-12);
  EXPECT_NE(t.err.find("u[k] ="), std::string::npos);
  EXPECT_NE(t.err.find("anti-windup"), std::string::npos);
}

}  // namespace
