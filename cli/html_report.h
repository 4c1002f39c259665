// The one-file HTML report of `benchid report`: what was measured, the FRF
// with its error band and the fitted model, the fit residual, the time-domain
// replay, the loop figures and plots when a controller is given, the tables,
// the cautions and the limits of validity. Self-contained: inline CSS and
// inline SVG, no scripts, nothing fetched.
#pragma once

#include <string>
#include <utility>
#include <vector>

#include "cli/stages.h"
#include "cli/tune_stage.h"
#include "fit/fit_frf.h"
#include "fit/replay.h"
#include "ident/frf.h"

namespace benchid::cli {

struct ReportData {
  std::string record, command_line, created_utc;
  std::string title;                       // e.g. the scenario name; default: the record's file name
  const ident::Frf* frf = nullptr;         // required
  const fit::FrfFit* fit = nullptr;        // required
  const fit::ReplayResult* replay = nullptr;  // optional, with y_measured and rate_hz
  const std::vector<double>* y_measured = nullptr;
  double rate_hz = 0;
  const LoopAnalysis* loop = nullptr;      // loop on the fitted model (optional)
  const LoopAnalysis* loop_frf = nullptr;  // the same loop on the measured FRF (optional)
  // report --tune: the proposal and its loop on the model (after); d.loop is before
  const TuneOutcome* tune = nullptr;
  const LoopAnalysis* tuned = nullptr;
  std::string tune_note;                   // why there is no proposal (when asked for)
  std::vector<std::pair<std::string, std::string>> files;  // written beside the report: path, what it holds
  std::vector<std::pair<std::string, std::string>> settings;  // stage settings: name, value
};

std::string html_report(const ReportData& d);

}  // namespace benchid::cli
