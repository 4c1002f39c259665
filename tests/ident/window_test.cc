// Window figures of merit against F. J. Harris, "On the use of windows for
// harmonic analysis with the DFT", Proc. IEEE 66(1):51-83, 1978, Table 1, and
// against the exact values computed with SciPy 1.10.1 in
// ../shared/reference/CHECK_VALUES.md section 1.
#include "ident/window.h"

#include <gtest/gtest.h>

#include <cmath>

#include "tests/support/expect_close.h"

using namespace benchid::ident;

namespace {

struct WindowCase {
  Window window;
  double cg;        // coherent gain, CHECK_VALUES.md s.1 [S] (Harris Table 1 to 2 digits)
  double enbw;      // bins, closed form (a0^2 + sum ak^2/2)/a0^2 [D], Harris Table 1
  double oc50_pct;  // overlap correlation at 50 %, CHECK_VALUES.md s.1 [S], Harris Table 1
  double oc75_pct;  // at 75 %
};

void PrintTo(const WindowCase& c, std::ostream* os) { *os << window_name(c.window); }

class WindowFigures : public ::testing::TestWithParam<WindowCase> {};

TEST_P(WindowFigures, MatchHarrisTableAndClosedForm) {
  const auto& c = GetParam();
  SCOPED_TRACE(window_name(c.window));
  const std::size_t n = 4096;
  const auto w = make_window(c.window, n);
  const auto f = window_figures(w);
  // CHECK_VALUES prints 4-5 significant digits; the closed forms are exact.
  EXPECT_CLOSE(f.coherent_gain, c.cg, 1e-4);
  EXPECT_CLOSE(f.enbw_bins, c.enbw, 1e-5);
  // overlap correlation: printed to 0.01 %
  EXPECT_NEAR(overlap_correlation(w, n / 2) * 100, c.oc50_pct, 0.006);
  EXPECT_NEAR(overlap_correlation(w, n / 4) * 100, c.oc75_pct, 0.006);
}

INSTANTIATE_TEST_SUITE_P(
    Harris1978, WindowFigures,
    ::testing::Values(WindowCase{Window::rect, 1.0, 1.0, 50.00, 75.00},
                      WindowCase{Window::hann, 0.5, 1.5, 16.67, 65.92},
                      WindowCase{Window::hamming, 0.54, 1.362826, 23.38, 70.69},
                      WindowCase{Window::blackmanharris, 0.35875, 2.004353, 3.76, 46.00},
                      WindowCase{Window::flattop, 0.21557895, 3.770246, -1.53, 4.55}));

TEST(Window, PeriodicHannAndFlattopOfEightMatchScipy) {
  // scipy.signal.get_window(name, 8) (periodic), CHECK_VALUES.md s.1 [S], 6 decimals
  const double hann[] = {0, .146447, .5, .853553, 1, .853553, .5, .146447};
  const double flat[] = {-.000421, -.026872, -.054737, .444135, 1, .444135, -.054737, -.026872};
  const auto h = make_window(Window::hann, 8), f = make_window(Window::flattop, 8);
  for (int i = 0; i < 8; ++i) {
    EXPECT_NEAR(h[i], hann[i], 5e-7) << i;
    EXPECT_NEAR(f[i], flat[i], 5e-7) << i;
  }
}

TEST(Window, ScallopingLossOfHammingIsTheExactValue) {
  // CHECK_VALUES.md s.1: Harris prints 1.78 dB, the exact value is 1.7514 dB [S].
  const std::size_t n = 4096;
  const auto w = make_window(Window::hamming, n);
  std::complex<double> half{0}, dc{0};
  for (std::size_t i = 0; i < n; ++i) {
    dc += w[i];
    half += w[i] * std::polar(1.0, -M_PI * static_cast<double>(i) / static_cast<double>(n));
  }
  EXPECT_NEAR(-20 * std::log10(std::abs(half) / std::abs(dc)), 1.7514, 0.01);
}

TEST(Window, EffectiveAveragesFollowWelchOverlapCorrection) {
  // Hann 50 %: n_eff for K = 7, 15, 31, 63 segments, CHECK_VALUES.md s.2 [S]
  const std::size_t n = 1024;
  const auto w = make_window(Window::hann, n);
  EXPECT_NEAR(effective_averages(w, n / 2, 7), 6.682, 0.0005);
  EXPECT_NEAR(effective_averages(w, n / 2, 15), 14.261, 0.0005);
  EXPECT_NEAR(effective_averages(w, n / 2, 31), 29.418, 0.0005);
  EXPECT_NEAR(effective_averages(w, n / 2, 63), 59.734, 0.0005);
  // large-K variance factor: rectangular 50 % 1.4995, Hann 75 % 1.9237 [S]
  const auto r = make_window(Window::rect, n);
  EXPECT_NEAR(1000.0 / effective_averages(r, n / 2, 1000), 1.4995, 0.0005);
  EXPECT_NEAR(1000.0 / effective_averages(w, n / 4, 1000), 1.9237, 0.0005);
  // without overlap the segments are independent
  EXPECT_DOUBLE_EQ(effective_averages(w, n, 10), 10.0);
}

TEST(Window, RejectsUnknownNameListingTheChoices) {
  try {
    parse_window("kaiser");
    FAIL() << "no error";
  } catch (const std::exception& e) {
    EXPECT_NE(std::string(e.what()).find("'kaiser' is unknown; expected rect, hann"), std::string::npos) << e.what();
  }
}

}  // namespace
