// Private to fit/: the state space as Eigen matrices, and the zero-order-hold
// integral used by discretisation and replay.
#pragma once

#include <Eigen/Dense>
#include <utility>

#include "fit/model.h"

namespace benchid::fit::detail {

struct EigenStateSpace {
  Eigen::MatrixXd a;
  Eigen::VectorXd b, c;
  double d = 0;
};
EigenStateSpace to_eigen(const StateSpace& ss);

// exp([A b; 0 0] tau) (Van Loan): returns e^{A tau} and int_0^tau e^{A s} ds b.
std::pair<Eigen::MatrixXd, Eigen::VectorXd> hold(const Eigen::MatrixXd& a, const Eigen::VectorXd& b, double tau);

}  // namespace benchid::fit::detail
