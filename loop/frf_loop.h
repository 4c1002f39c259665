// Margins straight from a measured FRF plant (model-free).
//
// Between lines the plant is interpolated in log-magnitude and unwrapped
// phase, linearly in log frequency; the loop is only searched inside the
// measured band (first to last reliable line). Stability cannot be proved
// from a band of measured points: with the stated assumptions of an
// open-loop stable plant with the declared integrators that continues below
// the band as at its lowest line (plant_below_band), the Nyquist count from
// f -> 0 to the top of the band is reported as an inference.
//
// Uncertainty: the FRF's per-line random error (rel_err = eps, the standard
// deviation of each real component relative to |H|, Bendat & Piersol) is
// propagated by Monte Carlo: `draws` perturbed FRFs H_k (1 + eps_k (n1 + j n2)),
// n ~ N(0, 1) independent per line (neighbouring Welch lines are in truth
// somewhat correlated, which this ignores), each through the same margin
// computation; the spread is the standard deviation over the draws.
#pragma once

#include <cstdint>
#include <functional>
#include <vector>

#include "ident/frf.h"
#include "loop/margins.h"

namespace benchid::loop {

struct FrfMargins {
  Margins nominal;
  std::size_t lines = 0, left_out = 0;
  std::string band_note;  // the band used, and how it was chosen
  double band_lo_hz = 0, band_hi_hz = 0;  // that band, Hz
  // Monte Carlo spreads (1 s.d.); NaN when the FRF has no rel_err
  double pm_sd_deg = std::numeric_limits<double>::quiet_NaN();
  double gm_sd_db = std::numeric_limits<double>::quiet_NaN();
  double ms_sd_db = std::numeric_limits<double>::quiet_NaN();
  double crossover_sd_hz = std::numeric_limits<double>::quiet_NaN();
  std::size_t draws = 0;
  // Nyquist count over the band under the assumption (-1: not counted)
  int inferred_unstable = -1;
  std::string stability_note;
  std::function<cplx(double)> loop;  // the nominal interpolated loop, for further figures
};

struct FrfLoopOptions {
  std::size_t points = 20000;  // grid over the band
  std::size_t draws = 200;     // Monte Carlo draws (0: none)
  std::uint64_t seed = 1;
  int plant_integrators = 0;   // declared integrators of the plant below the band
  // Only trusted lines are used (ident/trusted.h), inside the band: the given
  // one, or else the FRF's trusted band (single lines that pass by chance
  // above it would make spurious crossings).
  bool band_given = false;
  double band_lo_hz = 0, band_hi_hz = 0;  // band_given: Hz (hi 0: to the top)
};

FrfMargins frf_margins(const ident::Frf& plant, const Controller& c, const FrfLoopOptions& o = {});

// The plant below a measured band, for the Nyquist count only (never for a
// margin): it continues as at the lowest line f_lo times the declared
// integrators n, magnitude |P(f_lo)| (f_lo/f)^n, and phase going linearly in
// f from the value measured at f_lo to -n 90 deg at f = 0, as the lags and
// delay of a plant do at low frequency.
cplx plant_below_band(cplx p_lo, double f_lo_hz, int integrators, double f_hz);
// The points the count walks below the band: six decades below f_lo up to
// f_lo, 40 a decade, with the plant continued there (the last point is the
// lowest line itself), and whether the plant's phase at f_lo lies within
// 90 deg of what the declared integrators give (lags and a delay).
struct BelowBand {
  std::vector<double> f_hz;
  std::vector<cplx> plant;
  bool phase_near_asymptote = true;
};
BelowBand below_band(cplx p_lo, double f_lo_hz, int plant_integrators);

// The change of arg(1 + L), rad, along those points (`loop`: L at each),
// and whether the walk may stand in for the unmeasured plant: its phase near
// the asymptote, or else, when the loop has integrators, |L| >= 2 all along
// (a path that far from -1 winds about it as the plant's own would, whatever
// its phase).
struct BelowBandWalk {
  double arg_change_rad = 0;
  bool trusted = true;
};
BelowBandWalk walk_below_band(const BelowBand& b, const std::vector<cplx>& loop, int loop_integrators);

// L at f from the interpolated FRF plant used by frf_margins (inside its band).
cplx margins_loop_value(const FrfMargins& fm, double f_hz);

}  // namespace benchid::loop
