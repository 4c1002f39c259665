// The FRF CSV file of DESIGN.md: written and read back unchanged, with
// metadata; hand-made files with magnitude and phase only are read too.
#include "ident/frf_csv.h"

#include <gtest/gtest.h>

#include <sstream>

#include "ident/error.h"
#include "tests/support/expect_close.h"
#include "tests/support/temp_dir.h"

using namespace benchid::ident;
using benchid::test::TempDir;

namespace {

Frf sample_frf() {
  Frf f;
  // std::string(...) rather than a bare literal: GCC 12 warns falsely
  // (-Wrestrict, GCC bug 105329) on assigning short literals here
  f.source = std::string("log.csv");
  f.input = std::string("drive");
  f.input_unit = std::string("V");
  f.output = std::string("speed");
  f.output_unit = std::string("rad/s");
  f.rate_hz = 2000;
  f.segment = 4096;
  f.overlap = 0.5;
  f.averages = 61;
  f.effective_averages = 57.9;
  f.coherence_bound = 0.05;
  for (int i = 1; i <= 5; ++i) {
    f.freq_hz.push_back(i * 0.48828125);
    f.h.push_back(std::polar(1.0 / i, -0.9 * i));  // crosses -180 deg: unwrapping shows
    f.coherence.push_back(i == 3 ? std::nan("") : 0.99);
    f.rel_err.push_back(i == 3 ? std::nan("") : 0.01);
    f.reliable.push_back(i != 3);
  }
  return f;
}

TEST(FrfCsv, RoundTripKeepsResponseMetadataAndFlags) {
  TempDir d;
  const Frf f = sample_frf();
  std::ostringstream s;
  write_frf_csv(s, f);
  const std::string text = s.str();
  EXPECT_NE(text.find("# benchid frf 1\n# rate_hz=2000\n# estimator=h1\n"), std::string::npos);
  EXPECT_NE(text.find("freq_hz,re,im,mag_db,phase_deg,coherence,rel_err,reliable\n"), std::string::npos);
  // phase unwrapped along frequency: -0.9*4 rad = -206.26 deg, not +153.74
  EXPECT_NE(text.find(",-206.26"), std::string::npos) << text;
  const Frf g = read_frf_csv(d.write("f.csv", text));
  ASSERT_EQ(g.size(), f.size());
  EXPECT_EQ(g.input, "drive");
  EXPECT_EQ(g.output_unit, "rad/s");
  EXPECT_EQ(g.averages, 61u);
  EXPECT_DOUBLE_EQ(g.rate_hz, 2000);
  for (std::size_t i = 0; i < f.size(); ++i) {
    EXPECT_CLOSE(g.h[i], f.h[i], 1e-11);  // 12 significant digits written
    EXPECT_EQ(g.reliable[i], f.reliable[i]);
  }
  EXPECT_TRUE(std::isnan(g.rel_err[2]));
}

TEST(FrfCsv, ReadsMagnitudeAndPhaseOnly) {
  TempDir d;
  const Frf g = read_frf_csv(d.write("m.csv", "freq_hz,mag_db,phase_deg\n1,20,-90\n2,0,-180\n"));
  EXPECT_CLOSE(g.h[0], std::complex<double>(0, -10), 1e-12, 1e-12);
  EXPECT_CLOSE(g.h[1], std::complex<double>(-1, 0), 1e-12, 1e-12);
}

// Found by fuzzing (tests/fuzz): a header with "re" but no "im" read the
// missing column at index -1 (out of bounds); now the response comes from the
// pair that is complete.
TEST(FrfCsv, UsesTheCompletePairWhenReHasNoIm) {
  TempDir d;
  const Frf g = read_frf_csv(d.write("m.csv", "freq_hz,re,mag_db,phase_deg\n1,7,20,-90\n"));
  EXPECT_CLOSE(g.h[0], std::complex<double>(0, -10), 1e-12, 1e-12);
}

TEST(FrfCsv, RefusesBadRowsNamingTheLine) {
  TempDir d;
  auto err = [&](const std::string& body) {
    try {
      read_frf_csv(d.write("b.csv", body));
    } catch (const benchid::InputError& e) {
      return std::string(e.what());
    }
    return std::string("(no error)");
  };
  EXPECT_NE(err("freq_hz,re,im\n1,1,x\n").find("b.csv:2: column 'im' value 'x'"), std::string::npos);
  EXPECT_NE(err("freq_hz,re,im\n2,1,0\n1,1,0\n").find("b.csv:3: freq_hz 1 does not increase"), std::string::npos);
  EXPECT_NE(err("a,b\n1,2\n").find("header lacks freq_hz"), std::string::npos);
  EXPECT_NE(err("freq_hz,re,im\n").find("no data rows"), std::string::npos);
  EXPECT_NE(err("").find("no header row"), std::string::npos);
  // values outside their meaning (found by fuzzing)
  EXPECT_NE(err("freq_hz,re,im\n-1,1,0\n").find("b.csv:2: freq_hz -1 is negative"), std::string::npos);
  EXPECT_NE(err("freq_hz,re,im,rel_err\n1,1,0,-0.5\n").find("b.csv:2: rel_err -0.5; expected >= 0"), std::string::npos);
  EXPECT_NE(err("freq_hz,re,im,reliable\n1,1,0,2\n").find("b.csv:2: reliable 2; expected 0 or 1"), std::string::npos);
  EXPECT_NE(err("freq_hz,mag_db,phase_deg\n1,7000,0\n").find("mag_db 7000; expected -6000 to 6000 dB"), std::string::npos);
  EXPECT_NE(err("# overlap=1.5\nfreq_hz,re,im\n1,1,0\n").find("metadata overlap=1.5; expected a number from 0 to 0.99"),
            std::string::npos);
  EXPECT_NE(err("# averages=2.5\nfreq_hz,re,im\n1,1,0\n").find("metadata averages=2.5; expected a whole number"),
            std::string::npos);
}

}  // namespace
