// One closeness check for every numeric test: relative, falling back to
// absolute near zero, NaN-aware, printing both values and the tolerance.
#pragma once

#include <gtest/gtest.h>

#include <cmath>
#include <complex>
#include <string>

namespace benchid::test {

inline ::testing::AssertionResult close(double actual, double expected, double rel, double abs_floor = 0.0) {
  if (std::isnan(actual) || std::isnan(expected)) {
    if (std::isnan(actual) && std::isnan(expected)) return ::testing::AssertionSuccess();
    return ::testing::AssertionFailure() << "actual " << actual << ", expected " << expected;
  }
  const double tol = std::max(rel * std::fabs(expected), abs_floor);
  const double err = std::fabs(actual - expected);
  if (err <= tol) return ::testing::AssertionSuccess();
  return ::testing::AssertionFailure() << "actual " << actual << ", expected " << expected << ", |error| "
                                       << err << " > tolerance " << tol;
}

inline ::testing::AssertionResult close(std::complex<double> actual, std::complex<double> expected, double rel,
                                        double abs_floor = 0.0) {
  const double tol = std::max(rel * std::abs(expected), abs_floor);
  const double err = std::abs(actual - expected);
  if (err <= tol) return ::testing::AssertionSuccess();
  return ::testing::AssertionFailure() << "actual " << actual << ", expected " << expected << ", |error| "
                                       << err << " > tolerance " << tol;
}

}  // namespace benchid::test

#define EXPECT_CLOSE(actual, expected, rel, ...) \
  EXPECT_TRUE(::benchid::test::close((actual), (expected), (rel), ##__VA_ARGS__))
