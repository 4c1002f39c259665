// Stitching FRFs line by line by the lower random error (ident/stitch.h), on
// two made-up measurements of 1/(1 + j f/50): a fine low band whose error
// grows with frequency and a coarse wide band of constant error.
#include "ident/stitch.h"

#include <gtest/gtest.h>

#include <cmath>
#include <complex>

#include "ident/error.h"
#include "tests/support/signals.h"

using namespace benchid::ident;
using cplx = std::complex<double>;

namespace {

cplx truth(double f) { return 1.0 / cplx(1, f / 50); }

// lines f0, f0 + df, ... up to f1 with error e(f); the response carries that
// error drawn (each real component rel_err |H| / sqrt(2)) when noise is given
Frf measured(double f0, double df, double f1, double (*e)(double), benchid::test::Gaussian* noise) {
  Frf f;
  // std::string(...): GCC 12 warns falsely (-Wrestrict, GCC bug 105329) on short literals here
  f.output_unit = std::string("mm"), f.input_unit = std::string("V");
  for (double x = f0; x <= f1 + 1e-9; x += df) {
    const double err = e(x);
    cplx h = truth(x);
    if (noise) h += err * std::abs(h) / std::sqrt(2.0) * cplx((*noise)(), (*noise)());
    f.freq_hz.push_back(x);
    f.h.push_back(h);
    f.coherence.push_back(0.99);
    f.rel_err.push_back(err);
    f.reliable.push_back(1);
  }
  return f;
}

double low_err(double f) { return 0.001 * f; }
double wide_err(double) { return 0.05; }

TEST(Stitch, EachLineComesFromTheSourceWithTheLowerError) {
  const Frf a = measured(1, 1, 100, low_err, nullptr), b = measured(20, 2.5, 500, wide_err, nullptr);
  const StitchResult r = stitch({{&a, "low.csv"}, {&b, "wide.csv"}});
  // below 50 Hz the low band is better; at 50 Hz the errors tie and the first source wins
  for (std::size_t i = 0; i < r.frf.size(); ++i) {
    const double f = r.frf.freq_hz[i];
    if (f <= 50) EXPECT_EQ(r.frf.rel_err[i], low_err(f)) << f;
    else EXPECT_EQ(r.frf.rel_err[i], 0.05) << f;
  }
  EXPECT_EQ(r.lines_from[0], 50u);                    // 1..50 Hz
  EXPECT_EQ(r.lines_from[1], (500 - 52.5) / 2.5 + 1);  // 52.5..500 Hz
  ASSERT_EQ(r.seams_hz.size(), 1u);
  EXPECT_DOUBLE_EQ(r.seams_hz[0], 51.25);
  EXPECT_NE(r.frf.corrections.back().find("seams at 51.25 Hz"), std::string::npos);
}

TEST(Stitch, AnUnreliableStretchIsFilledFromTheOtherSource) {
  Frf a = measured(1, 1, 100, low_err, nullptr);
  const Frf b = measured(20, 2.5, 500, wide_err, nullptr);
  for (std::size_t i = 0; i < a.size(); ++i)
    if (a.freq_hz[i] >= 30 && a.freq_hz[i] <= 35) a.reliable[i] = 0;  // e.g. a mains line nearby
  const StitchResult r = stitch({{&a, "low.csv"}, {&b, "wide.csv"}});
  std::size_t from_wide_below_50 = 0;
  for (std::size_t i = 0; i < r.frf.size(); ++i)
    if (r.frf.freq_hz[i] < 50 && r.frf.rel_err[i] == 0.05) ++from_wide_below_50;
  EXPECT_EQ(from_wide_below_50, 3u);  // 30, 32.5 and 35 Hz
  EXPECT_EQ(r.seams_hz.size(), 3u);
  for (std::size_t i = 0; i < r.frf.size(); ++i) EXPECT_EQ(r.frf.reliable[i], 1) << r.frf.freq_hz[i];
}

// Continuity where the bands overlap: between neighbouring lines, across a
// seam or not, the response steps by no more than the true change plus 3.5
// times the combined random error. The step's error is complex Gaussian with
// each component's variance half the combined one, so it exceeds that with
// P = exp(-3.5^2) = 5e-6 per pair of lines.
TEST(Stitch, TheStitchedResponseIsContinuousAtTheSeams) {
  for (std::uint64_t seed = 1; seed <= 20; ++seed) {
    benchid::test::Gaussian g(seed);
    const Frf a = measured(1, 1, 100, low_err, &g), b = measured(20, 2.5, 500, wide_err, &g);
    const StitchResult r = stitch({{&a, "low.csv"}, {&b, "wide.csv"}});
    for (std::size_t i = 1; i < r.frf.size(); ++i) {
      const double f0 = r.frf.freq_hz[i - 1], f1 = r.frf.freq_hz[i];
      const double step = std::abs(r.frf.h[i] - r.frf.h[i - 1]);
      const double allowed = std::abs(truth(f1) - truth(f0)) +
                             3.5 * std::hypot(r.frf.rel_err[i] * std::abs(truth(f1)), r.frf.rel_err[i - 1] * std::abs(truth(f0)));
      EXPECT_LE(step, allowed) << "seed " << seed << " between " << f0 << " and " << f1 << " Hz";
    }
  }
}

TEST(Stitch, RefusesFrfsOfOtherQuantities) {
  const Frf a = measured(1, 1, 100, low_err, nullptr);
  Frf b = measured(20, 2.5, 500, wide_err, nullptr);
  b.output_unit = std::string("rad/s");
  try {
    stitch({{&a, "low.csv"}, {&b, "wide.csv"}});
    FAIL() << "accepted";
  } catch (const benchid::InputError& e) {
    EXPECT_NE(std::string(e.what()).find("wide.csv: units rad/s/V, but low.csv has mm/V"), std::string::npos) << e.what();
  }
  EXPECT_THROW(stitch({{&a, "low.csv"}}), benchid::InputError);
}

}  // namespace
