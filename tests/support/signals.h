// Deterministic test signals: a seeded Gaussian source and difference
// equations. std::normal_distribution is not portable across standard
// libraries, so Gaussian samples come from a Box-Muller transform of
// mt19937_64 draws.
#pragma once

#include <cmath>
#include <complex>
#include <cstdint>
#include <random>
#include <vector>

namespace benchid::test {

class Gaussian {
 public:
  explicit Gaussian(std::uint64_t seed) : gen_(seed) {}
  double operator()() {
    if (have_) {
      have_ = false;
      return spare_;
    }
    const double u1 = (static_cast<double>(gen_() >> 11) + 0.5) * 0x1.0p-53;
    const double u2 = static_cast<double>(gen_() >> 11) * 0x1.0p-53;
    const double r = std::sqrt(-2.0 * std::log(u1));
    spare_ = r * std::sin(2 * M_PI * u2);
    have_ = true;
    return r * std::cos(2 * M_PI * u2);
  }
  std::vector<double> take(std::size_t n, double sigma = 1.0) {
    std::vector<double> v(n);
    for (auto& x : v) x = sigma * (*this)();
    return v;
  }

 private:
  std::mt19937_64 gen_;
  bool have_ = false;
  double spare_ = 0;
};

// Second-order section b0 + b1 z^-1 + b2 z^-2 over 1 + a1 z^-1 + a2 z^-2.
struct Biquad {
  double b0, b1, b2, a1, a2;
  std::vector<double> filter(const std::vector<double>& x) const {
    std::vector<double> y(x.size());
    double x1 = 0, x2 = 0, y1 = 0, y2 = 0;
    for (std::size_t i = 0; i < x.size(); ++i) {
      y[i] = b0 * x[i] + b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2;
      x2 = x1, x1 = x[i], y2 = y1, y1 = y[i];
    }
    return y;
  }
  std::complex<double> response(double f_over_fs) const {
    const std::complex<double> z1 = std::polar(1.0, -2 * M_PI * f_over_fs);
    return (b0 + b1 * z1 + b2 * z1 * z1) / (1.0 + a1 * z1 + a2 * z1 * z1);
  }
  // Bilinear-transform Butterworth low-pass of order 2, cutoff fc/fs (common practice).
  static Biquad butterworth_lowpass(double fc_over_fs) {
    const double k = std::tan(M_PI * fc_over_fs), q = std::sqrt(2.0);
    const double norm = 1.0 / (1.0 + q * k + k * k);
    return {k * k * norm, 2 * k * k * norm, k * k * norm, 2 * (k * k - 1) * norm, (1 - q * k + k * k) * norm};
  }
  // Resonator from the bilinear transform of w^2/(s^2 + 2 zeta w s + w^2) (prewarped at f0).
  static Biquad resonance(double f0_over_fs, double zeta) {
    const double k = std::tan(M_PI * f0_over_fs);
    const double a0 = 1 + 2 * zeta * k + k * k;
    return {k * k / a0, 2 * k * k / a0, k * k / a0, 2 * (k * k - 1) / a0, (1 - 2 * zeta * k + k * k) / a0};
  }
};

}  // namespace benchid::test
