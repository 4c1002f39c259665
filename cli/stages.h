// The pipeline's stages as the subcommands run them, shared by `frf`, `fit`,
// `loop` and the one-command `report`: each stage has an argument struct (the
// command-line options with their documented defaults), a function that
// registers those options on a CLI11 command, and a function that computes
// the stage's result without writing anything. The subcommands then write
// files; `report` chains the stages and writes at the very end, so bad input
// to any stage fails before a single file exists.
#pragma once

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

#include "fit/fit_frf.h"
#include "fit/model.h"
#include "fit/model_json.h"
#include "ident/frf.h"
#include "ident/record.h"
#include "loop/frf_loop.h"
#include "loop/margins.h"
#include "loop/stability.h"
#include "loop/step.h"

namespace benchid::cli {

// The analysis could not produce a result: exit status 1.
struct NoResult : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// ---- frf -------------------------------------------------------------------
struct FrfArgs {
  std::string record, input, output, reference;
  std::vector<std::string> records;       // `frf` positional: the record and any repeats
  std::vector<std::string> more_records;  // repeats of the same run after `record`, averaged in
  std::string command_line;
  double rate_hz = 0;
  std::size_t segment = 0;
  double resolution_hz = 0;
  double overlap = ident::WelchOptions{}.overlap;
  std::string window = "hann", detrend = "mean", estimator = "h1", band;
  std::size_t periods = 0, period = 0;
  long skip_periods = -1;  // -1: from the excitation (1 when it has 3 or more periods), else 0
  std::string excitation, stepped, step_freqs;
  double step_s = 0, settle_s = 0, plan_offset_s = 0;
  bool refine_frequency = false;
  double split = 0;
  std::vector<std::string> scales;
  double confidence = ident::FrfOptions{}.confidence;
  double jitter = ident::ReadOptions{}.jitter_tolerance;
  bool loop_gain = false;
  std::size_t threads = 0;  // threads reading the record: 0 = one per core, 1 = none besides the caller
  // measuring-chain corrections (ident/chain.h)
  std::vector<std::string> lags;     // CH:SECONDS, the channel's samples are late by SECONDS
  std::vector<std::string> inverts;  // CH, polarity flipped
  std::string calibrate;             // loopback FRF CSV of the chain alone
  double from_s = 0, to_s = 0;       // seconds from the first sample kept (to 0: the end)
};
// pipeline: the options `report` takes too (without --band, which is the fit's there).
void add_frf_options(CLI::App* c, FrfArgs& a, bool pipeline);
ident::Frf compute_frf(const FrfArgs& a);
// The paths compute_frf reads (the record, any sidecar, the calibration FRF), for overwrite checks.
std::vector<std::string> frf_inputs(const FrfArgs& a);

// ---- replay ----------------------------------------------------------------
// Input and output channels of a recording, read whole, and its rate; the
// same channel twice is refused.
struct ChannelPair {
  std::vector<double> u, y;
  double rate_hz = 0;
};
ChannelPair read_channel_pair(const std::string& record, const std::string& input, const std::string& output,
                              const ident::ReadOptions& ro);

// ---- fit -------------------------------------------------------------------
struct FitArgs {
  std::string order = "auto", delay = "auto", band, weighting = "variance";
  int max_order = fit::FitOptions{}.max_order;
  int integrators = 0;
  int max_iterations = fit::VectorFitOptions{}.max_iterations;
  std::string method = "vf";
  bool strictly_proper = false, direct = false, improper = false, allow_unstable = false;
};
// pipeline: `report`'s defaults (delay auto, the trusted band).
void add_fit_options(CLI::App* c, FitArgs& a, bool pipeline);
fit::FitOptions fit_options(const FitArgs& a);
// NoResult (exit status 1) with advice when the fit did not converge.
void require_converged(const fit::FrfFit& f);
// The "fit" object of the model JSON for a finished fit.
fit::FitSummary fit_record(const fit::FrfFit& f, const std::string& source);

// ---- loop ------------------------------------------------------------------
struct LoopArgs {
  std::string controller;
  double pm_min = 45, gm_min = 10, ms_max_db = 6;
  int plant_integrators = 0;
  std::string band;
  double tracking_hz = 0;
  std::size_t draws = loop::FrfLoopOptions{}.draws;
};
void add_loop_options(CLI::App* c, LoopArgs& a, bool pipeline);
// --controller FILE.json -> its spec; a spec is returned as it is.
using loop::controller_spec;

struct LoopCheck {
  std::string name;
  double threshold = 0, value = 0;
  bool pass = false;
};

// Everything the loop stage says about one plant and controller.
struct LoopAnalysis {
  std::string plant_name, controller;
  bool frf_plant = false;
  loop::Margins m;
  loop::Stability st;
  loop::FrfMargins fm;                      // FRF plant only
  bool crossover_above_band = false;        // FRF plant: |L| >= 1 at the top of the band, the
                                            // crossover (and the margins) lie above the measurement
  double band_lo_hz = 0, band_hi_hz = 0;    // the model's fitted band, when known
  double track_hz = 0, tracking = 0;
  std::optional<loop::StepMetrics> step;
  std::string step_note;
  std::vector<LoopCheck> checks;
  std::vector<std::string> outside_band;    // figures outside the fitted band
  bool pass = false;
  std::string text;                         // the table `loop` prints
  nlohmann::json json;                      // benchid.loop/1
};
extern const char* const kLoopCaution;

// Exactly one of model / frf is given. band_hz: the model's fitted band (0, 0: unknown).
LoopAnalysis analyse_loop(const LoopArgs& a, const std::string& plant_name, const fit::RationalModel* model,
                          const ident::Frf* frf, double band_lo_hz = 0, double band_hi_hz = 0);

}  // namespace benchid::cli
