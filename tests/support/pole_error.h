// Worst relative distance from each true pole to the nearest fitted one:
// how the fitting tests compare a fitted model with the system it came from.
#pragma once

#include <algorithm>
#include <complex>
#include <vector>

namespace benchid::test {

inline double pole_error(const std::vector<std::complex<double>>& truth, const std::vector<std::complex<double>>& got) {
  double worst = 0;
  for (const auto& p : truth) {
    double best = 1e300;
    for (const auto& q : got) best = std::min(best, std::abs(p - q) / std::abs(p));
    worst = std::max(worst, best);
  }
  return worst;
}

}  // namespace benchid::test
