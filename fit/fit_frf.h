// Fitting a rational model to a measured FRF: line selection, weighting,
// order choice and delay estimation around vector_fit().
//
// Weighting "variance" (default when the FRF carries rel_err): each real
// component of H_k has standard deviation eps_k |H_k| (eps = rel_err, Bendat &
// Piersol), so w_k = 1 / (max(eps_k, floor) |H_k|); the floor, a tenth of the
// median eps over the lines used, keeps a few near-perfect lines from
// dominating (DESIGN.md). "relative": w = 1/|H|; "uniform": w = 1.
//
// Order "auto": only converged fits are candidates, and the lowest converged
// order is the start. A higher order m replaces the current choice n only
// when all of these hold (a chi-square test against the error bars cannot be
// used: rel_err is first order and Welch bias at resonances makes chi2/dof of
// the true plant 1.05-1.5, and an F-test at thousands of lines accepts any
// pole that soaks up 0.1 % of bias):
//  - its weighted residual is at least 10 % lower (an effect size);
//  - a pole of m with no partner in n (within 10 % of its magnitude) lies
//    inside the band, and every such pole is found again at m + 1 or m + 2
//    (pole stability: a pair within its half-power half-width or 3 %, a real
//    pole within 10 %); poles outside the band alone count only when the
//    residual is at least halved;
//  - the lines near each such pole (3 half-power bandwidths, or half an
//    octave of a real pole's corner) stood beyond the noise under n: their
//    weighted residual above its expected 2 N by 3 s.d., with the s.d. taken
//    sqrt(2) larger because neighbouring Hann lines are correlated.
// The sweep stops once 4 orders above the choice added nothing; the limit
// grows while the rule still adds poles near it. Akaike's criterion is shown
// in the table for comparison only.
// Delay "auto": a first estimate from the slope of the unwrapped phase over
// the top 30 % of the band (beyond the last resonance a rational model adds
// little slope), refined by golden-section search of the weighted residual
// over [0, 2 T0 + 1/w_max] at the chosen order.
#pragma once

#include <string>
#include <vector>

#include "fit/vector_fit.h"
#include "ident/frf.h"

namespace benchid::fit {

struct FitOptions {
  VectorFitOptions vf;          // order, integrators, properness, stability, delay
  bool auto_order = false;
  int max_order = 20;  // order sweep limit (grown by 10 at a time while the rule still adds poles
                       // near it, up to one line per real parameter or 200)
  bool auto_proper = false;  // decide vf.proper from the slope at the top of the band: a direct
                             // term only where |H| is flat there (slope above -6 dB/decade)
  bool auto_delay = false;
  Weighting weighting = Weighting::inverse_variance;
  bool band_given = false;                // false: the trusted band of the FRF (ident/trusted.h)
  double band_lo_hz = 0, band_hi_hz = 0;  // band_given: the lines fitted, Hz (hi 0: to the top)
  double error_floor = 0.1;     // variance weights: eps floored at this fraction of the median
  bool polynomial = false;      // Sanathanan-Koerner on the polynomial form instead of vector fitting
  int threads = 0;              // order "auto": orders fitted at once on separate threads; 0 = one per
                                // core. Each order is fitted alone, so results do not depend on it.
};

struct OrderRow {
  int order;
  double chi2, aic, nrmse, max_err_db;
  int dof;
  bool converged, accepted;  // accepted: the order chosen
  std::string note;          // why the rule took or passed this order
};

struct FrfFit {
  FitResult result;
  FitData data;
  std::size_t left_out_unreliable = 0, left_out_band = 0;
  double band_lo_hz = 0, band_hi_hz = 0;  // the band fitted
  std::string band_note;                  // which band, and how it was chosen
  Weighting weighting = Weighting::inverse_variance;
  std::vector<OrderRow> sweep;   // order "auto" only
  std::string sweep_note;        // order "auto": the lines the sweep fitted, when not all
  std::string order_reason;      // how the order was chosen
  std::string proper_note;       // auto_proper: why a direct term was or was not fitted
  double delay_first_s = 0;      // delay "auto": the phase-slope estimate
  std::vector<std::string> warnings;
  std::vector<std::string> pruned;  // order "auto": the spurious modes removed, and why
  std::string alternative;  // a fit that did not converge: which lower order does (or that
                            // none does, and what to change)
};

FrfFit fit_frf(const ident::Frf& frf, const FitOptions& o);

// Spurious-mode pruning, run by fit_frf after an automatic order choice: a
// pole pair or real pole whose modal term stands less than 5 sigma above the
// noise (sigma = 1/weight) on every line within 3 half-power bandwidths of
// it is removed when the fit without it (started from the other poles)
// converges, is less than 10 % worse overall and leaves the lines near it
// within the noise; weakest first, at most 8. `r` becomes the pruned fit;
// returns what was removed and why.
std::vector<std::string> prune_spurious_modes(const FitData& d, VectorFitOptions vo, FitResult& r);

// Human summary of a fit: poles and zeros as natural frequency and damping
// (or corner frequency), gains, delay, roll-off and fit quality.
std::string fit_summary(const FrfFit& f, const std::string& source);

}  // namespace benchid::fit
