// Model JSON, "format": "benchid.model/1" (DESIGN.md): domain, sample_time_s,
// delay_s, poles and residues as [re, im] pairs (conjugates both listed),
// direct, proportional, integrators, zeros, gain, num, den (descending),
// dc_gain (null with integrators), reflected_poles, and a fit object.
#pragma once

#include <string>

#include "fit/model.h"

namespace benchid::fit {

struct FitSummary {  // the "fit" object
  int order = 0;
  double band_lo_hz = 0, band_hi_hz = 0;
  std::size_t points = 0, left_out = 0;
  std::string weighting, source;
  double nrmse = 0, max_err_db = 0, max_err_deg = 0, chi2 = 0;
  int dof = 0, iterations = 0;
  bool converged = false;
};

std::string model_json(const RationalModel& m, const FitSummary* fit = nullptr);
// Reads a model JSON; throws InputError naming the file and what is wrong.
RationalModel read_model_json(const std::string& path);

}  // namespace benchid::fit
