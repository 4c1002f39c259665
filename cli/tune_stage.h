// The tune stage, shared by `benchid tune` and `report --tune`.
#pragma once

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include <string>
#include <vector>

#include "fit/model.h"
#include "ident/frf.h"
#include "loop/tune.h"

namespace benchid::cli {

struct TuneArgs {
  std::string structure = "pid", objective = "integral";
  double pm_min = 45, gm_min = 10, ms_max_db = 6, min_crossover_hz = 0;
  std::vector<std::string> notches;  // f=HZ,width=HZ,depth=DB, or "auto"
  double notch_depth_db = loop::TuneOptions{}.notch_depth_db;
  double notch_width = loop::TuneOptions{}.notch_width_factor;
  double dt_s = 0, compute_delay_s = 0;
  double error_sigmas = loop::TuneOptions{}.error_sigmas;
  int plant_integrators = 0;
  std::string band;  // FRF plant: LO:HI, Hz (empty: its trusted band)
  double derivative_filter = loop::TuneOptions{}.derivative_filter;
  double integral_ratio = loop::TuneOptions{}.integral_ratio;
  double max_lead_deg = loop::TuneOptions{}.max_lead_deg;
};

// pipeline: the options `report` takes (there --tune names the structure).
void add_tune_options(CLI::App* c, TuneArgs& a, bool pipeline);
loop::TuneOptions tune_options(const TuneArgs& a);  // InputError for bad values

struct TuneOutcome {
  loop::TuneResult r;
  std::string text;     // the table, the sections and the caution
  nlohmann::json json;  // benchid.controller/1 with everything
};

extern const char* const kTuneCaution;

// Tunes on a model (band_lo/hi: its fitted band, 0 when unknown) or an FRF.
// Throws NoResult (exit 1) with the best achievable figures when no
// controller of the structure meets the targets.
TuneOutcome tune_plant(const TuneArgs& a, const std::string& plant_name, const fit::RationalModel* model,
                       const ident::Frf* frf, double band_lo_hz = 0, double band_hi_hz = 0);

}  // namespace benchid::cli
