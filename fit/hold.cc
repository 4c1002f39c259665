#include "fit/detail/hold.h"

#include <unsupported/Eigen/MatrixFunctions>

namespace benchid::fit::detail {

EigenStateSpace to_eigen(const StateSpace& ss) {
  const auto n = static_cast<Eigen::Index>(ss.b.size());
  EigenStateSpace e;
  e.a.resize(n, n);
  e.b.resize(n);
  e.c.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < n; ++j) e.a(i, j) = ss.a[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)];
    e.b(i) = ss.b[static_cast<std::size_t>(i)];
    e.c(i) = ss.c[static_cast<std::size_t>(i)];
  }
  e.d = ss.d;
  return e;
}

std::pair<Eigen::MatrixXd, Eigen::VectorXd> hold(const Eigen::MatrixXd& a, const Eigen::VectorXd& b, double tau) {
  const Eigen::Index n = a.rows();
  Eigen::MatrixXd m = Eigen::MatrixXd::Zero(n + 1, n + 1);
  m.topLeftCorner(n, n) = a * tau;
  m.topRightCorner(n, 1) = b * tau;
  const Eigen::MatrixXd e = m.exp();
  return {e.topLeftCorner(n, n), e.topRightCorner(n, 1)};
}

}  // namespace benchid::fit::detail
