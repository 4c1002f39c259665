// Rational models of a plant.
//
// Authoritative form (pole-residue), in the Laplace variable s in rad/s for
// domain "s", or in z for domain "z" (sample time T_s):
//   H(x) = [ sum_i r_i / (x - p_i) + d + h x ] / q(x)^K * e^(-s delay)
// x = s or z; poles p_i and residues r_i complex, conjugate pairs both listed
// (a real model); d "direct", h "proportional" (s only); K integrators, kept
// apart so that repeated poles are exact: q(s) = s (poles at the origin),
// q(z) = z - 1 (poles at z = 1). The delay
// is e^(-s delay_s) in s, z^(-delay/T_s) in z (a whole number of samples there).
// Frequencies given to response() are in Hz.
#pragma once

#include <complex>
#include <string>
#include <vector>

namespace benchid::fit {

using cplx = std::complex<double>;

enum class Domain { s, z };

struct Zpk {
  std::vector<cplx> zeros, poles;  // rad/s (or z-plane)
  double gain = 0;                 // k of k prod(x - z) / prod(x - p)
};

struct Polynomial {
  std::vector<double> num, den;  // descending powers; den[0] = 1
};

struct StateSpace {
  // x' = A x + B u, y = C x + D u (real; single input, single output)
  std::vector<std::vector<double>> a;
  std::vector<double> b, c;
  double d = 0;
};

struct RationalModel {
  Domain domain = Domain::s;
  double sample_time_s = 0;  // domain z only
  double delay_s = 0;
  std::vector<cplx> poles, residues;
  double direct = 0;
  double proportional = 0;
  int integrators = 0;
  int reflected = 0;  // unstable poles reflected into the left half plane by the fit

  std::size_t order() const { return poles.size() + static_cast<std::size_t>(integrators); }
  // H at a point of the complex plane, without the delay.
  cplx rational(cplx x) const;
  // H(j 2 pi f) (or H(e^{j 2 pi f T_s})), with the delay.
  cplx response(double freq_hz) const;
  // Zeros, poles (integrators included) and gain of the rational part. The
  // zeros are the finite generalised eigenvalues of the frequency-scaled
  // system pencil of state_space() (not roots of the expanded numerator,
  // which lose every digit beyond modest orders); k from H at a point away
  // from every root, computed in logarithms.
  Zpk zpk() const;
  std::vector<cplx> transmission_zeros() const;
  // Numerator and denominator in descending powers (ill-conditioned above
  // modest orders: the pole-residue form is the model).
  Polynomial polynomial() const;
  // A real state-space realisation of the rational part (block-diagonal
  // modal form; integrators as a chain), D = direct; requires h = 0.
  StateSpace state_space() const;
  // H(0) for s, H(1) for z; NaN with integrators.
  double dc_gain() const;
};

// The pole-residue form of k prod(x - z_i)/prod(x - p_i) with distinct poles
// and no more zeros than poles (cover-up rule: r_i = k prod(p_i - z_j) /
// prod_{j != i}(p_i - p_j); direct = k when the degrees are equal).
RationalModel from_zpk(const Zpk& z, Domain domain = Domain::s, double sample_time_s = 0);

// Roots of a polynomial with real coefficients in descending powers
// (eigenvalues of its companion matrix).
std::vector<cplx> polynomial_roots(const std::vector<double>& coef);
// prod (x - r_i) as real descending coefficients (conjugates paired).
std::vector<double> poly_from_roots(const std::vector<cplx>& roots);

// Natural frequency (Hz) and damping of a pole of an s-domain model:
// w_n = |p|, zeta = -Re p / |p|.
struct Mode {
  double freq_hz = 0, damping = 0;
  bool real = false;
};
Mode mode_of(cplx p);

}  // namespace benchid::fit
