// Zeros, gains, Tustin and ZOH models and second-order sections at orders 6
// to 40, against SciPy (tests/reference/make_zeros_reference.py; SciPy and
// NumPy versions in the first line of zeros_reference.txt).
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "fit/discretize.h"
#include "fit/model.h"

using namespace benchid::fit;

namespace {

struct Case {
  int order = 0;
  bool with_d = false;
  RationalModel m;
  std::vector<cplx> zeros, tustin_zeros;
  double gain = 0, sample_time_s = 0;
  std::vector<std::pair<double, cplx>> tustin, zoh, sos;
};

std::vector<Case> load() {
  std::ifstream in(std::string(BENCHID_TEST_DATA_DIR) + "/reference/zeros_reference.txt");
  std::vector<Case> out;
  std::string line;
  Case c;
  while (std::getline(in, line)) {
    std::istringstream s(line);
    std::string key;
    s >> key;
    double a = 0, b = 0, x = 0, y = 0;
    if (key == "model") {
      c = Case{};
      int d = 0;
      s >> c.order >> d;
      c.with_d = d != 0;
    } else if (key == "pole") {
      s >> a >> b >> x >> y;
      c.m.poles.emplace_back(a, b);
      c.m.residues.emplace_back(x, y);
    } else if (key == "direct") {
      s >> c.m.direct;
    } else if (key == "zero" || key == "tustin_zero") {
      s >> a >> b;
      (key == "zero" ? c.zeros : c.tustin_zeros).emplace_back(a, b);
    } else if (key == "gain") {
      s >> c.gain;
    } else if (key == "sample_time") {
      s >> c.sample_time_s;
    } else if (key == "tustin" || key == "zoh" || key == "sos") {
      s >> x >> a >> b;
      (key == "tustin" ? c.tustin : key == "zoh" ? c.zoh : c.sos).push_back({x, cplx(a, b)});
    } else if (key == "end") {
      out.push_back(c);
    }
  }
  return out;
}

// the largest distance from a zero of `got` to its partner in `want`, each
// relative to max(|z|, 1e-3 w0): greedy nearest matching (the zeros are
// well apart at these orders)
double worst_match(std::vector<cplx> got, const std::vector<cplx>& want, double w0) {
  if (got.size() != want.size()) return INFINITY;
  double worst = 0;
  for (const cplx& w : want) {
    auto it = std::min_element(got.begin(), got.end(),
                               [&](cplx a, cplx b) { return std::abs(a - w) < std::abs(b - w); });
    worst = std::max(worst, std::abs(*it - w) / std::max(std::abs(w), 1e-3 * w0));
    got.erase(it);
  }
  return worst;
}

cplx sections_response(const std::vector<Section>& sec, double f_hz, double t) {
  const cplx zi = std::polar(1.0, -2 * M_PI * f_hz * t);
  cplx h = 1.0;
  for (const Section& s : sec)
    h *= (s[0] + s[1] * zi + s[2] * zi * zi) / (s[3] + s[4] * zi + s[5] * zi * zi);
  return h;
}

const std::vector<Case>& cases() {
  static const std::vector<Case> c = load();
  return c;
}

}  // namespace

// The pencil's zeros agree with SciPy's QZ (LAPACK) on the same scaled
// pencil. Both are backward stable (error about eps ||M|| = 1e-16 in the
// scaled pencil); the tolerance 1e-8 relative leaves room for the zeros'
// condition numbers at order 40. Their count is n - relative degree (n with
// a direct term, n - 1 without), and H vanishes at each: |H(z)| at most 1e-8
// of the sum of the terms' magnitudes there (the cancellation's own scale).
TEST(Zeros, MatchTheScaledPencilOfScipyAtEveryOrder) {
  ASSERT_EQ(cases().size(), 10u);
  for (const Case& c : cases()) {
    double w0 = 0;
    for (const cplx& p : c.m.poles) w0 = std::max(w0, std::abs(p));
    const Zpk z = c.m.zpk();
    SCOPED_TRACE("order " + std::to_string(c.order) +
                 (c.with_d ? " with direct term" : " strictly proper"));
    EXPECT_EQ(z.zeros.size(), static_cast<std::size_t>(c.with_d ? c.order : c.order - 1));
    EXPECT_LT(worst_match(z.zeros, c.zeros, w0), 1e-8);
    for (const cplx& q : z.zeros) {
      double scale = std::fabs(c.m.direct);
      for (std::size_t i = 0; i < c.m.poles.size(); ++i)
        scale += std::abs(c.m.residues[i] / (q - c.m.poles[i]));
      EXPECT_LT(std::abs(c.m.rational(q)), 1e-8 * scale) << q;
    }
    // k of k prod(s - z)/prod(s - p): the first Markov parameter (SciPy's D or C B)
    EXPECT_NEAR(z.gain, c.gain, 1e-9 * std::fabs(c.gain));
    // and the zpk form gives H back at a line in the band
    const cplx s(0, 2 * M_PI * 100.0);
    cplx h = z.gain;
    for (const cplx& q : z.zeros) h *= s - q;
    for (const cplx& p : z.poles) h /= s - p;
    EXPECT_LT(std::abs(h - c.m.rational(s)), 1e-8 * std::abs(c.m.rational(s)));
  }
}

// Tustin (bilinear, no prewarp) and ZOH models against scipy's
// cont2discrete on the same state space, on the unit circle: 1e-8 of the
// response's largest magnitude over the test frequencies (a 40-state solve
// in double precision, common practice).
TEST(Zeros, TustinAndZohMatchScipyAtEveryOrder) {
  for (const Case& c : cases()) {
    SCOPED_TRACE("order " + std::to_string(c.order) +
                 (c.with_d ? " with direct term" : " strictly proper"));
    for (Discretization method : {Discretization::tustin, Discretization::zoh}) {
      const auto& ref = method == Discretization::tustin ? c.tustin : c.zoh;
      const Discretized d = discretize(c.m, {method, c.sample_time_s, 0});
      double peak = 0;
      for (const auto& [f, h] : ref) peak = std::max(peak, std::abs(h));
      for (const auto& [f, h] : ref)
        EXPECT_LT(std::abs(d.model.response(f) - h), 1e-8 * peak)
            << (method == Discretization::tustin ? "tustin" : "zoh") << " at " << f << " Hz";
    }
    const Discretized t = discretize(c.m, {Discretization::tustin, c.sample_time_s, 0});
    EXPECT_LT(worst_match(t.model.zpk().zeros, c.tustin_zeros, 1.0), 1e-7);
  }
}

// Second-order sections of the Tustin model reproduce the z-model, and so
// scipy's zpk2sos cascade, at 1e-8 of the largest magnitude.
TEST(Zeros, SecondOrderSectionsReproduceTheZModelAtEveryOrder) {
  for (const Case& c : cases()) {
    SCOPED_TRACE("order " + std::to_string(c.order) +
                 (c.with_d ? " with direct term" : " strictly proper"));
    const Discretized t = discretize(c.m, {Discretization::tustin, c.sample_time_s, 0});
    const std::vector<Section> sec = second_order_sections(t.model);
    EXPECT_EQ(sec.size(), static_cast<std::size_t>(c.order / 2));
    double peak = 0;
    for (const auto& [f, h] : c.sos) peak = std::max(peak, std::abs(h));
    for (const auto& [f, h] : c.sos) {
      EXPECT_LT(std::abs(sections_response(sec, f, c.sample_time_s) - h), 1e-8 * peak)
          << f << " Hz";
      EXPECT_LT(std::abs(sections_response(sec, f, c.sample_time_s) - t.model.response(f)),
                1e-8 * peak)
          << f << " Hz";
    }
  }
}
