// The one-command pipeline shared by `benchid report` and `benchid demo`.
#pragma once

#include <string>

#include "cli/parse.h"
#include "cli/stages.h"
#include "cli/tune_stage.h"
#include "ident/frf.h"

namespace benchid::cli {

struct ReportArgs {
  FrfArgs frf;     // the recording and how to estimate its FRF
  FitArgs fit;     // --band here is the fit's band
  LoopArgs loop;   // no controller: no loop section
  std::string tune;  // --tune STRUCTURE: propose gains on the fitted model (empty: none)
  TuneArgs tune_args;
  std::string keep_dir, title;
};

// Where a report and its companions go: REPORT.html, REPORT.frf.csv,
// REPORT.model.json, REPORT.loop.json, and with --tune REPORT.controller.json
// (in keep_dir when given).
struct ReportPaths {
  std::string report, frf, model, loop, controller;
};
ReportPaths report_paths(const std::string& report, const std::string& keep_dir);

// Seconds spent in each stage (for the benchmark).
struct ReportTimes {
  double frf_s = 0, fit_s = 0, replay_s = 0, loop_s = 0, report_s = 0, write_s = 0;
  double total() const { return frf_s + fit_s + replay_s + loop_s + report_s + write_s; }
};

// The fit stage of the pipeline: options o (from fit_options) in the trusted
// band unless a.band is given; NoResult when there is no band or no
// convergence. band_note (optional) says how the band was chosen.
fit::FrfFit fit_pipeline(const ident::Frf& frf, const FitArgs& a, fit::FitOptions o, std::string* band_note = nullptr);

// Runs frf -> fit -> replay -> loop, then writes all files. Throws InputError
// (bad input; the stage named) or NoResult before anything is written.
ReportTimes run_report(const ReportArgs& a, const ReportPaths& paths, bool quiet);
void add_report_options(CLI::App* c, ReportArgs& a);

// One bundled demo scenario (datasets_demo/), all invented.
struct DemoScenario {
  std::string name, title;
  std::string record, input, output, reference, excitation;  // paths relative to the data folder
  std::string fit_order = "auto", fit_delay = "auto", fit_band;  // fit settings
  std::string controller;                                     // loop section
  std::string truth;                                          // the stated truth (model JSON)
  std::string tune = "";                                      // report --tune STRUCTURE (empty: none)
};
const std::vector<DemoScenario>& demo_scenarios();
// The folder the build was made from (datasets_demo/ of the source tree).
std::string default_demo_dir();
// The report arguments of a scenario with its files under data_dir.
ReportArgs demo_args(const DemoScenario& s, const std::string& data_dir);

}  // namespace benchid::cli
