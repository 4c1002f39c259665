// Fitting a rational model to a measured FRF: line selection, weighting,
// order choice and delay estimation around vector_fit().
//
// Weighting "variance" (default when the FRF carries rel_err): each real
// component of H_k has standard deviation eps_k |H_k| (eps = rel_err, Bendat &
// Piersol), so w_k = 1 / (max(eps_k, floor) |H_k|); the floor, a tenth of the
// median eps over the lines used, keeps a few near-perfect lines from
// dominating (DESIGN.md). "relative": w = 1/|H|; "uniform": w = 1.
//
// Order "auto" sweeps orders 1..max_order and takes the lowest whose weighted
// residual is consistent with the measurement noise: with variance weights
// chi2 ~ chi-square with dof = 2 lines - parameters, accepted when
// chi2 <= dof + 2.326 sqrt(2 dof) (one-sided 99 %, normal approximation).
// When no order passes (model error dominates), or without variance
// weights, the order minimising Akaike's criterion is taken:
// N ln(RSS/N) + 2 p with N = 2 lines, p the real parameters.
//
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
  int max_order = 20;           // order sweep limit
  bool auto_delay = false;
  Weighting weighting = Weighting::inverse_variance;
  bool band_given = false;      // false: the trusted band of the FRF (ident/trusted.h)
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
  bool converged, accepted;
};

struct FrfFit {
  FitResult result;
  FitData data;
  std::size_t left_out_unreliable = 0, left_out_band = 0;
  double band_lo_hz = 0, band_hi_hz = 0;  // the band fitted
  std::string band_note;                  // which band, and how it was chosen
  Weighting weighting = Weighting::inverse_variance;
  std::vector<OrderRow> sweep;   // order "auto" only
  std::string order_reason;      // how the order was chosen
  double delay_first_s = 0;      // delay "auto": the phase-slope estimate
  std::vector<std::string> warnings;
};

FrfFit fit_frf(const ident::Frf& frf, const FitOptions& o);

// Human summary of a fit: poles and zeros as natural frequency and damping
// (or corner frequency), gains, delay, roll-off and fit quality.
std::string fit_summary(const FrfFit& f, const std::string& source);

}  // namespace benchid::fit
