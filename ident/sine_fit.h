// Least-squares sine fits of IEEE Std 1057 (digitizing waveform recorders),
// also in IEEE Std 1241:
//   three-parameter (frequency known): y[n] ~ a cos(w t_n) + b sin(w t_n) + C
//   four-parameter: also refines w by Gauss-Newton with the extra column
//     -a t sin(w t) + b t cos(w t), starting from a given frequency.
// Result in the form y = A cos(w t + theta) + C with A = sqrt(a^2 + b^2),
// theta = atan2(-b, a); t_n = t0_s + n / rate_hz.
#pragma once

#include <cstddef>

namespace benchid::ident {

struct SineFit {
  double amplitude = 0;     // A, the signal's unit
  double phase_rad = 0;     // theta
  double offset = 0;        // C
  double freq_hz = 0;       // the known or refined frequency
  double residual_rms = 0;  // rms of y - fit
  double total_rms = 0;     // rms of y about its mean
  std::size_t samples = 0;
  int iterations = 0;       // Gauss-Newton steps (4-parameter)
  bool converged = true;
};

SineFit fit_sine3(const double* y, std::size_t n, double freq_hz, double rate_hz, double t0_s = 0);
// max_iter Gauss-Newton steps; converged when |dw| < 1e-12 w.
SineFit fit_sine4(const double* y, std::size_t n, double freq_hz, double rate_hz, double t0_s = 0, int max_iter = 50);

}  // namespace benchid::ident
