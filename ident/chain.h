// Corrections for the measuring chain, applied to an estimated FRF: a time
// shift per channel (a DAQ's channel skew, an audio interface's converter
// latency, a drive scope's trigger offset), a polarity flip, and the
// division by a loopback FRF of the chain alone.
//
// A channel whose samples are late by tau (x_rec(t) = x(t - tau)) has its
// spectrum multiplied by e^{-j 2 pi f tau}, so H = Y/U as recorded carries
// e^{-j 2 pi f (tau_y - tau_u)}; the correction multiplies H by
// e^{+j 2 pi f (tau_y - tau_u)}, exact for any fractional number of samples
// (a linear phase on the spectra). One sample of skew at 8 kHz is 4.5 deg of
// phase at 100 Hz. Coherence and random error do not change. The windows of
// the two channels still cover times tau apart, which biases the estimate
// when tau is not small against a segment (Bendat & Piersol's time-delay
// bias): warned above 1/8 of a segment.
//
// Calibration: a loopback FRF C(f) measured with the same settings through
// the chain alone (sensor and input channel driven by the same signal as
// the output channel: AC coupling, anti-alias filters, sensor responses)
// gives the plant as H/C line by line. The relative random errors add in
// quadrature (independent measurements, first order):
// eps = sqrt(eps_H^2 + eps_C^2); a line is reliable when both are.
#pragma once

#include <string>

#include "ident/frf.h"

namespace benchid::ident {

struct ChainCorrection {
  double input_lag_s = 0;   // the input channel's samples are late by this, s (may be negative)
  double output_lag_s = 0;  // the output channel's samples are late by this, s
  bool invert_input = false, invert_output = false;  // polarity flips
  const Frf* calibration = nullptr;                  // loopback FRF of the chain alone, or none
  std::string calibration_name;                      // its file, for messages and the metadata
};

// Applies the corrections to f (response, error and flags; the spectra
// columns guu/gyy/guy stay as measured) and records them in f.corrections.
// Throws InputError when the calibration FRF does not share f's lines or
// rate, naming both.
void correct_chain(Frf& f, const ChainCorrection& c);

}  // namespace benchid::ident
