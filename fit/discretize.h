// Discrete-time versions of an s-domain model, for firmware.
//   zoh     exact for an input held between samples: the state space is
//           discretised by the matrix exponential (Van Loan); a delay of
//           (N + e) T becomes z^-N and, for the fraction, one extra state
//           (modified z-transform, see replay.h). The same as
//           scipy.signal.cont2discrete(method='zoh') without delay.
//   tustin  s = c (z - 1)/(z + 1), c = 2/T, or with prewarping at f_p:
//           c = w_p / tan(w_p T / 2) so the response is exact at f_p; poles
//           and zeros map as z = (c + p)/(c - p), zeros at infinity to
//           z = -1. Computed on the state space (the trapezoidal rule with
//           step 2/c, as scipy.signal.cont2discrete 'bilinear'), so no
//           product over the roots can overflow at high order. A delay must
//           be a whole number of samples here (it is rounded, and the
//           rounding reported).
// Second-order sections: z-domain zeros and poles paired (each pole pair with
// the nearest zeros, poles nearest the unit circle last), b0 b1 b2 / 1 a1 a2
// per section, the gain in the first; descending powers of z.
#pragma once

#include <array>
#include <string>
#include <vector>

#include "fit/model.h"

namespace benchid::fit {

enum class Discretization { zoh, tustin };
Discretization parse_discretization(const std::string& s);  // "zoh" | "tustin"

struct DiscretizeOptions {
  Discretization method = Discretization::zoh;
  double sample_time_s = 0;  // T, > 0
  double prewarp_hz = 0;     // tustin: exact at this frequency (0: none), below Nyquist
};

struct Discretized {
  RationalModel model;        // domain z
  double delay_rounding_s = 0;  // tustin: delay rounded by this much
};

Discretized discretize(const RationalModel& m, const DiscretizeOptions& o);

using Section = std::array<double, 6>;  // b0 b1 b2 a0(=1) a1 a2
std::vector<Section> second_order_sections(const RationalModel& zmodel);

}  // namespace benchid::fit
