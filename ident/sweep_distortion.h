// Harmonic distortion from an exponential-sweep record (Farina, "Simultaneous
// measurement of impulse response and distortion with a swept-sine
// technique", AES 108th Convention, 2000).
//
// Deconvolving the output by the input, H = Y conj(U) / (|U|^2 + eps), puts
// the linear impulse response at t = 0 and the k-th harmonic's at
// t = -dt_k = -T ln k / ln(f1/f0). Each is cut out between its neighbours;
// for an exponential sweep the spectrum of the k-th, read at k f, over the
// linear one at f, is the ratio of the k-th harmonic's amplitude to the
// fundamental's when the input is a sine at f:
//   HD_k(f) = |H_k(k f)| / |H_1(f)|,   f0 <= f and k f <= f1.
// Per octave band of the input frequency the powers are summed before the
// ratio. Noise in the record adds to every figure: a value near the record's
// noise floor only says that distortion is below it.
#pragma once

#include <vector>

#include "ident/excite.h"

namespace benchid::ident {

struct SweepHarmonics {
  int max_order = 0;                 // harmonics 2..max_order
  std::vector<double> overall_db;    // [k-2]: HD_k over the whole separable band, dB re fundamental
  struct Band {
    double f_lo_hz = 0, f_hi_hz = 0;  // input-frequency octave
    std::vector<double> ratio_db;     // [k-2], NaN where k f leaves the sweep
  };
  std::vector<Band> bands;
};

// u, y: one sweep (from rest, periodic = false) or one steady-state period
// of repeated sweeps (periodic = true). Needs an upward exponential sweep.
SweepHarmonics sweep_harmonics(const std::vector<double>& u, const std::vector<double>& y, double rate_hz,
                               const SweepOptions& sweep, bool periodic, int max_order = 5);

}  // namespace benchid::ident
