// Rational models and vector fitting against SciPy (invres, freqs, roots),
// the test function of Gustavsen & Semlyen (1999), and known systems.
#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <algorithm>
#include <array>
#include <cmath>
#include <cstring>
#include <fstream>
#include <random>
#include <sstream>

#include "fit/fit_frf.h"
#include "fit/model_json.h"
#include "fit/vector_fit.h"
#include "ident/error.h"
#include "tests/support/expect_close.h"
#include "tests/support/plants.h"
#include "tests/support/pole_error.h"
#include "tests/support/signals.h"
#include "tests/support/temp_dir.h"

using namespace benchid::fit;
using benchid::test::Gaussian;

namespace {

const std::string kData = BENCHID_TEST_DATA_DIR;
constexpr double kTwoPi = 2 * M_PI;

RationalModel scipy_model() {
  // the model of tests/reference/make_fit_reference.py
  RationalModel m;
  m.poles = {-5.0, {-20, 300}, {-20, -300}, {-2, 1500}, {-2, -1500}, -800.0};
  m.residues = {40.0, {7, 90}, {7, -90}, {-3, 25}, {-3, -25}, 1200.0};
  m.direct = 0.05;
  return m;
}

using benchid::test::pole_error;

FitData sample(const RationalModel& m, double f_lo, double f_hi, int n) {
  FitData d;
  for (int k = 0; k < n; ++k) {
    const double f = f_lo * std::pow(f_hi / f_lo, static_cast<double>(k) / (n - 1));
    d.freq_hz.push_back(f);
    d.h.push_back(m.response(f));
    d.weight.push_back(1.0 / std::abs(d.h.back()));
  }
  return d;
}

// Samples as a measured FRF with a stated relative error on every line; with
// a noise source, each line also gets that error drawn: rel_err |H| (n1 + j n2).
benchid::ident::Frf as_frf(const FitData& d, double rel_err, Gaussian* noise = nullptr) {
  benchid::ident::Frf frf;
  frf.freq_hz = d.freq_hz;
  frf.h = d.h;
  if (noise)
    for (auto& h : frf.h) h += rel_err * std::abs(h) * cplx((*noise)(), (*noise)());
  frf.rel_err.assign(d.freq_hz.size(), rel_err);
  frf.reliable.assign(d.freq_hz.size(), 1);
  return frf;
}

TEST(Model, ConversionsMatchScipyInvresFreqsAndRoots) {
  // tests/reference/fit_reference.txt, make_fit_reference.py (SciPy 1.10.1)
  std::ifstream in(kData + "/reference/fit_reference.txt");
  std::vector<double> num, den;
  std::vector<std::array<double, 3>> fr;
  std::vector<cplx> zeros;
  std::string line;
  while (std::getline(in, line)) {
    std::stringstream s(line);
    std::string tag;
    s >> tag;
    double v;
    if (tag == "num") while (s >> v) num.push_back(v);
    if (tag == "den") while (s >> v) den.push_back(v);
    if (tag == "freqs") {
      std::array<double, 3> r{};
      s >> r[0] >> r[1] >> r[2];
      fr.push_back(r);
    }
    if (tag == "zero") {
      double re, im;
      s >> re >> im;
      zeros.emplace_back(re, im);
    }
  }
  ASSERT_EQ(num.size(), 7u);
  const RationalModel m = scipy_model();
  const Polynomial p = m.polynomial();
  ASSERT_EQ(p.num.size(), num.size());
  ASSERT_EQ(p.den.size(), den.size());
  // coefficients span 0.05 to 7e15: each to 1e-9 of itself (double rounding ~1e-15)
  for (std::size_t i = 0; i < num.size(); ++i) EXPECT_CLOSE(p.num[i], num[i], 1e-9);
  for (std::size_t i = 0; i < den.size(); ++i) EXPECT_CLOSE(p.den[i], den[i], 1e-9);
  for (const auto& r : fr) EXPECT_CLOSE(m.response(r[0]), cplx(r[1], r[2]), 1e-9) << r[0];
  // zeros of a degree-6 polynomial: roots are conditioned by the spread of
  // the coefficients; 1e-7 of each root's magnitude
  const Zpk z = m.zpk();
  ASSERT_EQ(z.zeros.size(), zeros.size());
  EXPECT_LT(pole_error(zeros, z.zeros), 1e-7);
  EXPECT_CLOSE(z.gain, 0.05, 1e-12);
  // the zpk and state-space forms evaluate to the same response
  const StateSpace ss = m.state_space();
  for (const auto& r : fr) {
    const cplx s(0, kTwoPi * r[0]);
    cplx vz = z.gain;
    for (const cplx& q : z.zeros) vz *= s - q;
    for (const cplx& q : z.poles) vz /= s - q;
    EXPECT_CLOSE(vz, cplx(r[1], r[2]), 1e-8) << r[0];
    const auto n = static_cast<Eigen::Index>(ss.b.size());
    Eigen::MatrixXcd a(n, n);
    Eigen::VectorXcd b(n), c(n);
    for (Eigen::Index i = 0; i < n; ++i) {
      for (Eigen::Index j = 0; j < n; ++j) a(i, j) = (i == j ? s : cplx(0)) - ss.a[i][j];
      b(i) = ss.b[i];
      c(i) = ss.c[i];
    }
    const Eigen::VectorXcd xs = a.partialPivLu().solve(b);
    const cplx vs = c.dot(xs) + ss.d;  // dot conjugates its left side: c is real
    EXPECT_CLOSE(vs, cplx(r[1], r[2]), 1e-9) << r[0];
  }
}

TEST(Model, PoleResidueRoundTripsThroughZerosPolesGain) {
  // pole-residue -> zpk -> pole-residue (cover-up rule) [D]: residues and the
  // direct term come back to 1e-9 (the zeros are roots of a degree-6 polynomial)
  const RationalModel m = scipy_model();
  const RationalModel back = from_zpk(m.zpk());
  ASSERT_EQ(back.poles.size(), m.poles.size());
  for (std::size_t i = 0; i < m.poles.size(); ++i) EXPECT_CLOSE(back.residues[i], m.residues[i], 1e-9) << i;
  EXPECT_CLOSE(back.direct, m.direct, 1e-9);
  EXPECT_THROW(from_zpk(Zpk{{1.0, 2.0}, {-1.0}, 1.0}), benchid::InputError);     // improper
  EXPECT_THROW(from_zpk(Zpk{{}, {-1.0, -1.0}, 1.0}), benchid::InputError);      // repeated pole
}

TEST(Model, IntegratorsAreExactInEveryForm) {
  RationalModel m;
  m.poles = {{-3, 40}, {-3, -40}};
  m.residues = {{0, -20}, {0, 20}};
  m.integrators = 2;
  const cplx s(0, kTwoPi * 2.5);
  const cplx want = (m.residues[0] / (s - m.poles[0]) + m.residues[1] / (s - m.poles[1])) / (s * s);
  EXPECT_CLOSE(m.response(2.5), want, 1e-14);
  const Polynomial p = m.polynomial();
  EXPECT_EQ(p.den.back(), 0.0);
  EXPECT_EQ(p.den[p.den.size() - 2], 0.0);
  EXPECT_TRUE(std::isnan(m.dc_gain()));
  const StateSpace ss = m.state_space();
  ASSERT_EQ(ss.b.size(), 4u);
}

TEST(Model, JsonRoundTripKeepsTheModel) {
  benchid::test::TempDir d;
  RationalModel m = scipy_model();
  m.delay_s = 0.0015;
  m.integrators = 1;
  const std::string path = d.write("m.json", model_json(m));
  const RationalModel r = read_model_json(path);
  for (double f : {0.3, 12.0, 480.0}) EXPECT_CLOSE(r.response(f), m.response(f), 1e-15);
  EXPECT_EQ(r.integrators, 1);
  EXPECT_THROW(read_model_json(d.write("bad.json", "{\"format\": \"benchid.model/1\", \"poles\": [[1,2]]}")),
               benchid::InputError);
  EXPECT_THROW(read_model_json(d.write("empty.json", "{\"format\": \"benchid.model/1\"}")), benchid::InputError);
}

TEST(VectorFit, RecoversGustavsenSemlyenTestFunction) {
  // Gustavsen & Semlyen 1999 test function as given in CHECK_VALUES.md s.4
  // (values x 2 pi, d = 0.2, h = 2e-5); its values at 0, 1, 5, 45, 100 kHz
  // are checked first. 101 points 1 Hz-100 kHz; CHECK_VALUES reports a
  // NumPy VF at 6.7e-14, "a C++ fit should reach <= 1e-8".
  const double pr[][2] = {{-4500, 0},     {-41000, 0},   {-100, 5000},  {-120, 15000}, {-3000, 35000},
                          {-200, 45000},  {-1500, 45000}, {-500, 70000}, {-1000, 73000}, {-2000, 90000}};
  const double rr[][2] = {{-3000, 0},     {-83000, 0},   {-5, 7000},    {-20, 18000},  {6000, 45000},
                          {40, 60000},    {90, 10000},   {50000, 80000}, {1000, 45000}, {-5000, 92000}};
  RationalModel t;
  t.direct = 0.2;
  t.proportional = 2e-5;
  for (int i = 0; i < 10; ++i) {
    const cplx p(pr[i][0] * kTwoPi, pr[i][1] * kTwoPi), r(rr[i][0] * kTwoPi, rr[i][1] * kTwoPi);
    t.poles.push_back(p);
    t.residues.push_back(r);
    if (p.imag() != 0) {
      t.poles.push_back(std::conj(p));
      t.residues.push_back(std::conj(r));
    }
  }
  // printed to 9 significant digits: half a unit of the last digit
  EXPECT_CLOSE(t.rational(0.0), cplx(-18.8773375), 0, 5e-8);
  EXPECT_CLOSE(t.response(1e3), cplx(-18.9762646, 0.387282029), 0, 5e-8);
  EXPECT_CLOSE(t.response(5e3), cplx(-16.8421341, 71.4399682), 0, 1e-7);
  EXPECT_CLOSE(t.response(45e3), cplx(-5.73769032, 315.699277), 0, 1e-6);
  EXPECT_CLOSE(t.response(1e5), cplx(13.0175947, 13.5711701), 0, 1e-7);
  FitData d;
  for (int k = 0; k <= 100; ++k) {
    const double f = 1 + (1e5 - 1) * k / 100.0;
    d.freq_hz.push_back(f);
    d.h.push_back(t.response(f));
    d.weight.push_back(1.0);
  }
  VectorFitOptions o;
  o.order = 18;
  o.improper = true;
  o.tolerance = 1e-13;
  const FitResult r = vector_fit(d, o);
  EXPECT_TRUE(r.converged);
  EXPECT_LT(pole_error(t.poles, r.model.poles), 1e-8);
  EXPECT_CLOSE(r.model.direct, 0.2, 1e-8);
  EXPECT_CLOSE(r.model.proportional, 2e-5, 1e-8);
  EXPECT_LT(r.nrmse, 1e-10);
}

// K (s^2/wa^2 + 2 za s/wa + 1) / ((s^2/wr^2 + 2 zr s/wr + 1)(tau s + 1)): a real
// pole, an anti-resonance and a resonance (the two-mass drive, motor side).
RationalModel two_mass(double tau, double fa, double za, double fr, double zr, double k) {
  // built from its poles and zeros: residues by evaluation of the cover-up rule
  const double wa = kTwoPi * fa, wr = kTwoPi * fr;
  const std::vector<cplx> zeros{cplx(-za * wa, wa * std::sqrt(1 - za * za)), cplx(-za * wa, -wa * std::sqrt(1 - za * za))};
  const std::vector<cplx> poles{-1 / tau, cplx(-zr * wr, wr * std::sqrt(1 - zr * zr)), cplx(-zr * wr, -wr * std::sqrt(1 - zr * zr))};
  const double gain = k * wr * wr / (wa * wa * tau);  // matches the DC gain K
  RationalModel m;
  m.poles = poles;
  for (std::size_t i = 0; i < poles.size(); ++i) {
    cplx r = gain;
    for (const cplx& z : zeros) r *= poles[i] - z;
    for (std::size_t j = 0; j < poles.size(); ++j)
      if (j != i) r /= poles[i] - poles[j];
    m.residues.push_back(r);
  }
  return m;
}

TEST(VectorFit, RecoversAKnownPlantNoiseFree) {
  const RationalModel t = two_mass(0.08, 22, 0.03, 31, 0.04, 40);
  EXPECT_CLOSE(t.dc_gain(), 40.0, 1e-12);
  VectorFitOptions o;
  o.order = 3;
  o.proper = false;
  const FitResult r = vector_fit(sample(t, 0.1, 300, 300), o);
  EXPECT_TRUE(r.converged);
  EXPECT_LT(pole_error(t.poles, r.model.poles), 1e-6);
  EXPECT_LT(pole_error(t.zpk().zeros, r.model.zpk().zeros), 1e-6);
  EXPECT_CLOSE(r.model.dc_gain(), 40.0, 1e-6);
}

TEST(VectorFit, RecoversIntegratorPlusResonance) {
  // voltage to position: 1 integrator fixed at the origin + a resonance at 55 Hz
  RationalModel t;
  const double w = kTwoPi * 55, z = 0.05;
  t.poles = {cplx(-z * w, w * std::sqrt(1 - z * z)), cplx(-z * w, -w * std::sqrt(1 - z * z))};
  t.residues = {cplx(0, -w * w / (2 * w * std::sqrt(1 - z * z))), cplx(0, w * w / (2 * w * std::sqrt(1 - z * z)))};
  t.integrators = 1;
  VectorFitOptions o;
  o.order = 2;
  o.integrators = 1;
  o.proper = false;
  const FitResult r = vector_fit(sample(t, 1, 500, 200), o);
  EXPECT_LT(pole_error(t.poles, r.model.poles), 1e-6);
  EXPECT_EQ(r.model.integrators, 1);
  EXPECT_LT(r.nrmse, 1e-8);
}

TEST(FitFrf, EstimatesAPureDelay) {
  // 1/(tau s + 1) e^{-s T}: the delay comes from the phase slope and the search
  RationalModel t;
  t.poles = {-kTwoPi * 20.0};
  t.residues = {kTwoPi * 20.0};
  t.delay_s = 0.0021;
  const benchid::ident::Frf frf = as_frf(sample(t, 1, 400, 300), 0.01);
  FitOptions o;
  o.vf.order = 1;
  o.vf.proper = false;
  o.auto_delay = true;
  const FrfFit f = fit_frf(frf, o);
  // the golden-section search stops at 1e-6 of its bracket (~5 ms)
  EXPECT_NEAR(f.result.model.delay_s, 0.0021, 2e-8);
  EXPECT_LT(pole_error(t.poles, f.result.model.poles), 1e-5);
}

TEST(FitFrf, NoisyResonanceWithinStatedTolerancesAcrossSeeds) {
  // noise of 2 % of |H| per component (34 dB SNR, e.g. coherence 0.992 with
  // 10 averages): natural frequency within 1 % and damping within 15 %
  // (issue 4), for every seed
  const RationalModel t = two_mass(0.08, 22, 0.03, 31, 0.04, 40);
  for (std::uint64_t seed = 1; seed <= 5; ++seed) {
    Gaussian g(seed);
    const benchid::ident::Frf frf = as_frf(sample(t, 0.5, 250, 500), 0.02, &g);
    FitOptions o;
    o.vf.order = 3;
    o.vf.proper = false;
    const FrfFit f = fit_frf(frf, o);
    const Zpk z = f.result.model.zpk();
    for (const auto& [truth, got] : {std::pair{t.poles, z.poles}, std::pair{t.zpk().zeros, z.zeros}}) {
      for (const cplx& p : truth) {
        if (p.imag() <= 0) continue;
        const cplx* best = &got.front();
        for (const cplx& q : got) if (std::abs(q - p) < std::abs(*best - p)) best = &q;
        const Mode mt = mode_of(p), mg = mode_of(*best);
        EXPECT_NEAR(mg.freq_hz, mt.freq_hz, 0.01 * mt.freq_hz) << "seed " << seed;
        EXPECT_NEAR(mg.damping, mt.damping, 0.15 * mt.damping) << "seed " << seed;
      }
    }
  }
}

TEST(FitFrf, AutoOrderFindsTheTrueOrderAtTheNoiseLevel) {
  const RationalModel t = two_mass(0.08, 22, 0.03, 31, 0.04, 40);
  Gaussian g(42);
  const benchid::ident::Frf frf = as_frf(sample(t, 0.5, 250, 400), 0.01, &g);
  FitOptions o;
  o.auto_order = true;
  o.max_order = 8;
  o.vf.proper = false;
  const FrfFit f = fit_frf(frf, o);
  EXPECT_EQ(f.result.model.poles.size(), 3u);
  // the sweep looked past the choice (stability needs orders 4 and 5) and stopped
  // within 4 orders of the last one that still lowered the residual by 10 %
  ASSERT_GE(f.sweep.size(), 5u);
  ASSERT_LE(f.sweep.size(), 8u);
  EXPECT_FALSE(f.sweep[1].accepted);  // order 2 cannot hold both pairs and the real pole
  EXPECT_TRUE(f.sweep[2].accepted);
}

// The orders of the sweep are fitted on several threads; each is a fit of
// its own, so the table and the chosen model must not change by one bit.
TEST(FitFrf, OrderSweepOnSeveralThreadsIsBitIdenticalToOne) {
  const RationalModel t = two_mass(0.08, 22, 0.03, 31, 0.04, 40);
  Gaussian g(7);
  const benchid::ident::Frf frf = as_frf(sample(t, 0.5, 250, 400), 0.01, &g);
  FitOptions o;
  o.auto_order = true;
  o.max_order = 9;
  o.vf.proper = false;
  o.threads = 1;
  const FrfFit one = fit_frf(frf, o);
  for (int threads : {2, 3, 8}) {
    o.threads = threads;
    const FrfFit many = fit_frf(frf, o);
    ASSERT_EQ(many.sweep.size(), one.sweep.size());
    for (std::size_t i = 0; i < one.sweep.size(); ++i) {
      EXPECT_EQ(std::memcmp(&many.sweep[i].chi2, &one.sweep[i].chi2, sizeof(double)), 0) << "order " << i + 1;
      EXPECT_EQ(std::memcmp(&many.sweep[i].aic, &one.sweep[i].aic, sizeof(double)), 0) << "order " << i + 1;
      EXPECT_EQ(many.sweep[i].accepted, one.sweep[i].accepted);
    }
    ASSERT_EQ(many.result.model.poles.size(), one.result.model.poles.size());
    EXPECT_EQ(std::memcmp(many.result.model.poles.data(), one.result.model.poles.data(),
                          one.result.model.poles.size() * sizeof(cplx)),
              0)
        << threads << " threads";
    EXPECT_EQ(std::memcmp(many.result.model.residues.data(), one.result.model.residues.data(),
                          one.result.model.residues.size() * sizeof(cplx)),
              0);
  }
}

// Unrelated input and output: each line passes the 95 % zero-coherence
// bound with probability 5 % (Carter, Knapp & Nuttall's bound, CHECK_VALUES.md),
// scattered. fit must say there is no identifiable system, not fit the
// chance lines. A band-limited measurement with as few reliable lines, but
// adjacent, is a system and is fitted.
TEST(FitFrf, PureNoiseIsNoIdentifiableSystemButABandLimitedOneIsFitted) {
  RationalModel t;
  t.poles = {-2 * M_PI * 20.0};
  t.residues = {2 * M_PI * 20.0};
  FitData d;
  for (int k = 1; k <= 2000; ++k) {
    const double f = 0.5 * k;
    d.freq_hz.push_back(f);
    d.h.push_back(t.response(f));
    d.weight.push_back(1);
  }
  benchid::ident::Frf frf = as_frf(d, 0.05);
  frf.confidence = 0.95;
  std::mt19937_64 rng(12);
  std::bernoulli_distribution chance(0.05);
  for (auto& r : frf.reliable) r = chance(rng);
  FitOptions o;
  o.auto_order = true;
  try {
    fit_frf(frf, o);
    FAIL() << "fitted pure noise";
  } catch (const benchid::InputError& e) {
    EXPECT_NE(std::string(e.what()).find("no identifiable system"), std::string::npos) << e.what();
  }
  // 100 adjacent reliable lines (5 % of the FRF) from a random excitation
  // limited to 5..55 Hz: fitted, and the pole found
  for (std::size_t k = 0; k < frf.size(); ++k) frf.reliable[k] = k >= 9 && k < 109;
  const FrfFit f = fit_frf(frf, o);
  ASSERT_FALSE(f.result.model.poles.empty());
  EXPECT_NEAR(f.result.model.poles[0].real(), t.poles[0].real(), 1e-6 * std::abs(t.poles[0]));
}

TEST(FitFrf, ReflectsUnstablePolesUnlessAllowed) {
  // 100/((s - 6)(s + 60)): one right-half-plane pole
  RationalModel t;
  t.poles = {6.0, -60.0};
  t.residues = {100.0 / 66, -100.0 / 66};
  const benchid::ident::Frf frf = as_frf(sample(t, 0.1, 100, 200), 0.01);
  FitOptions o;
  o.vf.order = 2;
  o.vf.proper = false;
  const FrfFit a = fit_frf(frf, o);
  EXPECT_GT(a.result.model.reflected, 0);
  for (const cplx& p : a.result.model.poles) EXPECT_LT(p.real(), 0);
  EXPECT_FALSE(a.warnings.empty());
  o.vf.allow_unstable = true;
  const FrfFit b = fit_frf(frf, o);
  EXPECT_LT(pole_error(t.poles, b.result.model.poles), 1e-6);
}

TEST(FitFrf, RefusesWhatTheDataCannotCarry) {
  benchid::ident::Frf frf;
  for (int k = 1; k <= 6; ++k) {
    frf.freq_hz.push_back(k);
    frf.h.push_back(1.0 / cplx(1, k));
    frf.rel_err.push_back(0.01);
    frf.reliable.push_back(0);
  }
  FitOptions o;
  auto msg = [&] {
    try {
      fit_frf(frf, o);
    } catch (const benchid::InputError& e) {
      return std::string(e.what());
    }
    return std::string("(no error)");
  };
  EXPECT_NE(msg().find("all 6 lines in the band 1 to 6 Hz are untrusted"), std::string::npos)
      << msg();
  frf.reliable.assign(6, 1);
  o.vf.order = 10;
  EXPECT_NE(msg().find("6 lines cannot carry an order-10 fit"), std::string::npos) << msg();
  o.vf.order = 2;
  o.band_given = true, o.band_lo_hz = 100, o.band_hi_hz = 200;
  EXPECT_NE(msg().find("holds no line"), std::string::npos) << msg();
}

}  // namespace

#include "fit/replay.h"

namespace {

TEST(Replay, ZeroOrderHoldSimulationMatchesScipyCont2discreteDlsim) {
  // tests/reference/fit_reference.txt: scipy.signal.cont2discrete(zoh) + dlsim
  // of the model above at 8 kHz (SciPy 1.10.1)
  std::ifstream in(kData + "/reference/fit_reference.txt");
  std::vector<double> u, y;
  double rate = 0;
  std::string line;
  while (std::getline(in, line)) {
    std::stringstream s(line);
    std::string tag;
    s >> tag;
    double v;
    if (tag == "zoh_rate") s >> rate;
    if (tag == "zoh_u") while (s >> v) u.push_back(v);
    if (tag == "zoh_y") while (s >> v) y.push_back(v);
  }
  ASSERT_EQ(u.size(), 400u);
  const RationalModel m = scipy_model();
  const std::vector<double> got = simulate(m, u, rate);
  double peak = 0;
  for (double v : y) peak = std::max(peak, std::fabs(v));
  // The closed form per mode [D]: x' = p x + u with u held gives
  // x[k+1] = e^{pT} x[k] + (e^{pT} - 1)/p u[k]; benchid's matrix exponential
  // must agree to rounding.
  std::vector<cplx> x(m.poles.size(), 0.0);
  for (std::size_t k = 0; k < u.size(); ++k) {
    cplx yk = m.direct * u[k];
    for (std::size_t i = 0; i < x.size(); ++i) yk += m.residues[i] * x[i];
    EXPECT_NEAR(got[k], yk.real(), 1e-12 * peak) << k;
    for (std::size_t i = 0; i < x.size(); ++i) {
      const cplx e = std::exp(m.poles[i] / rate);
      x[i] = e * x[i] + (e - 1.0) / m.poles[i] * u[k];
    }
  }
  // SciPy reaches the same result through the polynomial form, whose
  // coefficients span 17 decades (0.05 to 8e14): measured against the closed
  // form above, its own error is 4.1e-7 (1.1e-7 of the peak), so it is held
  // to 2e-7 of the peak.
  for (std::size_t k = 0; k < u.size(); ++k) EXPECT_NEAR(got[k], y[k], 2e-7 * peak) << k;
}

TEST(Replay, FractionalDelayIsExactAgainstAFineIntegration) {
  // 1 pole + a resonance, delay 2.4 samples: the held, delayed input
  // integrated by RK4 with 64 sub-steps per sample (error ~1e-12) is the
  // independent reference
  RationalModel m;
  const double w = 2 * M_PI * 300, z = 0.1, rate = 4000;
  m.poles = {-400.0, cplx(-z * w, w * std::sqrt(1 - z * z)), cplx(-z * w, -w * std::sqrt(1 - z * z))};
  m.residues = {400.0, cplx(-50, 800), cplx(-50, -800)};
  m.delay_s = 2.4 / rate;
  std::vector<double> u(600);
  for (std::size_t k = 0; k < u.size(); ++k) u[k] = std::sin(0.07 * double(k)) + (k % 97 < 40 ? 0.5 : -0.3);
  const std::vector<double> got = simulate(m, u, rate);
  // reference: modal states integrated by RK4, input = u held, delayed by 2.4 samples
  const int sub = 64;
  const double h = 1.0 / rate / sub;
  std::vector<cplx> x(3, 0.0);
  auto input = [&](double t) {
    const double td = t - m.delay_s;
    if (td < 0) return 0.0;
    const auto k = static_cast<std::size_t>(std::floor(td * rate + 1e-9));
    return k < u.size() ? u[k] : 0.0;
  };
  double worst = 0;
  for (std::size_t k = 0; k < u.size(); ++k) {
    cplx yk = 0;
    for (int i = 0; i < 3; ++i) yk += m.residues[i] * x[i];
    worst = std::max(worst, std::fabs(yk.real() - got[k]));
    for (int s = 0; s < sub; ++s) {
      const double t = static_cast<double>(k) / rate + s * h;
      for (int i = 0; i < 3; ++i) {
        auto f = [&](cplx xi, double tt) { return m.poles[i] * xi + input(tt); };
        // the held input jumps only at sample instants + 0.4 sample: sub-steps of
        // 1/64 sample straddle no jump except where 0.4*64 = 25.6 falls inside one
        const cplx k1 = f(x[i], t), k2 = f(x[i] + 0.5 * h * k1, t + 0.5 * h), k3 = f(x[i] + 0.5 * h * k2, t + 0.5 * h),
                   k4 = f(x[i] + h * k3, t + h);
        x[i] += h / 6 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
      }
    }
  }
  // the one sub-step per sample that straddles the input's jump is integrated
  // with a smoothed input: its error is O(h * jump * |r|) ~ 1e-3 of the scale,
  // shrinking with the sub-step: bounded here at 2 % of the output's rms
  double rms = 0;
  for (double v : got) rms += v * v;
  rms = std::sqrt(rms / static_cast<double>(got.size()));
  EXPECT_LT(worst, 0.02 * rms);
}

TEST(Replay, OwnOutputMatchesAndAWrongModelFails) {
  RationalModel m;
  const double w = 2 * M_PI * 30, z = 0.05, rate = 1000;
  m.poles = {cplx(-z * w, w * std::sqrt(1 - z * z)), cplx(-z * w, -w * std::sqrt(1 - z * z))};
  m.residues = {cplx(0, -w / 2), cplx(0, w / 2)};
  Gaussian g(3);
  const std::vector<double> u = g.take(20000);
  std::vector<double> y = simulate(m, u, rate);
  for (double& v : y) v += 0.01 * g();  // 1 % noise: the residual is white
  ReplayOptions zoh;
  zoh.hold = Hold::zoh;  // y was made by the hold simulation
  const ReplayResult good = replay(m, u, y, rate, zoh);
  EXPECT_GT(good.match_pct, 95.0);
  EXPECT_TRUE(good.whiteness.pass) << good.verdict;
  EXPECT_TRUE(good.cross.pass) << good.verdict;
  RationalModel wrong = m;
  const double w2 = 2 * M_PI * 36;
  wrong.poles = {cplx(-z * w2, w2 * std::sqrt(1 - z * z)), cplx(-z * w2, -w2 * std::sqrt(1 - z * z))};
  const ReplayResult bad = replay(wrong, u, y, rate, zoh);
  EXPECT_LT(bad.match_pct, good.match_pct - 20);
  EXPECT_FALSE(bad.cross.pass && bad.whiteness.pass) << bad.verdict;
}

TEST(Replay, AsMeasuredAppliesTheModelResponseToTheSamples) {
  // a sine on an FFT line of the padded grid through "as measured" replay
  // comes out scaled and shifted by exactly H(f) (after the start-up
  // transient, which dies within the left-out settling time)
  RationalModel m;
  m.poles = {-300.0};
  m.residues = {300.0};
  m.delay_s = 0.00123;  // 4.92 samples at 4 kHz: a fractional delay
  const double rate = 4000, f = 125.0;
  std::vector<double> u(8192);
  for (std::size_t k = 0; k < u.size(); ++k) u[k] = std::sin(2 * M_PI * f * static_cast<double>(k) / rate);
  const std::vector<double> y = simulate_as_measured(m, u, rate);
  const cplx h = m.response(f);
  double worst = 0;
  for (std::size_t k = 2000; k < 6000; ++k)
    worst = std::max(worst, std::fabs(y[k] - std::abs(h) * std::sin(2 * M_PI * f * static_cast<double>(k) / rate + std::arg(h))));
  // away from the record's ends the padded linear convolution is the steady
  // state; what is left is the truncation of the band-limited (sinc-interpolated)
  // impulse response, ~1e-4 of the amplitude here
  EXPECT_LT(worst, 1e-3 * std::abs(h));
}

}  // namespace

#include "fit/discretize.h"

namespace {

RationalModel third_order() {
  // the model of make_fit_reference.py's discretisation block
  RationalModel m;
  m.poles = {-30.0, cplx(-10, 200), cplx(-10, -200)};
  m.residues = {30.0, cplx(-5, 40), cplx(-5, -40)};
  return m;
}

TEST(Discretize, ZohAndTustinMatchScipy) {
  // tests/reference/fit_reference.txt "disc": scipy.signal.cont2discrete
  // (zoh, bilinear) and bilinear with the prewarped rate, via freqz (SciPy 1.10.1)
  std::ifstream in(kData + "/reference/fit_reference.txt");
  std::string line;
  int checked = 0;
  while (std::getline(in, line)) {
    std::stringstream s(line);
    std::string tag, method;
    double f, re, im;
    if (!(s >> tag) || tag != "disc") continue;
    s >> method >> f >> re >> im;
    DiscretizeOptions o;
    o.sample_time_s = 1e-3;
    o.method = method == "zoh" ? Discretization::zoh : Discretization::tustin;
    if (method == "bilinear_prewarp") o.prewarp_hz = 31.8;
    const RationalModel z = discretize(third_order(), o).model;
    EXPECT_EQ(z.domain, Domain::z);
    // double-precision transforms of a third-order model: 1e-9
    EXPECT_CLOSE(z.response(f), cplx(re, im), 1e-9) << method << " " << f;
    ++checked;
  }
  EXPECT_EQ(checked, 18);
  // prewarping makes Tustin exact at its frequency [D]
  DiscretizeOptions pw;
  pw.sample_time_s = 1e-3, pw.method = Discretization::tustin, pw.prewarp_hz = 31.8;
  EXPECT_CLOSE(discretize(third_order(), pw).model.response(31.8), third_order().response(31.8), 1e-12);
}

// y = sections in cascade, direct form II transposed
std::vector<double> run_sections(const std::vector<Section>& sos, std::vector<double> x) {
  for (const Section& s : sos) {
    double z1 = 0, z2 = 0;
    for (double& v : x) {
      const double y = s[0] * v + z1;
      z1 = s[1] * v - s[4] * y + z2;
      z2 = s[2] * v - s[5] * y;
      v = y;
    }
  }
  return x;
}

TEST(Discretize, SectionsAndDelayReproduceTheExactHoldSimulation) {
  // a fractional delay of 2.3 samples: zoh gives z^-2 plus one extra state;
  // the second-order sections, run after a 2-sample shift, must give the same
  // samples as the exact hold simulation of the continuous model
  RationalModel m = third_order();
  m.delay_s = 2.3e-3;
  DiscretizeOptions o;
  o.sample_time_s = 1e-3;
  const Discretized d = discretize(m, o);
  EXPECT_NEAR(d.model.delay_s, 2e-3, 1e-15);
  const auto sos = second_order_sections(d.model);
  Gaussian g(9);
  const std::vector<double> u = g.take(3000);
  std::vector<double> shifted(u.size(), 0.0);
  for (std::size_t k = 2; k < u.size(); ++k) shifted[k] = u[k - 2];
  const std::vector<double> ys = run_sections(sos, shifted), yr = simulate(m, u, 1000);
  double peak = 0, worst = 0;
  for (std::size_t k = 0; k < u.size(); ++k) {
    peak = std::max(peak, std::fabs(yr[k]));
    worst = std::max(worst, std::fabs(ys[k] - yr[k]));
  }
  EXPECT_LT(worst, 1e-10 * peak);
}

}  // namespace

namespace {

TEST(VectorFit, FitsADiscreteTimeSystemInZ) {
  // a known difference equation: the bilinear Butterworth low-pass of
  // tests/support (common practice), fitted directly in z at order 2
  const benchid::test::Biquad lp = benchid::test::Biquad::butterworth_lowpass(0.1);
  const double rate = 1000;
  FitData d;
  for (int k = 1; k <= 200; ++k) {
    const double f = 0.5 + (rate / 2 - 1) * k / 200.0;
    d.freq_hz.push_back(f);
    d.h.push_back(lp.response(f / rate));
    d.weight.push_back(1.0 / std::abs(d.h.back()));
  }
  VectorFitOptions o;
  o.order = 2;
  o.domain = Domain::z;
  o.sample_time_s = 1 / rate;
  const FitResult r = vector_fit(d, o);
  // poles of 1 + a1 z^-1 + a2 z^-2 [D]
  const std::vector<cplx> truth = polynomial_roots({1.0, lp.a1, lp.a2});
  EXPECT_LT(pole_error(truth, r.model.poles), 1e-9);
  EXPECT_EQ(r.model.domain, Domain::z);
  for (double f : {3.0, 77.0, 410.0}) EXPECT_CLOSE(r.model.response(f), lp.response(f / rate), 1e-9);
  // a discretised continuous plant comes back too
  DiscretizeOptions zo;
  zo.sample_time_s = 1e-3;
  const RationalModel zm = discretize(third_order(), zo).model;
  FitData d2;
  for (int k = 1; k <= 300; ++k) {
    const double f = 0.2 + 499.0 * k / 300.0;
    d2.freq_hz.push_back(f);
    d2.h.push_back(zm.response(f));
    d2.weight.push_back(1.0 / std::abs(d2.h.back()));
  }
  o.order = 3;
  o.sample_time_s = 1e-3;
  EXPECT_LT(pole_error(zm.poles, vector_fit(d2, o).model.poles), 1e-8);
}

TEST(SkFit, AgreesWithVectorFittingOnAKnownPlant) {
  // the second method must find the same model (noise-free, low order)
  const RationalModel t = two_mass(0.08, 22, 0.03, 31, 0.04, 40);
  const FitData d = sample(t, 0.1, 300, 300);
  VectorFitOptions o;
  o.order = 3;
  o.proper = false;
  const FitResult vf = vector_fit(d, o), sk = sk_fit(d, o);
  EXPECT_TRUE(sk.converged);
  EXPECT_LT(pole_error(vf.model.poles, sk.model.poles), 1e-6);
  EXPECT_LT(pole_error(t.poles, sk.model.poles), 1e-6);
  EXPECT_THROW(sk_fit(d, [] {
                 VectorFitOptions b;
                 b.integrators = 1;
                 return b;
               }()),
               benchid::InputError);
}

}  // namespace

using benchid::test::fifteen_mode_plant;

TEST(FitFrf, AutoOrderFindsFifteenModesInFiveThousandNoisyLines) {
  // 5000 lines 1 Hz to 10 kHz with 1 % noise per line (40 dB SNR): the sweep
  // runs on a subset of the lines and the final fit on all. Every mode is
  // found within 0.5 % in frequency (the noise moves a pole by about
  // rel_err / sqrt(lines in its half-power band) of its bandwidth: far less),
  // and the fit stands at the noise (chi2/dof ~ 1 for the stated error, up
  // to the slight overfit the rule allows). With the delay known (none),
  // the order is the plant's.
  const RationalModel t = fifteen_mode_plant();
  Gaussian noise(7);
  const benchid::ident::Frf frf = as_frf(sample(t, 1, 1e4, 5000), 0.01, &noise);
  for (bool auto_delay : {false, true}) {
    FitOptions o;
    o.auto_order = true;
    o.auto_proper = true;
    o.auto_delay = auto_delay;
    const FrfFit f = fit_frf(frf, o);
    SCOPED_TRACE(fit_summary(f, auto_delay ? "delay auto" : "no delay"));
    EXPECT_NE(f.sweep_note.find("of the 5000 lines"), std::string::npos);
    ASSERT_TRUE(f.result.converged);
    EXPECT_LT(f.result.chi2 / f.result.dof, 1.5);
    for (const cplx& p : t.poles) {
      if (p.imag() < 0) continue;
      const double fn = mode_of(p).freq_hz;
      bool found = false;
      for (const cplx& q : f.result.model.poles)
        found = found || (q.imag() > 0 && std::fabs(mode_of(q).freq_hz / fn - 1) < 5e-3);
      EXPECT_TRUE(found) << "mode at " << fn << " Hz";
    }
    if (!auto_delay) {
      EXPECT_EQ(f.result.model.poles.size(), 30u);
    }
  }
}

TEST(VectorFit, StartsFromGivenPoles) {
  // started at the true poles, the fit is done in one or two relocations;
  // a start of the wrong size, or not closed under conjugation, is refused
  const RationalModel t = scipy_model();
  VectorFitOptions o;
  o.order = 6;
  o.start_poles = t.poles;
  const FitResult r = vector_fit(sample(t, 0.1, 1e4, 400), o);
  EXPECT_TRUE(r.converged);
  EXPECT_LE(r.iterations, 2);
  EXPECT_LT(pole_error(t.poles, r.model.poles), 1e-8);
  o.start_poles.pop_back();  // 5 poles (the real one at -800 dropped) for order 6
  EXPECT_THROW(vector_fit(sample(t, 0.1, 1e4, 400), o), benchid::InputError);
  o.order = 5;  // 5 poles, one pair without its conjugate
  o.start_poles = t.poles;
  o.start_poles.erase(o.start_poles.begin() + 2);
  EXPECT_THROW(vector_fit(sample(t, 0.1, 1e4, 400), o), benchid::InputError);
}

namespace {

// Linear line grid (as Welch gives), noise of rel_err per component.
FitData noisy_lines(const RationalModel& t, double df, double f_hi, double rel_err,
                    std::uint64_t seed) {
  Gaussian g(seed);
  FitData d;
  for (double f = df; f <= f_hi; f += df) {
    const cplx h = t.response(f);
    d.freq_hz.push_back(f);
    d.h.push_back(h + rel_err * std::abs(h) * cplx(g(), g()));
    d.weight.push_back(1.0 / (rel_err * std::abs(h)));
  }
  return d;
}

RationalModel modes(const std::vector<std::array<double, 3>>& fz_gain) {
  RationalModel t;
  for (const auto& [f, z, k] : fz_gain) {
    const double w = kTwoPi * f;
    const cplx p(-z * w, w * std::sqrt(1 - z * z));
    // residue of k w^2/(s^2 + 2 z w s + w^2) at p
    const cplx r = k * w * w / (p - std::conj(p));
    t.poles.push_back(p);
    t.poles.push_back(std::conj(p));
    t.residues.push_back(r);
    t.residues.push_back(std::conj(r));
  }
  return t;
}

}  // namespace

TEST(Prune, RemovesAPairTheDataDoNotNeedAcrossSeeds) {
  // two modes (20 Hz, zeta 0.05; 150 Hz, zeta 0.03; invented) on 0.5 Hz
  // lines to 500 Hz at 1 % noise, fitted with one pair too many: the spare
  // poles (a pair, or two real poles) fit noise, stand below 5 sigma and are
  // pruned; the two modes stay within 0.5 %. (A third mode whose peak is
  // 2 sigma over its 60-line half-power band is kept: summed over those lines
  // it stands beyond the noise, and the rule keeps what the data show.)
  // Pruning acts on converged fits only (the order sweep takes no other);
  // a spare pair that wanders does not converge, so seeds whose order-6 fit
  // did not are counted and left out, and most must converge.
  const RationalModel t = modes({{20, 0.05, 1.0}, {150, 0.03, 0.5}});
  int converged = 0;
  for (std::uint64_t seed = 1; seed <= 10; ++seed) {
    SCOPED_TRACE(seed);
    const FitData d = noisy_lines(t, 0.5, 500, 0.01, seed);
    VectorFitOptions o;
    o.order = 6;
    o.proper = false;
    FitResult r = vector_fit(d, o);
    if (!r.converged) continue;
    ++converged;
    const auto notes = prune_spurious_modes(d, o, r);
    EXPECT_GE(notes.size(), 1u);
    ASSERT_EQ(r.model.poles.size(), 4u);
    EXPECT_LT(pole_error(t.poles, r.model.poles), 5e-3);
  }
  EXPECT_GE(converged, 6);
}

TEST(Prune, KeepsAModeSpanningOneOrTwoLines) {
  // Q = 1000 at 100 Hz (half-power band 0.1 Hz) on 0.25 Hz lines, beside a
  // broad mode at 20 Hz: its modal peak stands far above 5 sigma on the one
  // or two lines it touches, so nothing is pruned
  const RationalModel t = modes({{20, 0.05, 1.0}, {100, 5e-4, 0.02}});
  const FitData d = noisy_lines(t, 0.25, 250, 0.01, 1);
  VectorFitOptions o;
  o.order = 4;
  o.proper = false;
  FitResult r = vector_fit(d, o);
  ASSERT_TRUE(r.converged);
  ASSERT_LT(pole_error(t.poles, r.model.poles), 1e-3);
  const auto notes = prune_spurious_modes(d, o, r);
  EXPECT_TRUE(notes.empty()) << notes.front();
  EXPECT_EQ(r.model.poles.size(), 4u);
}
