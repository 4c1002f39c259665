// Stepped-sine FRF: one point per step from least-squares sine fits of the
// input and the output over the step's measuring window (IEEE Std 1057
// three-parameter fit at the planned frequency, or four-parameter when the
// frequency must be refined, refined on the input and used for both).
//   H = (A_y / A_u) exp(j (theta_y - theta_u))
// Uncertainty from the fit residuals r_u, r_y (rms) over N samples, taking
// them as white: a fitted amplitude has s.d. r sqrt(2/N), so
//   rel_err = sqrt(2/N) sqrt((r_u/A_u)^2 + (r_y/A_y)^2)   (also the phase s.d., rad).
// "coherence" is the share of each channel's AC power in the fundamental,
// multiplied: (A_u^2/2)/(A_u^2/2 + r_u^2) * (A_y^2/2)/(A_y^2/2 + r_y^2).
// distortion_pct is the output's residual over its fundamental,
// 100 r_y / (A_y / sqrt 2) (THD+N).
#pragma once

#include <vector>

#include "ident/excite.h"
#include "ident/frf.h"
#include "ident/record.h"

namespace benchid::ident {

struct SteppedOptions {
  double offset_s = 0;           // record time at which sample 0 of the plan was played
  bool refine_frequency = false; // 4-parameter fit on the input
  double max_rel_err = 0.1;      // points with a larger rel_err are flagged unreliable
  double band_lo_hz = 0, band_hi_hz = 0;  // steps outside are skipped (0: no limit)
  std::size_t block_frames = 65536;
};

// Steps without a plan: consecutive steps of step_s seconds from t = 0, each
// measured after settle_s seconds to its end.
std::vector<Step> steps_from_list(const std::vector<double>& freqs_hz, double step_s, double settle_s, double rate_hz);

Frf estimate_stepped(RecordReader& reader, const FrfChannels& ch, const std::vector<Step>& steps,
                     double plan_rate_hz, const SteppedOptions& o);

}  // namespace benchid::ident
