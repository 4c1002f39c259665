// Step behaviour of a closed loop from its exact frequency response, so a
// delay is exact (no Pade approximation): T = L/(1 + L) (reference to output)
// and S = 1/(1 + L) (output disturbance to output) are sampled on an FFT grid
// at rate fs (>= 400 x the crossover) over a record of duration D (>= 60
// slowest time scales), the impulse response is their inverse FFT and the
// step response its running sum. Metrics (linearly interpolated between
// samples): 10-90 % rise time, overshoot over the final value, 2 % settling
// time (the last time |y - y_final| > 0.02 |y_final|), steady-state error
// 1 - T(0); for the disturbance step, its peak and the time after which it
// stays within 2 % of the step. Requires a stable closed loop.
#pragma once

#include <vector>

#include "loop/margins.h"

namespace benchid::loop {

struct StepMetrics {
  double rise_time_s = 0, overshoot_pct = 0, settling_time_s = 0, steady_state_error = 0;
  double disturbance_peak = 0, disturbance_recovery_s = 0;
  double dt_s = 0;  // sample time of the computed response
  std::vector<double> t, y;  // the reference step response (for plots)
};

// f_scale_hz: a frequency that sets the time scale (e.g. the crossover);
// low_hz: the slowest dynamics worth waiting for (e.g. the lowest pole).
// reference: the numerator of the reference response when it is not L itself
// (a setpoint-free PID: (ki/s) P); then T_r = reference/(1 + L).
StepMetrics step_metrics(const LoopFn& loop, double f_scale_hz, double low_hz, const LoopFn& reference = nullptr);

}  // namespace benchid::loop
