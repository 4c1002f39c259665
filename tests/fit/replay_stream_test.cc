// replay_stream() against replay(): the same figures from a record streamed
// in blocks as from the record held whole. The hold simulation is the same
// recursion, so only the order of a few sums differs (1e-12); the measured
// response becomes an FIR filter whose discarded tail holds < 1e-7 of the
// impulse response's energy (so < 3.2e-4 of its amplitude), against
// replay()'s response sampled on a grid of twice the record.
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>

#include "fit/replay.h"
#include "ident/error.h"
#include "tests/support/signals.h"

using namespace benchid::fit;
using benchid::test::Gaussian;

namespace {

class VectorSource final : public ReplaySource {
 public:
  VectorSource(const std::vector<double>& u, const std::vector<double>& y, double rate, std::size_t block)
      : u_(u), y_(y), rate_(rate), block_(block) {}
  std::size_t next(std::vector<double>& u, std::vector<double>& y) override {
    const std::size_t n = std::min(block_, u_.size() - at_);
    u.assign(u_.begin() + static_cast<long>(at_), u_.begin() + static_cast<long>(at_ + n));
    y.assign(y_.begin() + static_cast<long>(at_), y_.begin() + static_cast<long>(at_ + n));
    at_ += n;
    return n;
  }
  double rate_hz() const override { return rate_; }

 private:
  const std::vector<double>& u_;
  const std::vector<double>& y_;
  double rate_;
  std::size_t block_, at_ = 0;
};

RationalModel resonance(double f_hz, double zeta, double delay_s = 0) {
  RationalModel m;
  const double w = 2 * M_PI * f_hz;
  m.poles = {cplx(-zeta * w, w * std::sqrt(1 - zeta * zeta)), cplx(-zeta * w, -w * std::sqrt(1 - zeta * zeta))};
  m.residues = {cplx(0, -w / 2), cplx(0, w / 2)};
  m.delay_s = delay_s;
  return m;
}

struct Streamed {
  ReplayResult r;
  std::vector<double> y, ys;  // what the sink received, in order
};

Streamed streamed(const RationalModel& m, const std::vector<double>& u, const std::vector<double>& y, double rate,
             const ReplayOptions& o, std::size_t limit) {
  Streamed run;
  StreamReplayOptions so;
  so.in_memory_limit = limit;
  std::size_t expect = 0;
  run.r = replay_stream(
      m, [&] { return std::make_unique<VectorSource>(u, y, rate, 777); }, o, so,
      [&](std::size_t first, const std::vector<double>& yb, const std::vector<double>& sb) {
        EXPECT_EQ(first, expect);  // blocks arrive in order, none missing
        expect += yb.size();
        run.y.insert(run.y.end(), yb.begin(), yb.end());
        run.ys.insert(run.ys.end(), sb.begin(), sb.end());
      });
  return run;
}

void expect_same_figures(const ReplayResult& a, const ReplayResult& b, double tol) {
  EXPECT_EQ(a.settle, b.settle);
  EXPECT_EQ(a.samples, b.samples);
  EXPECT_NEAR(a.match_pct, b.match_pct, 100 * tol);
  ASSERT_EQ(a.whiteness.rho.size(), b.whiteness.rho.size());
  ASSERT_EQ(a.cross.rho.size(), b.cross.rho.size());
  for (std::size_t i = 0; i < a.whiteness.rho.size(); ++i) EXPECT_NEAR(a.whiteness.rho[i], b.whiteness.rho[i], tol) << i;
  for (std::size_t i = 0; i < a.cross.rho.size(); ++i) EXPECT_NEAR(a.cross.rho[i], b.cross.rho[i], tol) << i;
  EXPECT_NEAR(a.whiteness.bound, b.whiteness.bound, 1e-12);
  EXPECT_NEAR(a.cross.bound, b.cross.bound, tol);
  EXPECT_EQ(a.whiteness.pass, b.whiteness.pass);
  EXPECT_EQ(a.cross.pass, b.cross.pass);
}

TEST(ReplayStream, HoldSimulationStreamedEqualsTheWholeRecord) {
  const RationalModel m = resonance(30, 0.05, 0.00237);  // 2.37 samples of delay at 1 kHz
  const double rate = 1000;
  Gaussian g(5);
  const std::vector<double> u = g.take(30000);
  std::vector<double> y = simulate(m, u, rate);
  for (double& v : y) v += 0.02 * g() + 0.5;  // noise and an offset (means are removed)
  ReplayOptions o;
  o.hold = Hold::zoh;
  o.lags = 30;
  const ReplayResult whole = replay(m, u, y, rate, o);
  const Streamed s = streamed(m, u, y, rate, o, 1000);
  EXPECT_TRUE(s.r.streamed);
  expect_same_figures(s.r, whole, 1e-10);
  ASSERT_EQ(s.ys.size(), u.size());
  for (std::size_t k = 0; k < u.size(); k += 997) {
    EXPECT_NEAR(s.y[k], y[k], 1e-12);  // the mean removed and added back
    EXPECT_NEAR(s.ys[k], whole.simulated[k], 1e-9) << k;
  }
  // and a wrong model still fails when streamed
  const Streamed bad = streamed(resonance(36, 0.05, 0.00237), u, y, rate, o, 1000);
  EXPECT_LT(bad.r.match_pct, s.r.match_pct - 20);
}

TEST(ReplayStream, MeasuredResponseStreamedAsFirEqualsTheWholeRecord) {
  // a well-damped model (time constant 16 ms = 32 samples): the FIR's first
  // 4096 taps hold 128 time constants, so what the streamed simulation
  // leaves out is far below the 1e-7 criterion, and the figures agree to
  // 1e-6 (the output to the bound below)
  const RationalModel m = resonance(50, 0.2);
  const double rate = 2000;
  Gaussian g(9);
  const std::vector<double> u = g.take(40000);
  std::vector<double> y = simulate_as_measured(m, u, rate);
  for (double& v : y) v += 0.05 * g();
  ReplayOptions o;
  const ReplayResult whole = replay(m, u, y, rate, o);
  const Streamed s = streamed(m, u, y, rate, o, 1000);
  EXPECT_TRUE(s.r.streamed);
  EXPECT_EQ(s.r.hold, Hold::as_measured);
  EXPECT_TRUE(s.r.note.empty()) << s.r.note;
  expect_same_figures(s.r, whole, 1e-6);
  double rms = 0;
  for (double v : whole.simulated) rms += v * v;
  rms = std::sqrt(rms / static_cast<double>(whole.simulated.size()));
  double worst = 0;
  for (std::size_t k = 0; k < u.size(); ++k) worst = std::max(worst, std::fabs(s.ys[k] - whole.simulated[k]));
  // for a white input the output error's rms is ||h_tail|| sigma_u <=
  // sqrt(1e-7) ||h|| sigma_u = 3.2e-4 of the output's rms; its largest value
  // stays within about four times that
  EXPECT_LT(worst, 1.3e-3 * rms);
}

TEST(ReplayStream, FractionalDelayAndSlowPoleAreTruncatedAtMaxTapsWithANote) {
  // a pole decaying over 20 s at 1 kHz needs ~4e5 taps; 2^14 keep only a
  // part of it, and the result says how much was left out
  RationalModel slow;
  slow.poles = {-0.05};
  slow.residues = {0.05};
  const double rate = 1000;
  Gaussian g(2);
  const std::vector<double> u = g.take(20000);
  const std::vector<double> y = simulate_as_measured(slow, u, rate);
  StreamReplayOptions so;
  so.in_memory_limit = 100;
  so.max_taps = 1 << 14;
  const ReplayResult r = replay_stream(
      slow, [&] { return std::make_unique<VectorSource>(u, y, rate, 4096); }, {}, so);
  EXPECT_NE(r.note.find("16384 taps"), std::string::npos) << r.note;
}

TEST(ReplayStream, ShortRecordIsReplayedWholeWithReplaysExactFigures) {
  const RationalModel m = resonance(30, 0.05);
  const double rate = 1000;
  Gaussian g(4);
  const std::vector<double> u = g.take(5000);
  std::vector<double> y = simulate_as_measured(m, u, rate);
  for (double& v : y) v += 0.01 * g();
  const ReplayResult whole = replay(m, u, y, rate);
  const Streamed s = streamed(m, u, y, rate, {}, 1u << 22);
  EXPECT_FALSE(s.r.streamed);
  EXPECT_EQ(std::memcmp(&s.r.match_pct, &whole.match_pct, sizeof(double)), 0);
  EXPECT_EQ(s.ys, whole.simulated);
  EXPECT_EQ(s.r.verdict, whole.verdict);
}

TEST(ReplayStream, ARecordThatChangesBetweenPassesIsRefused) {
  const RationalModel m = resonance(30, 0.05);
  Gaussian g(1);
  const std::vector<double> u = g.take(3000), y = g.take(3000);
  const std::vector<double> u2(u.begin(), u.begin() + 2500), y2(y.begin(), y.begin() + 2500);
  int opened = 0;
  StreamReplayOptions so;
  so.in_memory_limit = 100;
  try {
    replay_stream(
        m,
        [&]() -> std::unique_ptr<ReplaySource> {
          return ++opened == 1 ? std::make_unique<VectorSource>(u, y, 1000, 500)
                               : std::make_unique<VectorSource>(u2, y2, 1000, 500);
        },
        {}, so);
    FAIL() << "no error";
  } catch (const benchid::InputError& e) {
    EXPECT_NE(std::string(e.what()).find("changed between the two passes"), std::string::npos) << e.what();
  }
}

}  // namespace
