// correct_chain on hand-made FRFs: the sign of a lag, the errors of a
// calibrated line added in quadrature (independent measurements, first order:
// Bendat & Piersol's propagation of random error), the flags, and the
// corrections kept in the FRF CSV.
#include "ident/chain.h"

#include <gtest/gtest.h>

#include <cmath>
#include <sstream>

#include "ident/error.h"
#include "ident/frf_csv.h"
#include "tests/support/temp_dir.h"

using namespace benchid::ident;
using cplx = std::complex<double>;

namespace {

Frf three_lines() {
  Frf f;
  f.rate_hz = 1000, f.segment = 1000, f.samples = 10000;
  f.freq_hz = {10, 100, 250};
  f.h = {cplx(2, 0), cplx(0, -1), cplx(-0.5, 0.5)};
  f.coherence = {0.99, 0.98, 0.97};
  f.rel_err = {0.03, 0.03, 0.03};
  f.reliable = {1, 1, 1};
  return f;
}

TEST(ChainCorrection, AnOutputLateByTauIsAdvancedByTwoPiFTau) {
  Frf f = three_lines();
  ChainCorrection c;
  c.output_lag_s = 0.001;  // one sample at 1 kHz: 36 deg at 100 Hz
  correct_chain(f, c);
  EXPECT_NEAR(std::arg(f.h[1]) * 180 / M_PI, -90 + 36, 1e-12);
  EXPECT_NEAR(std::abs(f.h[2]), std::abs(cplx(-0.5, 0.5)), 1e-15);
  EXPECT_EQ(f.rel_err[1], 0.03);  // a shift changes no error
  ASSERT_EQ(f.corrections.size(), 1u);
  EXPECT_EQ(f.corrections[0], "output lag 0.001 s");
}

TEST(ChainCorrection, CalibrationDividesAndAddsTheErrorsInQuadrature) {
  Frf f = three_lines(), cal = three_lines();
  cal.h = {cplx(1, 0), cplx(0, 2), cplx(0, 0)};
  cal.rel_err = {0.04, 0.04, 0.04};
  cal.reliable = {1, 0, 1};
  ChainCorrection c;
  c.calibration = &cal;
  c.calibration_name = "loop.csv";
  correct_chain(f, c);
  EXPECT_EQ(f.h[0], cplx(2, 0));
  EXPECT_NEAR(std::abs(f.h[1] - cplx(-0.5, 0)), 0, 1e-15);
  EXPECT_NEAR(f.rel_err[0], 0.05, 1e-15);  // sqrt(0.03^2 + 0.04^2)
  EXPECT_EQ(f.reliable[1], 0);             // the loopback line was unreliable
  EXPECT_EQ(f.reliable[2], 0);             // nothing passes the chain at 250 Hz
  EXPECT_TRUE(std::isnan(f.rel_err[2]));
  EXPECT_EQ(f.h[2], cplx(-0.5, 0.5));      // left as measured
  ASSERT_FALSE(f.warnings.empty());
  EXPECT_NE(f.warnings.back().find("1 lines where the calibration response is zero"), std::string::npos);
  // the corrections travel with the FRF CSV
  std::ostringstream out;
  write_frf_csv(out, f);
  benchid::test::TempDir d;
  const Frf back = read_frf_csv(d.write("h.csv", out.str()));
  EXPECT_EQ(back.corrections, f.corrections);
  EXPECT_EQ(back.corrections.back(), "calibrated by loop.csv");
}

TEST(ChainCorrection, ACalibrationOnAnotherGridIsRefused) {
  Frf f = three_lines(), cal = three_lines();
  cal.freq_hz[1] = 101;
  ChainCorrection c;
  c.calibration = &cal;
  c.calibration_name = "loop.csv";
  try {
    correct_chain(f, c);
    FAIL() << "accepted";
  } catch (const benchid::InputError& e) {
    EXPECT_NE(std::string(e.what()).find("loop.csv: line 2 is at 101 Hz, the measurement's at 100 Hz"), std::string::npos)
        << e.what();
  }
}

}  // namespace
