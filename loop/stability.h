// Closed-loop stability of L = C P (negative feedback), two ways:
//  - Nyquist: with the D-contour indented to the right of the K poles at the
//    origin, Z = P - (2 D - K pi) / (2 pi), where P counts the open-loop poles
//    in the right half plane and D is the change of arg(1 + L(j w)) from the
//    low to the high end of the frequency range (Nyquist 1932; the
//    indentation's -K pi from L ~ c/s^K there). Works with delays.
//  - Closed-loop poles: for a rational loop (no delay, or both parts discrete
//    with the delay a whole number of samples), the roots of
//    D_c D_p + N_c N_p; stable when all lie in the left half plane (inside
//    the unit circle for z).
// When both apply they must agree; a disagreement is reported, not hidden.
#pragma once

#include <string>
#include <vector>

#include "fit/model.h"
#include "loop/controller.h"

namespace benchid::loop {

struct Stability {
  bool judged = false;       // false: the reason says why
  bool stable = false;
  int open_loop_unstable = 0;  // P
  int nyquist_unstable = -1;   // Z from the Nyquist count (-1: not counted)
  std::vector<fit::cplx> closed_loop_poles;  // when the loop is rational
  bool poles_available = false;
  std::string reason;        // how it was judged, or why not
};

// nyquist_points: the log grid of the count (enough to follow arg(1 + L)
// across the sharpest resonance: the default resolves damping down to ~1e-4)
Stability closed_loop_stability(const fit::RationalModel& plant, const Controller& c, double f_lo_hz, double f_hi_hz,
                                std::size_t nyquist_points = 200000);

}  // namespace benchid::loop
