// Rational fitting of a measured frequency response by vector fitting:
// Gustavsen & Semlyen, "Rational approximation of frequency domain responses
// by vector fitting", IEEE Trans. Power Delivery 14(3), 1999, with the relaxed
// non-triviality constraint of Gustavsen, IEEE Trans. Power Delivery 21(3),
// 2006, in the real-valued formulation for complex-conjugate pairs.
//
// Each iteration solves one weighted linear least-squares problem for
//   sigma(s) f(s) ~ sum c_i phi_i(s) + d [+ h s],   sigma(s) = d~ + sum c~_i phi_i(s)
// with phi the partial fractions of the current poles (real pairs as
// phi1 = 1/(s-a) + 1/(s-a*), phi2 = j/(s-a) - j/(s-a*)), plus the relaxation
// row Re sum_k sigma(s_k) = K; the zeros of sigma, eig(A - b c~^T / d~), are
// the next poles. Unstable poles are reflected (p -> -conj p) unless allowed.
// Converged when no pole moves by more than `tolerance` relative to its
// magnitude. The residues, d and h then come from a last linear fit.
// Known structure is removed first: the data is multiplied by s^K (z: (z-1)^K)
// for K integrators and by e^{+j w T} for a known delay T; the model divides
// them back. In z the same iteration runs with x = e^{j w T_s} in place of s
// (starting poles e^{a T_s} of the s-plane ones).
#pragma once

#include <string>
#include <vector>

#include "fit/model.h"

namespace benchid::fit {

enum class Weighting { inverse_variance, uniform, relative };
Weighting parse_weighting(const std::string& s);  // "variance" | "uniform" | "relative"
const char* weighting_name(Weighting w);

struct VectorFitOptions {
  int order = 4;                // poles of the fitted part, excluding integrators, 1..200
  int integrators = 0;          // K poles fixed at the origin, 0..4
  bool proper = true;           // a direct term d (false: strictly proper)
  bool improper = false;        // also a term h s
  bool allow_unstable = false;  // keep right-half-plane poles instead of reflecting them
  double delay_s = 0;           // known pure delay, >= 0
  Domain domain = Domain::s;    // s: partial fractions in s; z: in z = e^{j w T} (poles inside the
                                // unit circle; unstable ones reflected to 1/conj(p))
  double sample_time_s = 0;     // T, domain z only
  int max_iterations = 50;      // pole relocations
  double tolerance = 1e-9;      // convergence: largest relative pole move
  bool stop_when_stalled = false;  // end (not converged) after 10 relocations in which the
                                   // residual did not fall 0.1 % below its best (for an order
                                   // sweep, whose rule needs 10 % effects)
  std::vector<cplx> start_poles;   // empty: the standard start (pairs log-spaced over the band);
                                   // else `order` poles to start from, closed under conjugation,
                                   // in the model's domain (s: rad/s; z: the z-plane)
};
void validate(const VectorFitOptions& o);

// Lines to fit: frequency (Hz, > 0, increasing), response, and a weight per
// line (1/standard deviation of the error of one real component, or any
// positive relative weight).
struct FitData {
  std::vector<double> freq_hz;
  std::vector<cplx> h;
  std::vector<double> weight;
};

struct FitResult {
  RationalModel model;
  int iterations = 0;
  bool converged = false;
  bool cycled = false;    // converged as the best iterate of poles that cycled at the noise level
                          // (15 iterations with no lower relocation residual, moves under 5 %)
  double chi2 = 0;        // sum_k w_k^2 |H_k - H^_k|^2
  int dof = 0;            // 2 lines - real parameters
  double nrmse = 0;       // ||H - H^|| / ||H||
  double max_err_db = 0, max_err_db_hz = 0;    // worst |20 log10 |H^/H||
  double max_err_deg = 0, max_err_deg_hz = 0;  // worst |arg(H^/H)|
};

FitResult vector_fit(const FitData& data, const VectorFitOptions& o);

// Sanathanan & Koerner (IEEE Trans. Autom. Control 8, 1963): H ~ N(s)/D(s)
// with D monic of degree `order`, each pass a linear least-squares fit of
// N - H D weighted by w / |D_prev| (Levy's linearisation with the bias
// removed by iteration), s scaled by the band's top for conditioning; the
// poles are the roots of D, the residues then as in vector fitting. The
// polynomial basis is ill-conditioned beyond modest orders (about 10): it is
// the second method, for comparison (s domain, no integrators or improper term).
FitResult sk_fit(const FitData& data, const VectorFitOptions& o);
// Figures of merit of a model against data (fills chi2, dof, nrmse, max errors).
void score(FitResult& r, const FitData& data);

}  // namespace benchid::fit
