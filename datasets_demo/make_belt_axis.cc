// Generator of the invented "belt axis" demo recording (see belt_axis/README.md).
//
// INVENTED SCENARIO, for demonstration only: a belt-driven carriage on a
// packaging-line test rig, driven by a voltage-commanded motor drive. The
// drive command (V) is band-limited random noise; the motor speed (rad/s) is
// logged by the drive's scope at 2 kHz. The plant is
//   G(s) = K (s^2/wa^2 + 2 za s/wa + 1) / ((s^2/wr^2 + 2 zr s/wr + 1)(tau s + 1)) e^(-s T)
// (a two-mass belt: anti-resonance wa below resonance wr, seen from the motor
// side), simulated with the command held over each sample (zero-order hold),
// integrated by RK4 with 16 sub-steps, plus white speed-measurement noise.
//
// Usage: benchid_make_belt_axis OUT.csv
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <random>
#include <vector>

namespace {

// Stated truth (README.md repeats these).
constexpr double kRateHz = 2000.0;
constexpr double kDurationS = 40.0;
constexpr double kGain = 40.0;                   // rad/s per V at DC
constexpr double kTauS = 0.08;                   // mechanical time constant, s (corner 1.99 Hz)
constexpr double kAntiHz = 22.0, kAntiZeta = 0.03;
constexpr double kResHz = 31.0, kResZeta = 0.04;
constexpr int kDelaySamples = 3;                 // 1.5 ms drive + scope delay
constexpr double kDriveRmsV = 1.5;               // command level
constexpr double kDriveBandHz = 300.0;           // command band (2 x 2nd-order Butterworth)
constexpr double kSpeedNoiseRads = 0.8;          // measurement noise, rad/s rms
constexpr std::uint64_t kSeed = 20261202;

struct Gaussian {
  std::mt19937_64 gen{kSeed};
  double operator()() {  // Box-Muller, portable across standard libraries
    const double u1 = (static_cast<double>(gen() >> 11) + 0.5) * 0x1.0p-53;
    const double u2 = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2 * M_PI * u2);
  }
};

struct Biquad {  // bilinear Butterworth low-pass
  double b0, b1, b2, a1, a2, x1 = 0, x2 = 0, y1 = 0, y2 = 0;
  explicit Biquad(double fc_over_fs) {
    const double k = std::tan(M_PI * fc_over_fs), q = std::sqrt(2.0), n = 1 / (1 + q * k + k * k);
    b0 = k * k * n, b1 = 2 * b0, b2 = b0, a1 = 2 * (k * k - 1) * n, a2 = (1 - q * k + k * k) * n;
  }
  double operator()(double x) {
    const double y = b0 * x + b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2;
    x2 = x1, x1 = x, y2 = y1, y1 = y;
    return y;
  }
};

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: %s OUT.csv\n", argv[0]);
    return 2;
  }
  const double wa = 2 * M_PI * kAntiHz, wr = 2 * M_PI * kResHz;
  // G = K N(s)/D(s); N = n2 s^2 + n1 s + 1, D = d3 s^3 + d2 s^2 + d1 s + 1
  const double n2 = 1 / (wa * wa), n1 = 2 * kAntiZeta / wa;
  const double r2 = 1 / (wr * wr), r1 = 2 * kResZeta / wr;
  const double d3 = r2 * kTauS, d2 = r2 + r1 * kTauS, d1 = r1 + kTauS;
  // controllable canonical form of N/D normalised by d3
  const double a0 = 1 / d3, a1 = d1 / d3, a2 = d2 / d3;     // s^3 + a2 s^2 + a1 s + a0
  const double c0 = kGain / d3, c1 = kGain * n1 / d3, c2 = kGain * n2 / d3;
  auto deriv = [&](const double x[3], double u, double dx[3]) {
    dx[0] = x[1];
    dx[1] = x[2];
    dx[2] = -a0 * x[0] - a1 * x[1] - a2 * x[2] + u;
  };
  const auto n = static_cast<std::size_t>(kDurationS * kRateHz);
  Gaussian g;
  Biquad f1(kDriveBandHz / kRateHz), f2(kDriveBandHz / kRateHz);
  std::vector<double> drive(n);
  for (auto& d : drive) d = f2(f1(g()));
  double ms = 0;
  for (double d : drive) ms += d * d;
  const double scale = kDriveRmsV / std::sqrt(ms / static_cast<double>(n));
  for (auto& d : drive) d *= scale;

  std::FILE* out = std::fopen(argv[1], "w");
  if (!out) {
    std::perror(argv[1]);
    return 2;
  }
  std::fprintf(out,
               "# INVENTED demo data (benchid datasets_demo/belt_axis): belt-driven carriage, drive command "
               "to motor speed; see README.md\n");
  std::fprintf(out, "time_s,drive_v,speed_rads\n");
  double x[3] = {0, 0, 0};
  const int sub = 16;
  const double h = 1.0 / kRateHz / sub;
  for (std::size_t i = 0; i < n; ++i) {
    const double y = c0 * x[0] + c1 * x[1] + c2 * x[2];
    std::fprintf(out, "%.4f,%.5f,%.4f\n", static_cast<double>(i) / kRateHz, drive[i], y + kSpeedNoiseRads * g());
    const double u = i >= kDelaySamples ? drive[i - kDelaySamples] : 0.0;  // held over the interval
    for (int s = 0; s < sub; ++s) {
      double k1[3], k2[3], k3[3], k4[3], t[3];
      deriv(x, u, k1);
      for (int j = 0; j < 3; ++j) t[j] = x[j] + 0.5 * h * k1[j];
      deriv(t, u, k2);
      for (int j = 0; j < 3; ++j) t[j] = x[j] + 0.5 * h * k2[j];
      deriv(t, u, k3);
      for (int j = 0; j < 3; ++j) t[j] = x[j] + h * k3[j];
      deriv(t, u, k4);
      for (int j = 0; j < 3; ++j) x[j] += h / 6 * (k1[j] + 2 * k2[j] + 2 * k3[j] + k4[j]);
    }
  }
  return std::fclose(out) == 0 ? 0 : 2;
}
