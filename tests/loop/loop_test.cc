// Controllers from specs, and margins against the values of
// ../shared/reference/CHECK_VALUES.md section 5 (SciPy dense grid + root
// refinement, exact forms where given) and the Ms bounds of Astrom & Murray.
#include <gtest/gtest.h>

#include <cmath>

#include "fit/discretize.h"
#include "ident/error.h"
#include "loop/controller.h"
#include "loop/margins.h"
#include "tests/support/expect_close.h"

using namespace benchid::loop;
using benchid::fit::cplx;
using benchid::fit::RationalModel;
using benchid::fit::Zpk;

namespace {

constexpr double kTwoPi = 2 * M_PI;

RationalModel plant(std::vector<cplx> poles, double k, double delay_s = 0) {
  RationalModel m = benchid::fit::from_zpk(Zpk{{}, poles, k});
  m.delay_s = delay_s;
  return m;
}

struct Case {
  const char* name;
  std::vector<cplx> poles;
  double k, delay;
  double wc, pm, w180, gm_db, dm, ms;  // CHECK_VALUES.md s.5 [S]; gm_db inf when none
};
void PrintTo(const Case& c, std::ostream* os) { *os << c.name; }

class TextbookLoops : public ::testing::TestWithParam<Case> {};

TEST_P(TextbookLoops, MarginsMatchCheckValues) {
  const Case& c = GetParam();
  // the loop in product form k e^{-sT} / prod(s - p), exact for repeated poles
  const LoopFn loop = [&](double f) {
    const cplx s(0, kTwoPi * f);
    cplx v = c.k * std::exp(-s * c.delay);
    for (const cplx& p : c.poles) v /= s - p;
    return v;
  };
  const Margins m = margins(loop, 1e-4, 1e3, 20000);
  // the table prints 6-7 significant digits: tolerances of one unit there
  EXPECT_NEAR(m.crossover_hz * kTwoPi, c.wc, 2e-6 * c.wc);
  EXPECT_NEAR(m.phase_margin_deg, c.pm, 1e-4);
  if (std::isinf(c.gm_db)) {
    EXPECT_TRUE(std::isinf(m.gain_margin_db));
  } else {
    EXPECT_NEAR(m.gain_margin_hz * kTwoPi, c.w180, 1e-6 * c.w180);
    EXPECT_NEAR(m.gain_margin_db, c.gm_db, 1e-4);
  }
  EXPECT_NEAR(m.delay_margin_s, c.dm, 1e-6 * c.dm + 1e-6);
  EXPECT_NEAR(m.ms, c.ms, 1e-5 * c.ms);
  // Astrom & Murray: |1 + L| >= 1/Ms gives GM >= Ms/(Ms - 1), PM >= 2 asin(1/(2 Ms)) [D]
  EXPECT_GE(std::pow(10.0, m.gain_margin_db / 20), m.ms / (m.ms - 1) * (1 - 1e-9));
  EXPECT_GE(m.phase_margin_deg, 2 * std::asin(1 / (2 * m.ms)) * 180 / M_PI - 1e-9);
}

const double kInf = std::numeric_limits<double>::infinity();
INSTANTIATE_TEST_SUITE_P(
    CheckValues5, TextbookLoops,
    ::testing::Values(
        Case{"K1_s_s1_s2", {0.0, -1.0, -2.0}, 1, 0, 0.445748, 53.4108, std::sqrt(2.0), 20 * std::log10(6.0), 2.091303, 1.56838},
        Case{"K2_s_s1_s2", {0.0, -1.0, -2.0}, 2, 0, 0.749368, 32.6131, std::sqrt(2.0), 20 * std::log10(3.0), 0.759581, 2.31231},
        Case{"K4_s_s1_s2", {0.0, -1.0, -2.0}, 4, 0, 1.143203, 11.4250, std::sqrt(2.0), 20 * std::log10(1.5), 0.174425, 5.87516},
        Case{"K10_s_s1_s5", {0.0, -1.0, -5.0}, 10, 0, 1.227064, 25.3898, std::sqrt(5.0), 20 * std::log10(3.0), 0.361135, 2.71558},
        Case{"K4_s1sq", {-1.0, -1.0}, 4, 0, std::sqrt(3.0), 60.0, 0, kInf, 0.604600, std::sqrt(2.0)},
        Case{"K4_s1cube", {-1.0, -1.0, -1.0}, 4, 0, 1.232819, 27.1416, std::sqrt(3.0), 20 * std::log10(2.0), 0.384250, 3.0},
        Case{"delay_over_s", {0.0}, 1, 0.5, 1.0, 61.3521, M_PI, 20 * std::log10(M_PI), M_PI / 2 - 0.5, 1.59049}),
    [](const auto& i) { return std::string(i.param.name); });
TEST(Margins, ModelPlantGivesTheSameMarginsAsItsFormula) {
  // 10/(s(s+1)(s+5)) as a fitted-model plant (pole-residue form) and a
  // controller from a spec: the same figures as the product form above
  const Margins m = model_margins(plant({0.0, -1.0, -5.0}, 10.0), parse_controller("gain:k=1"));
  EXPECT_NEAR(m.crossover_hz * kTwoPi, 1.227064, 2e-6);
  EXPECT_NEAR(m.phase_margin_deg, 25.3898, 1e-4);
  EXPECT_NEAR(m.gain_margin_db, 20 * std::log10(3.0), 1e-4);
  EXPECT_NEAR(m.ms, 2.71558, 3e-5);
}

TEST(Margins, StandardSecondOrderLoopFollowsTheExactPhaseMarginFormula) {
  // L = wn^2/(s(s + 2 zeta wn)): wc/wn = sqrt(sqrt(1 + 4 zeta^4) - 2 zeta^2),
  // PM = atan(2 zeta / (wc/wn)) [D], tabulated in CHECK_VALUES.md s.5
  const double zeta_pm[][2] = {{0.1, 11.421}, {0.3, 33.272}, {0.5, 51.827}, {0.7071, 65.530}, {1.0, 76.345}};
  for (const auto& [zeta, pm_table] : zeta_pm) {
    const double wn = 3.0;
    const Margins m = model_margins(plant({0.0, -2 * zeta * wn}, wn * wn), parse_controller("gain:k=1"));
    const double x = std::sqrt(std::sqrt(1 + 4 * std::pow(zeta, 4)) - 2 * zeta * zeta);
    EXPECT_NEAR(m.crossover_hz * kTwoPi / wn, x, 1e-9) << zeta;
    EXPECT_NEAR(m.phase_margin_deg, std::atan(2 * zeta / x) * 180 / M_PI, 1e-7) << zeta;
    EXPECT_NEAR(m.phase_margin_deg, pm_table, 1e-3) << zeta;  // printed to 3 decimals
    EXPECT_TRUE(std::isinf(m.gain_margin_db));
  }
}

TEST(Margins, ZohDiscretisedPlantMatchesCheckValues) {
  // ZOH of 1/(s(s+1)), Ts = 0.1 s, unity gain: wc 0.7860, PM 49.58 deg,
  // w180 4.4357, GM 26.17 dB, Ms 1.5377 (CHECK_VALUES.md s.5 [S]; 0.01 deg / 0.01 dB)
  benchid::fit::DiscretizeOptions o;
  o.sample_time_s = 0.1;
  const RationalModel pz = benchid::fit::discretize(plant({0.0, -1.0}, 1.0), o).model;
  const Margins m = model_margins(pz, parse_controller("gain:k=1"));
  EXPECT_NEAR(m.crossover_hz * kTwoPi, 0.7860, 5e-5);
  EXPECT_NEAR(m.phase_margin_deg, 49.58, 0.01);
  EXPECT_NEAR(m.gain_margin_hz * kTwoPi, 4.4357, 5e-5);
  EXPECT_NEAR(m.gain_margin_db, 26.17, 0.01);
  EXPECT_NEAR(m.ms, 1.5377, 5e-5);
}

TEST(Margins, TrackingErrorFactOfTheTrade) {
  // |S| = 1/|1 + L|: a loop gain of 100 leaves about 1 % error (1/(1 + 100) = 0.990 %,
  // CHECK_VALUES.md s.9 [D]); here a proportional loop on a first-order plant at DC
  const RationalModel p = plant({-1.0}, 1.0);
  const Controller c = parse_controller("gain:k=100");
  const cplx l = p.response(1e-6) * c.model.response(1e-6);
  EXPECT_NEAR(std::abs(1.0 / (1.0 + l)), 1 / 101.0, 1e-9);
}

TEST(Controller, PidWithFilterIsTheParallelForm) {
  // kp + ki/s + kd s/(tf s + 1) at a few frequencies [D]
  const Controller c = parse_controller("pid:kp=2,ki=10,kd=0.05,tf=0.002");
  for (double f : {0.1, 5.0, 80.0, 2000.0}) {
    const cplx s(0, kTwoPi * f);
    EXPECT_CLOSE(c.model.response(f), 2.0 + 10.0 / s + 0.05 * s / (0.002 * s + 1.0), 1e-12) << f;
  }
  EXPECT_CLOSE(parse_controller("pid:kp=3").model.response(7.0), cplx(3.0), 1e-15);
}

TEST(Controller, FormsAndProductsFollowTheGrammar) {
  // poly:num=0.02,1;den=1,0 is (0.02 s + 1)/s (DESIGN.md)
  const Controller p = parse_controller("poly:num=0.02,1;den=1,0");
  const cplx s(0, kTwoPi * 3.0);
  EXPECT_CLOSE(p.model.response(3.0), (0.02 * s + 1.0) / s, 1e-12);
  // lead: k (s/wz + 1)/(s/wp + 1); notch: depth at its centre; roots with a complex pair
  const Controller l = parse_controller("lead:z=10,p=100,k=2");
  EXPECT_NEAR(std::abs(l.model.response(1e-6)), 2.0, 1e-9);
  EXPECT_NEAR(std::abs(l.model.response(1e6)), 20.0, 1e-3);
  const Controller n = parse_controller("notch:f=50,width=10,depth=20");
  EXPECT_NEAR(20 * std::log10(std::abs(n.model.response(50))), -20.0, 1e-9);
  EXPECT_NEAR(std::abs(n.model.response(0.01)), 1.0, 1e-6);
  const Controller r = parse_controller("roots:zeros=-5;poles=-1+2j,-30;k=4");
  const cplx s2(0, kTwoPi * 0.7);
  EXPECT_CLOSE(r.model.response(0.7), 4.0 * (s2 + 5.0) / ((s2 - cplx(-1, 2)) * (s2 - cplx(-1, -2)) * (s2 + 30.0)), 1e-12);
  // a product multiplies
  const Controller pr = parse_controller("gain:k=3*lead:z=10,p=100");
  EXPECT_CLOSE(pr.model.response(20), 3.0 * l.model.response(20) / 2.0, 1e-12);
  // @dt: Tustin, exact at DC, delay carried
  const Controller d = parse_controller("pid:kp=1,ki=5,kd=0.01,tf=0.001@dt=0.0005,delay=0.0005");
  EXPECT_EQ(d.model.domain, benchid::fit::Domain::z);
  EXPECT_DOUBLE_EQ(d.model.delay_s, 0.0005);
  // half a sample of computation delay stays half a sample: 0.25 ms is
  // 9 deg at 100 Hz on top of the controller's own phase
  const Controller h = parse_controller("pid:kp=1,ki=5,kd=0.01,tf=0.001@dt=0.0005,delay=0.00025");
  EXPECT_DOUBLE_EQ(h.model.delay_s, 0.00025);
  const Controller h0 = parse_controller("pid:kp=1,ki=5,kd=0.01,tf=0.001@dt=0.0005");
  EXPECT_NEAR(std::arg(h.model.response(100) / h0.model.response(100)) * 180 / M_PI, -9.0, 1e-9);
}

TEST(Controller, BadSpecsAreRefusedNamingTheProblem) {
  auto msg = [](const std::string& spec) {
    try {
      parse_controller(spec);
    } catch (const benchid::InputError& e) {
      return std::string(e.what());
    }
    return std::string("(no error)");
  };
  EXPECT_NE(msg("pidd:kp=1").find("form 'pidd' is unknown"), std::string::npos);
  EXPECT_NE(msg("lead:z=10").find("missing parameter 'p'"), std::string::npos);
  EXPECT_NE(msg("pid:kp=1,kd=0.1").find("without a derivative filter is improper"), std::string::npos);
  EXPECT_NE(msg("gain:k=abc").find("'abc' is not a number"), std::string::npos);
  EXPECT_NE(msg("pid:kp=1@dt=-0.1").find("dt and delay must be >= 0"), std::string::npos);
  EXPECT_NE(msg("poly:num=1,2,3;den=1,0").find("expected a proper controller"), std::string::npos);
  EXPECT_NE(msg("poly:num=1;den=0").find("the denominator is zero"), std::string::npos);
  EXPECT_NE(msg("gain:k=1,x=2").find("unknown parameter 'x'"), std::string::npos);
  EXPECT_NE(msg("").find("empty"), std::string::npos);
}

}  // namespace

#include "loop/stability.h"

namespace {

TEST(Stability, TextbookLoopIsStableBelowGainSixAndNotAbove) {
  // K/(s(s+1)(s+2)): |L(j sqrt2)| = K/6, marginal at K = 6 [D]; K = 1 closed-loop
  // poles -2.324718, -0.337641 +- 0.562280j (CHECK_VALUES.md s.5 [S])
  const RationalModel p = plant({0.0, -1.0, -2.0}, 1.0);
  const Stability s1 = closed_loop_stability(p, parse_controller("gain:k=1"), 1e-5, 1e3);
  ASSERT_TRUE(s1.judged) << s1.reason;
  EXPECT_TRUE(s1.stable);
  EXPECT_EQ(s1.nyquist_unstable, 0);
  ASSERT_EQ(s1.closed_loop_poles.size(), 3u);
  double worst = 0;
  for (const cplx& want : {cplx(-2.324718), cplx(-0.337641, 0.562280), cplx(-0.337641, -0.562280)}) {
    double best = 1e9;
    for (const cplx& q : s1.closed_loop_poles) best = std::min(best, std::abs(q - want));
    worst = std::max(worst, best);
  }
  EXPECT_LT(worst, 1e-6);  // printed to 6 decimals
  const Stability s8 = closed_loop_stability(p, parse_controller("gain:k=8"), 1e-5, 1e3);
  ASSERT_TRUE(s8.judged) << s8.reason;
  EXPECT_FALSE(s8.stable);
  EXPECT_EQ(s8.nyquist_unstable, 2);
}

TEST(Stability, UnstablePlantStabilisedByTheController) {
  // P = 1/(s - 1): closed loop s - 1 + k, stable for k > 1 [D]; the Nyquist
  // count must see the one open-loop unstable pole
  const RationalModel p = plant({1.0}, 1.0);
  const Stability a = closed_loop_stability(p, parse_controller("gain:k=3"), 1e-4, 1e4);
  ASSERT_TRUE(a.judged) << a.reason;
  EXPECT_EQ(a.open_loop_unstable, 1);
  EXPECT_TRUE(a.stable);
  const Stability b = closed_loop_stability(p, parse_controller("gain:k=0.5"), 1e-4, 1e4);
  ASSERT_TRUE(b.judged) << b.reason;
  EXPECT_FALSE(b.stable);
}

TEST(Stability, DelayLoopByNyquistAlone) {
  // k e^{-0.5 s}/s: GM = pi/(2 k T) [D] -> stable for k < pi, unstable above
  const RationalModel p = plant({0.0}, 1.0, 0.5);
  const Stability a = closed_loop_stability(p, parse_controller("gain:k=1"), 1e-5, 1e3);
  ASSERT_TRUE(a.judged) << a.reason;
  EXPECT_FALSE(a.poles_available);  // a delay: no finite closed-loop pole set
  EXPECT_TRUE(a.stable);
  const Stability b = closed_loop_stability(p, parse_controller("gain:k=4"), 1e-5, 1e3);
  ASSERT_TRUE(b.judged) << b.reason;
  EXPECT_FALSE(b.stable);
}

TEST(Stability, DiscreteLoopEitherSideOfItsGainMargin) {
  // ZOH of 1/(s(s+1)), Ts = 0.1: GM 26.17 dB = x20.3 (CHECK_VALUES.md s.5)
  benchid::fit::DiscretizeOptions o;
  o.sample_time_s = 0.1;
  const RationalModel pz = benchid::fit::discretize(plant({0.0, -1.0}, 1.0), o).model;
  const Stability a = closed_loop_stability(pz, parse_controller("gain:k=1@dt=0.1"), 0, 0);
  ASSERT_TRUE(a.judged) << a.reason;
  EXPECT_TRUE(a.stable);
  const Stability b = closed_loop_stability(pz, parse_controller("gain:k=25@dt=0.1"), 0, 0);
  ASSERT_TRUE(b.judged) << b.reason;
  EXPECT_FALSE(b.stable);
  // a discrete controller on a continuous plant is not judged here
  EXPECT_FALSE(closed_loop_stability(plant({-1.0}, 1.0), parse_controller("gain:k=1@dt=0.1"), 1e-3, 4).judged);
}

}  // namespace

#include "loop/frf_loop.h"

namespace {

benchid::ident::Frf dense_frf(const RationalModel& m, double eps) {
  benchid::ident::Frf f;
  for (int k = 0; k < 2000; ++k) {
    const double fr = 1e-3 * std::pow(1e5, k / 1999.0);  // 1 mHz .. 100 Hz
    f.freq_hz.push_back(fr);
    f.h.push_back(m.response(fr));
    f.rel_err.push_back(eps);
    f.reliable.push_back(1);
  }
  return f;
}

TEST(FrfLoop, ExactFrfSampledDenselyGivesTheModelMargins) {
  // issue 5: the same loop as a model and as its FRF. 2000 lines over five
  // decades: linear interpolation of ln|H| and phase in ln f errs by
  // ~(d ln f)^2/8 x curvature ~ 1e-5: PM to 1e-3 deg, GM to 1e-3 dB
  const RationalModel p = plant({0.0, -1.0, -5.0}, 10.0);
  const Controller c = parse_controller("gain:k=1");
  const Margins mm = model_margins(p, c);
  FrfLoopOptions o;
  o.draws = 0;
  o.plant_integrators = 1;
  const FrfMargins fm = frf_margins(dense_frf(p, 0.0), c, o);
  EXPECT_NEAR(fm.nominal.phase_margin_deg, mm.phase_margin_deg, 1e-3);
  EXPECT_NEAR(fm.nominal.gain_margin_db, mm.gain_margin_db, 1e-3);
  EXPECT_NEAR(fm.nominal.crossover_hz, mm.crossover_hz, 1e-4 * mm.crossover_hz);
  EXPECT_NEAR(fm.nominal.ms, mm.ms, 1e-4 * mm.ms);
  EXPECT_EQ(fm.inferred_unstable, 0) << fm.stability_note;
  // K = 10 x 3 = 30 > 30: 10/(s(s+1)(s+5)) is marginal at gain 3 (GM 9.54 dB)
  EXPECT_EQ(frf_margins(dense_frf(p, 0.0), parse_controller("gain:k=4"), o).inferred_unstable, 2);
  // a discrete PI: Tustin maps the integrator at s = 0 to a pole at z = 1
  // (common practice), which counts as one in the Nyquist count: the same
  // verdict as the continuous PI, stable (PM about 28 deg at 0.16 Hz)
  const FrfMargins cpi = frf_margins(dense_frf(p, 0.0), parse_controller("pid:kp=0.5,ki=0.05"), o);
  const FrfMargins dpi = frf_margins(dense_frf(p, 0.0), parse_controller("pid:kp=0.5,ki=0.05@dt=0.001"), o);
  EXPECT_EQ(cpi.inferred_unstable, 0) << cpi.stability_note;
  EXPECT_EQ(dpi.inferred_unstable, 0) << dpi.stability_note;
  // the plant's integrator not declared: at the band's bottom the plant's
  // phase is -90.4 deg, more than the lags and delay the continuation below
  // the band stands for, and a gain-only loop has no integrator to make |L|
  // large there: no verdict, and the note says what to declare
  o.plant_integrators = 0;
  const FrfMargins undeclared = frf_margins(dense_frf(p, 0.0), c, o);
  EXPECT_EQ(undeclared.inferred_unstable, -1) << undeclared.stability_note;
  EXPECT_NE(undeclared.stability_note.find("--plant-integrators"), std::string::npos) << undeclared.stability_note;
  // with a PI the loop has an integrator and |L| >= 2 all along below the
  // band: a path that far from -1 winds about it as the true one (whose arc
  // lies at infinity) does, so the verdict stands: the PI's, stable
  const FrfMargins undeclared_pi = frf_margins(dense_frf(p, 0.0), parse_controller("pid:kp=0.5,ki=0.05"), o);
  EXPECT_EQ(undeclared_pi.inferred_unstable, 0) << undeclared_pi.stability_note;
}

TEST(FrfLoop, MonteCarloSpreadScalesWithTheMeasurementError) {
  // first-order propagation: the margins' spread is proportional to eps;
  // 400 draws estimate a s.d. to ~4 %, so the ratio for eps x2 is 2 within 0.3
  const RationalModel p = plant({0.0, -1.0, -5.0}, 10.0);
  const Controller c = parse_controller("gain:k=1");
  FrfLoopOptions o;
  o.draws = 400;
  const FrfMargins a = frf_margins(dense_frf(p, 0.01), c, o), b = frf_margins(dense_frf(p, 0.02), c, o);
  ASSERT_GT(a.pm_sd_deg, 0);
  EXPECT_NEAR(b.pm_sd_deg / a.pm_sd_deg, 2.0, 0.3);
  EXPECT_NEAR(b.gm_sd_db / a.gm_sd_db, 2.0, 0.3);
  // independent lines at 2000 per 5 decades: the interpolated phase near the
  // crossover averages two lines, so its s.d. is below eps rad (0.57 deg): the
  // PM spread must be positive and smaller than that
  EXPECT_LT(a.pm_sd_deg, 0.01 * 180 / M_PI);
}

}  // namespace

#include "loop/step.h"

namespace {

TEST(Step, SecondOrderClosedLoopsMatchTheTable) {
  // L = wn^2/(s(s + 2 zeta wn)), wn = 1: T is the standard second order;
  // CHECK_VALUES.md s.6 [S] (scipy.signal.step, 400 001 points): OS %, t_r 10-90 %, t_s 2 %;
  // OS = exp(-pi zeta/sqrt(1 - zeta^2)) [D]
  const double rows[][4] = {{0.2, 52.6621, 1.2034, 19.602}, {0.5, 16.3034, 1.6376, 8.0764}, {0.7071, 4.3214, 2.1480, 5.9626}};
  for (const auto& r : rows) {
    const double z = r[0];
    const LoopFn l = [z](double f) {
      const cplx s(0, 2 * M_PI * f);
      return 1.0 / (s * (s + 2 * z));
    };
    const StepMetrics m = step_metrics(l, 1 / (2 * M_PI), z / (2 * M_PI));
    // the response is sampled at 400 x the crossover: interpolation and the
    // band limit leave ~1e-4 relative
    EXPECT_NEAR(m.overshoot_pct, r[1], 2e-3 * r[1]) << z;
    EXPECT_NEAR(m.overshoot_pct, 100 * std::exp(-M_PI * z / std::sqrt(1 - z * z)), 2e-3 * r[1]) << z;
    EXPECT_NEAR(m.rise_time_s, r[2], 2e-3 * r[2]) << z;
    EXPECT_NEAR(m.settling_time_s, r[3], 3e-3 * r[3]) << z;
    EXPECT_NEAR(m.steady_state_error, 0.0, 1e-6);
  }
}

TEST(Step, ThirdOrderLoopAndADelayLoop) {
  // T = 1/(s^3 + 3 s^2 + 2 s + 1) from L = 1/(s(s+1)(s+2)): OS 14.462 %,
  // t_r 2.677 s, t_s 12.360 s (CHECK_VALUES.md s.6 [S])
  const LoopFn l = [](double f) {
    const cplx s(0, 2 * M_PI * f);
    return 1.0 / (s * (s + 1.0) * (s + 2.0));
  };
  const StepMetrics m = step_metrics(l, 0.445748 / (2 * M_PI), 0.1);
  EXPECT_NEAR(m.overshoot_pct, 14.462, 0.02);
  EXPECT_NEAR(m.rise_time_s, 2.677, 0.005);
  EXPECT_NEAR(m.settling_time_s, 12.360, 0.02);
  // a delay is exact: e^{-sT}/s with T = 0.5 has T(s) = e^{-sT}/(s + e^{-sT}); its
  // step response starts only after the delay [D]
  const LoopFn d = [](double f) {
    const cplx s(0, 2 * M_PI * f);
    return std::exp(-0.5 * s) / s;
  };
  const StepMetrics md = step_metrics(d, 1 / (2 * M_PI), 0.05);
  const std::size_t before = static_cast<std::size_t>(0.45 / md.dt_s);
  double worst = 0;
  for (std::size_t i = 0; i < before && i < md.y.size(); ++i) worst = std::max(worst, std::fabs(md.y[i]));
  EXPECT_LT(worst, 1e-3);  // nothing before 0.5 s, but for the band limit's ripple
  // type-1 loop: no steady-state error; an output disturbance is rejected
  EXPECT_NEAR(md.steady_state_error, 0.0, 1e-6);
  EXPECT_NEAR(md.disturbance_peak, 1.0, 0.05);
}

}  // namespace

namespace {

TEST(Controller, SetpointFreePidKeepsTheLoopGainAndSoftensTheReferenceStep) {
  // the loop gain is that of the parallel PID; the reference path is ki/s
  const Controller a = parse_controller("pid:kp=2,ki=3"), b = parse_controller("pid:kp=2,ki=3,setpoint=free");
  EXPECT_CLOSE(b.model.response(1.7), a.model.response(1.7), 1e-14);
  ASSERT_TRUE(b.setpoint_free);
  const cplx s(0, kTwoPi * 1.7);
  EXPECT_CLOSE(b.reference_path.response(1.7), 3.0 / s, 1e-12);
  // on P = 1/(s + 1): the PI zero at -1.5 adds overshoot that the
  // setpoint-free form (no zero in the reference path) does not have [D]
  const LoopFn l = [&](double f) { return a.model.response(f) / (cplx(0, kTwoPi * f) + 1.0); };
  const LoopFn r = [&](double f) { return b.reference_path.response(f) / (cplx(0, kTwoPi * f) + 1.0); };
  const StepMetrics pa = step_metrics(l, 0.5, 0.05), pb = step_metrics(l, 0.5, 0.05, r);
  EXPECT_GT(pa.overshoot_pct, pb.overshoot_pct);
  EXPECT_NEAR(pb.steady_state_error, 0.0, 1e-6);
  EXPECT_THROW(parse_controller("pid:kp=1,setpoint=free"), benchid::InputError);
}

}  // namespace

namespace {

TEST(Margins, ResonantPlantHasSeveralCrossoversAndBothStabilityChecksAgree) {
  // K 100/(s (s+1) (s^2 + 0.4 s + 100)): the lightly damped mode at 10 rad/s
  // (peak 1/(2 zeta) = 25) lifts |L| above 1 again near it, so with K = 6 the
  // loop crosses 0 dB three times: near 2.3 rad/s and on both sides of the
  // resonance (|L(j10)| ~ K 0.01 x 25 = 1.5 [D]). The headline phase margin
  // is the smallest over the three; Nyquist and the closed-loop eigenvalues
  // must agree on stability.
  const RationalModel p = benchid::fit::from_zpk(Zpk{{}, {0.0, -1.0, cplx(-0.2, std::sqrt(100 - 0.04)), cplx(-0.2, -std::sqrt(100 - 0.04))}, 600.0});
  const Margins m = model_margins(p, parse_controller("gain:k=1"));
  std::size_t gain_crossings = 0;
  double smallest = 1e9;
  for (const Crossing& x : m.crossings)
    if (x.kind == Crossing::Kind::gain) ++gain_crossings, smallest = std::min(smallest, x.margin);
  EXPECT_EQ(gain_crossings, 3u);
  EXPECT_DOUBLE_EQ(m.phase_margin_deg, smallest);
  const Stability st = closed_loop_stability(p, parse_controller("gain:k=1"), m.f_lo_hz, m.f_hi_hz);
  EXPECT_TRUE(st.judged) << st.reason;  // a disagreement would leave it not judged
  EXPECT_TRUE(st.poles_available);
  EXPECT_GE(st.nyquist_unstable, 0);
}

}  // namespace
