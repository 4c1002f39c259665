// Invented plants shared by tests and benchmarks.
#pragma once

#include <cmath>

#include "fit/model.h"

namespace benchid::test {

// 15 lightly damped modes (zeta 0.02-0.04) from 5 Hz to 5 kHz, log-spaced
// over three decades, residues varied, plus a direct term 0.01: an order-30
// plant (invented).
inline fit::RationalModel fifteen_mode_plant() {
  fit::RationalModel t;
  for (int i = 0; i < 15; ++i) {
    const double w = 2 * M_PI * 5 * std::pow(1000.0, i / 14.0), z = 0.02 + 0.01 * (i % 3);
    const fit::cplx p(-z * w, w * std::sqrt(1 - z * z)), r(0.1 * w * (1 + i % 4), -0.05 * w * (i % 5));
    t.poles.push_back(p);
    t.poles.push_back(std::conj(p));
    t.residues.push_back(r);
    t.residues.push_back(std::conj(r));
  }
  t.direct = 0.01;
  return t;
}

}  // namespace benchid::test
