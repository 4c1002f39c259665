// Private to fit/: the parts of replay shared by the whole-record and the
// streaming implementations.
#pragma once

#include <cstddef>

#include "fit/replay.h"

namespace benchid::fit::detail {

// Samples left out at the start (settling, or all but the held-out part).
std::size_t settle_samples(const RationalModel& m, std::size_t n, double rate_hz, const ReplayOptions& o);
// threshold = max(bound, practical); pass when at most 1 % of the lags (at least 1) exceed it.
void judge(CorrelationTest& c, double practical);
// The one-line verdict from match % and the two tests.
void set_verdict(ReplayResult& r);

}  // namespace benchid::fit::detail

#include <Eigen/Dense>
#include <vector>

namespace benchid::fit::detail {

// The exact zero-order-hold simulation of replay.h, one sample at a time
// (its delay line holds the whole-sample part of the delay).
class ZohSimulator {
 public:
  ZohSimulator(const RationalModel& m, double rate_hz);
  double step(double u);  // output at this sample, then the state advances

 private:
  Eigen::MatrixXd ad_;
  Eigen::VectorXd b1_, b2_, c_, x_;
  double d_ = 0, frac_ = 0;
  std::size_t whole_ = 0, head_ = 0;
  std::vector<double> line_;
};

}  // namespace benchid::fit::detail
