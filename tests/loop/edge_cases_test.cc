// Numerical edge cases of the loop figures: loops with no crossover at all,
// a pure integrator, an undamped resonance (|L| infinite on the axis), a zero
// on the axis (|L| = 0), gains from 1e-9 to 1e9, and the same loop in Hz
// and in kHz. No margin may come out NaN: a margin is a number, or infinite
// when there is no crossing ("none" in the text, null in the JSON). The
// expected values are exact forms (stated beside each check) or the
// scaling laws of the Bode plot (common practice).
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>

#include "fit/model.h"
#include "fit/model_json.h"
#include "ident/frf_csv.h"
#include "loop/controller.h"
#include "loop/margins.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

using namespace benchid::loop;
using benchid::fit::cplx;
using benchid::fit::RationalModel;
using benchid::fit::Zpk;

namespace {

constexpr double kTwoPi = 2 * M_PI;

RationalModel zpk_model(std::vector<cplx> zeros, std::vector<cplx> poles, double k) {
  return benchid::fit::from_zpk(Zpk{std::move(zeros), std::move(poles), k});
}

void expect_no_nan(const Margins& m, const std::string& what) {
  EXPECT_FALSE(std::isnan(m.gain_margin_db)) << what;
  EXPECT_FALSE(std::isnan(m.phase_margin_deg)) << what;
  EXPECT_FALSE(std::isnan(m.delay_margin_s)) << what;
  EXPECT_FALSE(std::isnan(m.ms)) << what;
  EXPECT_FALSE(std::isnan(m.mt)) << what;
  for (const Crossing& c : m.crossings) {
    EXPECT_FALSE(std::isnan(c.freq_hz)) << what;
    EXPECT_FALSE(std::isnan(c.margin)) << what;
  }
}

TEST(LoopEdge, ConstantLoopGainBelowAndAboveOneHasNoCrossing) {
  for (double k : {0.5, 2.0}) {
    RationalModel p;
    p.direct = k;  // a pure gain plant
    const Margins m = model_margins(p, parse_controller("gain:k=1"));
    expect_no_nan(m, "gain " + std::to_string(k));
    EXPECT_TRUE(std::isinf(m.phase_margin_deg));
    EXPECT_TRUE(std::isinf(m.gain_margin_db));
    EXPECT_NEAR(m.ms, 1 / (1 + k), 1e-12);  // |1/(1 + k)| at every frequency
  }
}

TEST(LoopEdge, PureIntegrator) {
  // L = w0/s: crossover w0, PM 90 deg, no phase crossing, delay margin
  // (pi/2)/w0 [exact]; Ms = sup |1/(1 + w0/(j w))| = 1, approached as w grows.
  // A loop of gains and integrators has no pole or zero to set the searched
  // range: with w0 from 1 to 1e6 rad/s the crossover must still be found.
  for (double w0 : {1.0, kTwoPi * 10, 1e6}) {
    RationalModel p;
    p.integrators = 1;
    p.direct = 1;
    char spec[64];
    std::snprintf(spec, sizeof spec, "gain:k=%.17g", w0);
    const Margins m = model_margins(p, parse_controller(spec));
    expect_no_nan(m, spec);
    EXPECT_NEAR(m.crossover_hz, w0 / kTwoPi, 1e-9 * w0) << spec;
    EXPECT_NEAR(m.phase_margin_deg, 90, 1e-6) << spec;
    EXPECT_TRUE(std::isinf(m.gain_margin_db)) << spec;
    EXPECT_NEAR(m.delay_margin_s, (M_PI / 2) / w0, 1e-9 / w0) << spec;
    // the range ends where |L| < 0.01: |S| there >= 1/sqrt(1 + 1e-4)
    EXPECT_NEAR(m.ms, 1.0, 5e-5) << spec;
  }
}

TEST(LoopEdge, UndampedResonanceAndAZeroOnTheAxis) {
  // poles exactly at +-j 2 pi 50 (|L| infinite there) and, in a second loop,
  // zeros exactly at +-j 2 pi 50 (|L| = 0 there, phase undefined)
  const cplx j50(0, kTwoPi * 50);
  const RationalModel undamped = zpk_model({}, {j50, std::conj(j50), -kTwoPi * 5.0}, 1e5);
  const RationalModel notch = zpk_model({j50, std::conj(j50)}, {-kTwoPi * 5.0, -kTwoPi * 200.0, -kTwoPi * 300.0}, 2e3);
  for (const auto& [name, p] : {std::pair{"undamped", undamped}, std::pair{"notch", notch}}) {
    const Margins m = model_margins(p, parse_controller("pid:kp=1,ki=5"));
    expect_no_nan(m, name);
  }
}

TEST(LoopEdge, GainsFromOneNanoToOneGigaShiftOnlyTheGainMargin) {
  // GM(k) = GM(1) - 20 log10 k [exact: the phase crossing does not move]
  const RationalModel p = zpk_model({}, {-1.0, -5.0, -20.0}, 100.0);
  const Margins ref = model_margins(p, parse_controller("gain:k=1"));
  ASSERT_TRUE(std::isfinite(ref.gain_margin_db));
  for (double k : {1e-9, 1e-3, 1e3, 1e9}) {
    RationalModel pk = p;
    for (auto& r : pk.residues) r *= k;
    const Margins m = model_margins(pk, parse_controller("gain:k=1"));
    expect_no_nan(m, "gain " + std::to_string(k));
    // lower_gain_margin_db is the margin when the gain must fall (|L| > 1 at the phase crossing)
    const double gm = std::isfinite(m.gain_margin_db) ? m.gain_margin_db : -m.lower_gain_margin_db;
    EXPECT_NEAR(gm, ref.gain_margin_db - 20 * std::log10(k), 1e-6) << k;
    // the phase crossing itself does not move
    double phase_crossing_hz = NAN;
    for (const Crossing& c : m.crossings)
      if (c.kind == Crossing::Kind::phase) phase_crossing_hz = c.freq_hz;
    EXPECT_NEAR(phase_crossing_hz, ref.gain_margin_hz, 1e-9 * ref.gain_margin_hz) << k;
  }
}

TEST(LoopEdge, TheSameLoopInHertzAndInKilohertz) {
  // every pole and corner x1000: crossover x1000, PM, GM and Ms unchanged,
  // delay margin /1000 (time scaling, common practice)
  const RationalModel slow = zpk_model({}, {-kTwoPi * 2.0, -kTwoPi * 40.0}, 4e3);
  const RationalModel fast = zpk_model({}, {-kTwoPi * 2e3, -kTwoPi * 4e4}, 4e9);
  const Margins a = model_margins(slow, parse_controller("pid:kp=0.5,ki=3,kd=0.002,tf=0.0005"));
  const Margins b = model_margins(fast, parse_controller("pid:kp=0.5,ki=3000,kd=0.000002,tf=0.0000005"));
  expect_no_nan(a, "Hz"), expect_no_nan(b, "kHz");
  EXPECT_NEAR(b.crossover_hz / a.crossover_hz, 1e3, 1e-6);
  EXPECT_NEAR(b.phase_margin_deg, a.phase_margin_deg, 1e-6);
  EXPECT_NEAR(b.ms, a.ms, 1e-8);
  EXPECT_NEAR(b.delay_margin_s * 1e3, a.delay_margin_s, 1e-9 * a.delay_margin_s);
  if (std::isfinite(a.gain_margin_db)) EXPECT_NEAR(b.gain_margin_db, a.gain_margin_db, 1e-6);
  else EXPECT_TRUE(std::isinf(b.gain_margin_db));
}

TEST(LoopEdge, TheCommandNeverPrintsNan) {
  // the same edge plants through `benchid loop`: text and JSON hold no "nan"
  benchid::test::TempDir d;
  RationalModel gain_only;
  gain_only.direct = 0.5;
  RationalModel integ;
  integ.integrators = 1;
  integ.direct = 1;
  const cplx j50(0, kTwoPi * 50);
  const RationalModel undamped = zpk_model({}, {j50, std::conj(j50), -kTwoPi * 5.0}, 1e5);
  int i = 0;
  for (const RationalModel& p : {gain_only, integ, undamped}) {
    const std::string model = d.write("p" + std::to_string(i) + ".json", benchid::fit::model_json(p));
    const std::string out = d.file("l" + std::to_string(i++) + ".json");
    const auto r = benchid::test::run_benchid(d, "loop " + model + " --controller pid:kp=1,ki=5 -o " + out);
    EXPECT_TRUE(r.code == 0 || r.code == 3) << r.err;  // 3: a limit not met
    const std::string text = r.out + r.err + benchid::test::slurp(out);
    for (const char* bad : {"nan", "NaN", "-nan"}) EXPECT_EQ(text.find(bad), std::string::npos) << bad << " in:\n" << text;
  }
}

TEST(LoopEdge, AMeasuredPlantCannotShowACrossoverAboveItsBand) {
  // an FRF of 10/(s/(2 pi 20) + 1) measured from 1 to 200 Hz: with gain
  // 1e6 |L| is still 1e7/|1 + 10 j| = 9.95e5 at 200 Hz, so the crossover lies above the data and
  // the phase margin is unknown, not infinite; with gain 0.5 the crossover
  // (at 20 sqrt(24) Hz = 98 Hz) is inside the band
  benchid::test::TempDir d;
  benchid::ident::Frf f;
  f.rate_hz = 1000, f.averages = 50, f.effective_averages = 50, f.coherence_bound = 0.06;
  for (int k = 0; k < 200; ++k) {
    const double fk = 1 + k;
    f.freq_hz.push_back(fk);
    f.h.push_back(10.0 / cplx(1, fk / 20));
    f.coherence.push_back(0.999);
    f.rel_err.push_back(0.005);
    f.reliable.push_back(1);
  }
  std::ofstream(d.file("plant.csv")) << [&] {
    std::ostringstream o;
    benchid::ident::write_frf_csv(o, f);
    return o.str();
  }();
  const auto high = benchid::test::run_benchid(d, "loop " + d.file("plant.csv") + " --controller gain:k=1e6 -o " + d.file("h.json"));
  ASSERT_EQ(high.code, 0) << high.err;
  EXPECT_NE(high.out.find("phase margin     unknown: |L| = 9.95e+05 at the top of the measured band (200 Hz)"), std::string::npos)
      << high.out;
  EXPECT_NE(high.out.find("[>= 45 deg: FAIL]"), std::string::npos) << high.out;
  EXPECT_NE(high.out.find("verdict: FAIL"), std::string::npos) << high.out;
  EXPECT_NE(benchid::test::slurp(d.file("h.json")).find("\"crossover_above_band\": true"), std::string::npos);
  const auto low = benchid::test::run_benchid(d, "loop " + d.file("plant.csv") + " --controller gain:k=0.5 -o " + d.file("l.json"));
  ASSERT_EQ(low.code, 0) << low.err;
  EXPECT_EQ(low.out.find("unknown"), std::string::npos) << low.out;
  EXPECT_NE(low.out.find("gain crossover       97.98 Hz"), std::string::npos) << low.out;
}

}  // namespace
