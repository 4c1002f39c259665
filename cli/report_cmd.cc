// benchid report RECORD --input CH --output CH [--reference CH] [--controller SPEC] -o REPORT.html
//   frf -> fit -> replay -> loop in one go; everything is computed first and
//   written at the end (FRF CSV, model JSON, loop JSON, HTML), so bad input to
//   any stage fails before a single file exists, with the stage named.
// benchid demo [-o DIR]: the same on each bundled invented scenario.
#include <chrono>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <filesystem>
#include <iostream>
#include <memory>
#include <sstream>

#include "cli/commands.h"
#include "cli/html_report.h"
#include "cli/output.h"
#include "cli/report.h"
#include "cli/stages.h"
#include "fit/model_json.h"
#include "fit/replay.h"
#include "ident/error.h"
#include "ident/frf_csv.h"
#include "ident/record.h"
#include "ident/trusted.h"
#include "loop/controller.h"

namespace benchid::cli {

namespace fs = std::filesystem;

namespace {

std::string utc_now() {
  const std::time_t t = std::time(nullptr);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char b[40];
  std::strftime(b, sizeof b, "%Y-%m-%d %H:%M UTC", &tm);
  return b;
}

// Runs f; an input error or a failed analysis is re-thrown with the stage named.
template <class F>
auto stage(const char* name, F&& f) {
  try {
    return f();
  } catch (const InputError& e) {
    throw InputError(std::string(name) + " stage: " + e.what());
  } catch (const NoResult& e) {
    throw NoResult(std::string(name) + " stage: " + e.what());
  }
}

}  // namespace

fit::FrfFit fit_pipeline(const ident::Frf& frf, const FitArgs& a, fit::FitOptions o, std::string* band_note) {
  if (!o.band_given && !ident::trusted_band(frf).found())
    throw NoResult("no band of trusted lines to fit (" + ident::trusted_band_rule() +
                   "): none found; check the channels and the excitation");
  fit::FrfFit f = fit::fit_frf(frf, o);
  require_converged(f);
  if (band_note) *band_note = f.band_note;
  return f;
}

ReportPaths report_paths(const std::string& report, const std::string& keep_dir) {
  ReportPaths p;
  p.report = report;
  const fs::path rp(report);
  const fs::path dir = keep_dir.empty() ? rp.parent_path() : fs::path(keep_dir);
  const std::string stem = rp.stem().string();
  p.frf = (dir / (stem + ".frf.csv")).string();
  p.model = (dir / (stem + ".model.json")).string();
  p.loop = (dir / (stem + ".loop.json")).string();
  p.controller = (dir / (stem + ".controller.json")).string();
  return p;
}

ReportTimes run_report(const ReportArgs& a, const ReportPaths& paths, bool quiet) {
  using clock = std::chrono::steady_clock;
  ReportTimes times;
  auto t0 = clock::now();
  const auto lap = [&](double& slot) {
    const auto t1 = clock::now();
    slot = std::chrono::duration<double>(t1 - t0).count();
    t0 = t1;
  };
  if (paths.report.empty()) throw InputError("no report file; expected -o REPORT.html");
  std::vector<std::string> inputs = frf_inputs(a.frf);
  check_output(paths.report, OutputKind::html_report, inputs);
  check_output(paths.frf, OutputKind::frf_csv, inputs);
  check_output(paths.model, OutputKind::model_json, inputs);
  check_output(paths.loop, OutputKind::loop_json, inputs);
  if (!a.tune.empty()) check_output(paths.controller, OutputKind::controller_json, inputs);
  if (!a.keep_dir.empty() && !fs::is_directory(a.keep_dir))
    throw InputError("--keep " + a.keep_dir + ": not a directory; expected an existing folder for the FRF, model and loop files");

  // the options of the later stages are checked before the work starts
  const fit::FitOptions fit_opts = stage("fit", [&] { return fit_options(a.fit); });
  LoopArgs loop_args = a.loop;
  if (!loop_args.controller.empty())
    stage("loop", [&] {
      loop_args.controller = controller_spec(loop_args.controller);  // a JSON file becomes its spec
      loop::parse_controller(loop_args.controller);
      return 0;
    });
  if (!a.tune.empty())
    stage("tune", [&] {
      TuneArgs ta = a.tune_args;
      ta.structure = a.tune;
      return tune_options(ta).pm_min_deg;
    });
  // frf
  const ident::Frf frf = stage("frf", [&] { return compute_frf(a.frf); });
  lap(times.frf_s);
  // fit, in the trusted band unless a band was given
  std::string band_note;
  const fit::FrfFit ft = stage("fit", [&] { return fit_pipeline(frf, a.fit, fit_opts, &band_note); });
  const fit::FitSummary summary = fit_record(ft, paths.frf);
  lap(times.fit_s);
  // replay on the recording
  // (the FRF stage streamed the record; the replay needs it whole, so it is read again)
  ChannelPair rec;
  const fit::ReplayResult rp = stage("replay", [&] {
    ident::ReadOptions ro;
    ro.rate_hz = a.frf.rate_hz;
    ro.fallback_rate_hz = frf.rate_hz;  // the rate the FRF stage used (e.g. from an excitation sidecar)
    ro.jitter_tolerance = a.frf.jitter;
    rec = read_channel_pair(a.frf.record, a.frf.input, a.frf.output, ro);
    fit::ReplayOptions o;
    o.holdout_fraction = a.frf.split;
    return fit::replay(ft.result.model, rec.u, rec.y, rec.rate_hz, o);
  });
  lap(times.replay_s);
  // loop
  std::optional<LoopAnalysis> lm, lf;
  std::string frf_loop_note;
  if (!loop_args.controller.empty()) {
    lm = stage("loop", [&] {
      return analyse_loop(loop_args, paths.model, &ft.result.model, nullptr, summary.band_lo_hz, summary.band_hi_hz);
    });
    try {  // the same loop on the measured FRF: a second opinion with error bars
      lf = analyse_loop(loop_args, paths.frf, nullptr, &frf);
    } catch (const std::exception& e) {
      frf_loop_note = e.what();
    }
  }
  // tune: a proposal on the fitted model, with the report's thresholds as targets
  std::optional<TuneOutcome> tuned;
  std::optional<LoopAnalysis> after;
  std::string tune_note;
  if (!a.tune.empty()) {
    TuneArgs ta = a.tune_args;
    ta.structure = a.tune;
    ta.pm_min = a.loop.pm_min;
    ta.gm_min = a.loop.gm_min;
    ta.ms_max_db = a.loop.ms_max_db;
    try {
      tuned = stage("tune", [&] {
        return tune_plant(ta, paths.model, &ft.result.model, nullptr, summary.band_lo_hz, summary.band_hi_hz);
      });
      LoopArgs la = loop_args;
      la.controller = tuned->r.spec;
      after = analyse_loop(la, paths.model, &ft.result.model, nullptr, summary.band_lo_hz, summary.band_hi_hz);
    } catch (const NoResult& e) {  // no proposal is a finding of the report, not a failure of it
      tune_note = e.what();
    }
  }
  lap(times.loop_s);

  ReportData d;
  d.tune = tuned ? &*tuned : nullptr;
  d.tuned = after ? &*after : nullptr;
  d.tune_note = tune_note;
  d.record = a.frf.record;
  d.title = a.title;
  d.command_line = a.frf.command_line;
  d.created_utc = utc_now();
  d.frf = &frf;
  d.fit = &ft;
  d.replay = &rp;
  d.y_measured = &rec.y;
  d.rate_hz = rec.rate_hz;
  d.loop = lm ? &*lm : nullptr;
  d.loop_frf = lf ? &*lf : nullptr;
  d.files = {{paths.frf, "the FRF (benchid frf CSV)"}, {paths.model, "the fitted model (benchid.model/1 JSON)"}};
  if (lm) d.files.emplace_back(paths.loop, "the loop figures on the model (benchid.loop/1 JSON)");
  if (tuned)
    d.files.emplace_back(paths.controller, "the proposed controller with its figures (benchid.controller/1 JSON; "
                                           "'benchid loop --controller' reads it)");
  d.settings = {{"fit", "order " + a.fit.order + ", delay " + a.fit.delay + ", weighting " + a.fit.weighting +
                            ", integrators " + std::to_string(a.fit.integrators)},
                {"fit band", band_note}};
  if (!frf_loop_note.empty()) d.settings.emplace_back("loop on the measured FRF", "not computed: " + frf_loop_note);
  const std::string html = html_report(d);
  std::ostringstream csv;
  ident::write_frf_csv(csv, frf);
  const std::string model_js = fit::model_json(ft.result.model, &summary);
  lap(times.report_s);

  // write, all at the end
  write_file_atomically(paths.frf, csv.str());
  write_file_atomically(paths.model, model_js);
  if (lm) write_file_atomically(paths.loop, lm->json.dump(2) + "\n");
  if (tuned) write_file_atomically(paths.controller, tuned->json.dump(2) + "\n");
  write_file_atomically(paths.report, html);
  lap(times.write_s);
  if (!quiet) {
    std::cout << "benchid report: " << a.frf.record << "\n  model: " << ft.result.model.order() << " poles, fitted " << fmt_num(summary.band_lo_hz) << " to "
              << fmt_num(summary.band_hi_hz) << " Hz, nrmse " << fmt_num(summary.nrmse) << "; replay match "
              << fmt_num(std::round(rp.match_pct * 10) / 10) << " %\n";
    if (lm)
      std::cout << "  loop: phase margin " << fmt_num(std::round(lm->m.phase_margin_deg * 10) / 10) << " deg at "
                << fmt_num(lm->m.crossover_hz) << " Hz, gain margin " << fmt_num(std::round(lm->m.gain_margin_db * 10) / 10)
                << " dB; verdict " << (lm->pass ? "pass" : "FAIL") << "\n";
    if (tuned)
      std::cout << "  tune: proposal " << tuned->r.spec << " (phase margin "
                << fmt_num(std::round(tuned->r.nominal.pm_deg * 10) / 10) << " deg, gain margin "
                << fmt_num(std::round(tuned->r.nominal.gm_db * 10) / 10) << " dB, Ms "
                << fmt_num(std::round(tuned->r.nominal.ms_db * 10) / 10) << " dB); a starting point only, see the report's caution\n";
    else if (!tune_note.empty())
      std::cout << "  tune: no proposal (" << tune_note << ")\n";
    std::cout << "  wrote " << paths.report << " (and " << paths.frf << ", " << paths.model << (lm ? ", " + paths.loop : "")
              << (tuned ? ", " + paths.controller : "") << ")\n";
  }
  return times;
}

void add_report_options(CLI::App* c, ReportArgs& a) {
  add_frf_options(c, a.frf, true);
  add_fit_options(c, a.fit, true);
  add_loop_options(c, a.loop, true);
  c->add_option("--tune", a.tune, "Propose controller gains on the fitted model: pi, pid or pi+lead, with the "
                "thresholds of --pm-min, --gm-min and --ms-max as targets; the report shows the loop before "
                "(--controller) and after (default: none)");
  add_tune_options(c, a.tune_args, true);
  c->add_option("--keep", a.keep_dir, "Folder for the FRF CSV, model JSON and loop JSON (default: beside the report, "
                "named after it)");
  c->add_option("--title", a.title, "Heading of the report (default: the recording's path)");
}

void add_report_command(CLI::App& app, const std::string& command_line) {
  auto a = std::make_shared<ReportArgs>();
  auto out = std::make_shared<std::string>();
  auto quiet = std::make_shared<bool>(false);
  CLI::App* c = app.add_subcommand(
      "report", "The whole job in one command: FRF, fitted model, replay against the recording and, with "
                "--controller, the loop figures; writes one self-contained HTML report (inline SVG plots) and, "
                "beside it, the FRF CSV, model JSON and loop JSON. Nothing is written unless every stage succeeds.");
  c->add_option("-o,--out", *out, "HTML report to write")->required();
  add_force_flag(c);
  add_report_options(c, *a);
  c->add_flag("-q,--quiet", *quiet, "No summary");
  c->callback([a, out, quiet, command_line] {
    a->frf.command_line = command_line;
    try {
      run_report(*a, report_paths(*out, a->keep_dir), *quiet);
    } catch (const NoResult& e) {
      std::cerr << "benchid: error: " << a->frf.record << ": " << e.what() << "\n";
      std::exit(1);
    }
  });
}

}  // namespace benchid::cli
