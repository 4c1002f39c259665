// benchid frf RECORD --input CH --output CH [--reference CH] [options] [-o FRF.csv]
#include <algorithm>
#include <cmath>
#include <functional>
#include <iostream>
#include <limits>
#include <memory>
#include <optional>
#include <sstream>
#include <unistd.h>

#include "cli/commands.h"
#include "cli/stages.h"
#include "cli/output.h"
#include "cli/parse.h"
#include "cli/text_report.h"
#include "ident/chain.h"
#include "ident/compare.h"
#include "ident/error.h"
#include "ident/frf.h"
#include "ident/frf_csv.h"
#include "ident/excite_io.h"
#include "ident/record.h"
#include "ident/stepped.h"

namespace benchid::cli {

namespace {



struct FrfCommand {
  FrfArgs frf;
  std::string out, report;
  bool quiet = false;
};

}  // namespace

std::vector<std::string> frf_inputs(const FrfArgs& a) {
  std::vector<std::string> v{a.record};
  v.insert(v.end(), a.more_records.begin(), a.more_records.end());
  if (!a.excitation.empty()) v.push_back(a.excitation);
  if (!a.stepped.empty()) v.push_back(a.stepped);
  if (!a.calibrate.empty()) v.push_back(a.calibrate);
  return v;
}

namespace {

// The linearity check of a two-level excitation (excite --levels): the FRF of
// each half of the record (each without its first period, the ramp-in or
// the level step, and the second without the ramp-out), compared line by
// line as in `compare` with 0.1 dB and 1 deg allowed beyond 3 times the
// combined random error. The FRF returned is the one at the higher level;
// where the two disagree a warning names the lines (friction, backlash and
// saturation all make the response depend on the level).
ident::Frf two_level_frf(const FrfArgs& a, const ident::Excitation& e, const ident::FrfOptions& o_in,
                         ident::RecordReader& reader, const std::function<std::unique_ptr<ident::RecordReader>()>& reopen) {
  if (!a.more_records.empty() || a.from_s > 0 || a.to_s > 0 || a.split > 0)
    throw InputError("a two-level excitation is split at its level change; expected one record without --from, --to "
                     "or --split");
  const double rate = e.rate_hz, per = static_cast<double>(e.period);
  const double half_s = static_cast<double>(e.repeats / 2) * per / rate;
  ident::FrfOptions lo = o_in, hi = o_in;
  lo.to_s = half_s;
  lo.skip_periods = 1;
  hi.from_s = half_s;
  hi.to_s = (static_cast<double>(e.repeats) * per - per) / rate;
  hi.skip_periods = 1;
  const ident::FrfChannels ch{a.input, a.output, a.reference};
  ident::Frf first = ident::estimate_frf(reader, ch, lo);
  auto again = reopen();
  ident::Frf second = ident::estimate_frf(*again, ch, hi);
  const bool second_higher = e.levels[1] > e.levels[0];
  ident::Frf& top = second_higher ? second : first;
  const ident::Frf& other = second_higher ? first : second;
  const double l_top = std::max(e.levels[0], e.levels[1]), l_other = std::min(e.levels[0], e.levels[1]);
  ident::CompareOptions co;
  co.tolerance_db = 0.1;
  co.tolerance_deg = 1.0;
  const ident::CompareResult r = ident::compare_frf(top, {&other}, {"level " + fmt_num(l_other)}, co);
  std::string where_hz;
  double worst = 0, worst_hz = 0, last_hz = 0;
  for (const auto& c : r.lines)
    if (c.outside) {
      if (where_hz.empty()) where_hz = fmt_num(c.freq_hz);
      last_hz = c.freq_hz;
      if (c.excess_db > worst) worst = c.excess_db, worst_hz = c.freq_hz;
    }
  top.corrections.erase(std::remove_if(top.corrections.begin(), top.corrections.end(),
                                       [](const std::string& c) { return c.rfind("samples ", 0) == 0; }),
                        top.corrections.end());
  top.corrections.push_back("linearity check: levels " + fmt_num(l_other) + " and " + fmt_num(l_top) + ", " +
                            std::to_string(r.outside) + " of " + std::to_string(r.lines.size()) +
                            " lines differ beyond 3 sigma + 0.1 dB/1 deg; this FRF is at level " + fmt_num(l_top));
  if (r.outside > 0)
    top.warnings.push_back("the response at levels " + fmt_num(l_other) + " and " + fmt_num(l_top) + " differs beyond " +
                           "the errors at " + std::to_string(r.outside) + " of " + std::to_string(r.lines.size()) +
                           " lines (" + where_hz + " to " + fmt_num(last_hz) + " Hz" +
                           (worst > 0 ? "; the largest magnitude difference " + fmt_num(worst) + " dB beyond the allowance at " + fmt_num(worst_hz) + " Hz" : std::string()) +
                           "): the plant is not linear at these levels (friction, backlash, saturation); this FRF is "
                           "the one at level " + fmt_num(l_top));
  return top;
}

}  // namespace

ident::Frf compute_frf(const FrfArgs& a) {
  if (!a.excitation.empty() && !a.stepped.empty()) throw InputError("give --excitation or --stepped, not both");
  std::string side_path = !a.excitation.empty() ? a.excitation : a.stepped;
  std::optional<ident::Sidecar> side;
  if (!side_path.empty()) {
    side = ident::read_sidecar(side_path);
    if (!a.stepped.empty() && side->excitation.kind != "steps")
      throw InputError(a.stepped + ": kind '" + side->excitation.kind + "' is not a stepped-sine plan; expected "
                       "kind steps (or use --excitation)");
  }
  const bool stepped = (side && side->excitation.kind == "steps") || !a.step_freqs.empty();
  if (!a.step_freqs.empty() && side) throw InputError("give --step-freqs or a plan, not both");
  ident::ReadOptions ro;
  ro.rate_hz = a.rate_hz;
  if (side) ro.fallback_rate_hz = side->excitation.rate_hz;
  ro.jitter_tolerance = a.jitter;
  ro.threads = a.threads;
  if (a.threads > 256) throw InputError("--threads " + std::to_string(a.threads) + ": expected 0 (one per core) to 256");
  if (!(a.jitter > 0 && a.jitter < 0.5))
    throw InputError("--jitter-tolerance " + fmt_num(a.jitter) + ": expected a fraction in (0, 0.5)");
  // a record opened with the --scale factors applied
  const auto open_scaled = [&](const std::string& path) {
    auto rd = ident::open_record(path, ro);
    for (const auto& s : a.scales) {
      const auto c = s.rfind(':');
      if (c == std::string::npos || c == 0)
        throw InputError("--scale '" + s + "': expected CH:FACTOR, e.g. 2:10.5");
      rd->set_scale(rd->channel_index(s.substr(0, c)), parse_number(s.substr(c + 1), "--scale factor"));
    }
    return rd;
  };
  auto reader = open_scaled(a.record);
  // further runs of the same measurement, averaged in
  std::vector<std::unique_ptr<ident::RecordReader>> more;
  for (const auto& r : a.more_records) more.push_back(open_scaled(r));
  // chain corrections name the input or the output channel
  ident::ChainCorrection chain;
  const std::size_t in_ch = reader->channel_index(a.input), out_ch = reader->channel_index(a.output);
  const auto which = [&](const std::string& spec, const std::string& option) -> int {
    const std::size_t c = reader->channel_index(spec);
    if (c == in_ch) return 0;
    if (c == out_ch) return 1;
    throw InputError(option + " '" + spec + "': channel '" + reader->info().channels[c].name +
                     "' is neither the input nor the output (a reference's shift or sign cancels in the FRF); "
                     "expected '" + a.input + "' or '" + a.output + "'");
  };
  for (const auto& s : a.lags) {
    const auto c = s.rfind(':');
    if (c == std::string::npos || c == 0) throw InputError("--lag '" + s + "': expected CH:SECONDS, e.g. y:0.00125");
    const double lag = parse_number(s.substr(c + 1), "--lag seconds");
    (which(s.substr(0, c), "--lag") == 0 ? chain.input_lag_s : chain.output_lag_s) += lag;
  }
  for (const auto& s : a.inverts) (which(s, "--invert") == 0 ? chain.invert_input : chain.invert_output) ^= true;
  std::optional<ident::Frf> calibration;
  if (!a.calibrate.empty()) {
    calibration = ident::read_frf_csv(a.calibrate);
    chain.calibration = &*calibration;
    chain.calibration_name = a.calibrate;
  }
  ident::FrfOptions o;
  o.prefetch = a.threads != 1;
  if (a.segment) o.welch.segment = a.segment;
  o.resolution_hz = a.resolution_hz;
  if (a.segment && a.resolution_hz > 0) throw InputError("give --segment or --resolution, not both");
  o.welch.overlap = a.overlap;
  o.welch.window = ident::parse_window(a.window);
  o.welch.detrend = ident::parse_detrend(a.detrend);
  o.estimator = ident::parse_estimator(a.estimator);
  o.periods = a.periods;
  o.period = a.period;
  o.confidence = a.confidence;
  o.loop_gain = a.loop_gain;
  o.holdout_fraction = a.split;
  o.from_s = a.from_s;
  o.to_s = a.to_s;
  if ((a.from_s > 0 || a.to_s > 0) && a.split > 0)
    throw InputError("--split with --from/--to: 'replay --split' holds out a fraction of the whole record; expected "
                     "one or the other");
  if (!a.band.empty()) {
    const Band b = parse_band(a.band, "--band");
    o.band_lo_hz = b.lo_hz;
    o.band_hi_hz = b.hi_hz;
  }
  ident::Frf f;
  if (stepped) {
    if (!a.reference.empty()) throw InputError("a stepped-sine FRF takes no --reference");
    if (!more.empty()) throw InputError("several records: averaging is for Welch and periodic estimates; expected one "
                                        "record with a stepped-sine plan");
    if (a.from_s > 0 || a.to_s > 0)
      throw InputError("--from/--to do not apply to a stepped sine (the plan places each step); expected --plan-offset");
    ident::SteppedOptions so;
    so.offset_s = a.plan_offset_s;
    so.refine_frequency = a.refine_frequency;
    so.band_lo_hz = o.band_lo_hz;
    so.band_hi_hz = o.band_hi_hz;
    std::vector<ident::Step> steps;
    double plan_rate = reader->rate_hz();
    if (side) {
      steps = side->excitation.steps;
      plan_rate = side->excitation.rate_hz;
    } else {
      std::vector<double> freqs;
      for (const auto& item : split_list(a.step_freqs)) freqs.push_back(parse_number(item, "--step-freqs item"));
      if (!(plan_rate > 0)) throw InputError("the rate is not known before reading; give --rate");
      steps = ident::steps_from_list(freqs, a.step_s, a.settle_s, plan_rate);
    }
    f = ident::estimate_stepped(*reader, {a.input, a.output, ""}, steps, plan_rate, so);
  } else {
    if (side) {
      const ident::Excitation& e = side->excitation;
      if (e.period == 0) throw InputError(side_path + ": period_samples is 0; expected a periodic excitation");
      if (a.periods || a.period) throw InputError("--periods/--period come from --excitation; give one or the other");
      o.period = e.period;
      if (e.kind == "multisine" || e.kind == "prbs") o.lines = e.lines;
      if (e.kind == "logchirp" && side->has_sweep && side->sweep.f1_hz > side->sweep.f0_hz) o.log_sweep = side->sweep;
      if (a.band.empty() && e.band_hi_hz > 0) {
        o.band_lo_hz = e.band_lo_hz * (1 - 1e-9);
        o.band_hi_hz = e.band_hi_hz * (1 + 1e-9);
      }
      o.skip_periods = a.skip_periods >= 0 ? static_cast<std::size_t>(a.skip_periods) : (e.repeats >= 3 ? 1 : 0);
    } else if (a.skip_periods > 0) {
      o.skip_periods = static_cast<std::size_t>(a.skip_periods);
    }
    std::vector<ident::RecordReader*> readers{reader.get()};
    for (auto& m : more) readers.push_back(m.get());
    if (side && side->excitation.levels.size() == 2) {
      f = two_level_frf(a, side->excitation, o, *reader, [&] { return open_scaled(a.record); });
    } else {
      f = ident::estimate_frf(readers, {a.input, a.output, a.reference}, o);
    }
  }
  if (side) {
    if (std::fabs(f.rate_hz - side->excitation.rate_hz) > 1e-6 * side->excitation.rate_hz)
      throw InputError(a.record + ": recorded at " + fmt_num(f.rate_hz) + " Hz but the excitation was made for " +
                       fmt_num(side->excitation.rate_hz) + " Hz; expected the same rate");
    f.excitation = side->excitation.kind + " from " + side_path;
  }
  if (calibration && std::fabs(calibration->rate_hz - f.rate_hz) > 1e-6 * f.rate_hz && calibration->rate_hz > 0)
    throw InputError(a.calibrate + ": measured at " + fmt_num(calibration->rate_hz) + " Hz, the record at " +
                     fmt_num(f.rate_hz) + " Hz; expected a loopback measured with the same settings");
  ident::correct_chain(f, chain);
  return f;
}

namespace {

void run_frf(const FrfCommand& cmd) {
  const FrfArgs& a = cmd.frf;
  check_output(cmd.out, OutputKind::frf_csv, frf_inputs(a));
  check_output(cmd.report, OutputKind::frf_text, frf_inputs(a));
  if (!cmd.report.empty() && cmd.report == cmd.out)
    throw InputError("--report and -o name the same file '" + cmd.out + "'; expected two paths");
  const ident::Frf f = compute_frf(a);
  std::ostringstream csv;
  ident::write_frf_csv(csv, f);
  write_file_atomically(cmd.out.empty() ? "-" : cmd.out, csv.str());
  if (!cmd.report.empty()) write_file_atomically(cmd.report, frf_text_report(f, a.command_line));
  if (!cmd.quiet) {
    std::cerr << "benchid frf: " << ident::summary(f) << "\n";
    for (const auto& w : f.warnings) std::cerr << "benchid: warning: " << w << "\n";
    if (!cmd.out.empty() && cmd.out != "-") std::cerr << "  wrote " << cmd.out << "\n";
    if (!cmd.report.empty()) std::cerr << "  wrote " << cmd.report << "\n";
  }
}

}  // namespace

void add_frf_options(CLI::App* c, FrfArgs& a, bool pipeline) {
  if (pipeline)
    c->add_option("record", a.record, "Recording: CSV/TSV log (header row of channel names, optional time "
                  "column) or a sound file (WAV, FLAC, AIFF, ... through libsndfile)")->required();
  else
    c->add_option("record", a.records, "Recording: CSV/TSV log (header row of channel names, optional time column) "
                  "or a sound file (WAV, FLAC, AIFF, ... through libsndfile). Several records of the same run repeated "
                  "(same rate, channels, excitation) are averaged into one FRF with the error from all of them")
        ->required();
  c->add_option("--input", a.input, "Input (excitation) channel: header name or 1-based column/channel "
                "number (numbers count every column, the time column included)")->required();
  c->add_option("--output", a.output, "Output (response) channel: name or 1-based number")->required();
  c->add_option("--reference", a.reference,
                "Reference channel (e.g. the injected or setpoint signal) for closed-loop data: the plant "
                "is estimated by the indirect method G_ry/G_ru, unbiased by feedback of output noise (default: none, open loop)");
  c->add_option("--rate", a.rate_hz, "Sampling rate in Hz; needed when the log has no time column. When "
                "given, a time column is ignored (default: from the time column or the sound file)");
  c->add_option("--segment", a.segment, "Samples per Welch segment (default 4096; a power of two is fastest). "
                "Resolution = rate/segment Hz");
  c->add_option("--resolution", a.resolution_hz, "Target frequency resolution in Hz instead of --segment: the "
                "segment becomes the smallest power of two with rate/segment <= HZ (default: none, --segment decides)");
  c->add_option("--overlap", a.overlap, "Segment overlap as a fraction in [0, 0.95] (default 0.5)");
  c->add_option("--window", a.window, "Window: rect, hann, hamming, blackmanharris (4-term), flattop "
                "(default hann)");
  c->add_option("--detrend", a.detrend, "Removed from each segment: none, mean, linear (default mean)");
  c->add_option("--estimator", a.estimator, "h1 (output noise; default), h2 (input noise) or hv (geometric "
                "mean of h1 and h2); a --reference selects the indirect estimate");
  c->add_option("--periods", a.periods, "Periodic excitation: the record holds N whole periods; they are "
                "averaged synchronously with a rectangular window (leakage-free for multisines) and the "
                "error comes from the period-to-period variation (default: none, Welch averaging)");
  c->add_option("--period", a.period, "Periodic excitation: samples per period (instead of --periods; default: none)");
  c->add_option("--scale", a.scales, "CH:FACTOR multiplies a channel (for sound files: units per full scale, "
                "e.g. 2:12.5 for a 12.5 A/FS current probe); repeatable (default: none, values as recorded)")->take_all();
  c->add_option("--confidence", a.confidence, "Confidence level of the zero-coherence bound below which lines "
                "are flagged unreliable (default 0.95)");
  c->add_option("--threads", a.threads, "Threads reading and parsing the record besides the spectra: 0 = one per "
                "core, 1 = all on one thread; the results are identical either way (default 0)");
  c->add_option("--jitter-tolerance", a.jitter, "Allowed deviation of one time step from the nominal step, as a "
                "fraction, besides the printed resolution of the time values (default 0.01)");
  c->add_option("--excitation", a.excitation, "Sidecar JSON from 'benchid excite': multisine and prbs records are "
                "averaged by period over the excited lines, repeated sweeps by sweep, a steps plan is measured step "
                "by step; the band, period and rate come from it. The record must start with the signal (default: none)");
  c->add_option("--stepped", a.stepped, "Stepped-sine plan JSON from 'benchid excite steps': one FRF point per step "
                "by a least-squares sine fit (IEEE Std 1057) with its error and the output's THD+N (default: none)");
  c->add_option("--step-freqs", a.step_freqs, "Stepped sine without a plan: step frequencies F1,F2,... in Hz, "
                "steps back to back from t = 0 (default: none)");
  c->add_option("--step-seconds", a.step_s, "Without a plan: duration of each step, s (needed with --step-freqs)");
  c->add_option("--settle-seconds", a.settle_s, "Without a plan: time left out at the start of each step, s (default 0)");
  c->add_option("--plan-offset", a.plan_offset_s, "Stepped sine: record time at which the plan's first sample was "
                "played, s (default 0)");
  c->add_flag("--refine-frequency", a.refine_frequency, "Stepped sine: refine each step's frequency from the input "
              "(four-parameter fit), for generators whose frequency is not exact");
  c->add_option("--skip-periods", a.skip_periods, "Periodic averaging: leading periods left out as transient "
                "(default 0; with --excitation, 1 when it has 3 or more periods)");
  c->add_option("--split", a.split, "Hold out the last fraction F of the record (0 to 0.9): the FRF uses the first "
                "part only, and 'replay --split F' validates the fitted model on the rest (default 0)");
  c->add_option("--lag", a.lags, "CH:SECONDS: the channel's samples are late by SECONDS (fractional samples and "
                "negative values allowed; repeatable); corrected as a linear phase on the spectra. Converter latency "
                "and channel skew: one sample at 8 kHz is 4.5 deg at 100 Hz (default: no shift)");
  c->add_option("--invert", a.inverts, "CH: the channel's polarity is flipped (a sensor mounted the other way round; "
                "repeatable; default: none)");
  c->add_option("--calibrate", a.calibrate, "Loopback FRF CSV of the measuring chain alone, measured with the same "
                "settings: the FRF is divided by it line by line and the errors of both combined (default: none)");
  c->add_option("--from", a.from_s, "Leave out the samples before this time, s from the first sample (default 0)");
  c->add_option("--to", a.to_s, "Leave out the samples from this time on, s from the first sample (default: the end)");
  c->add_flag("--loop-gain", a.loop_gain, "Injection measurement: --reference is the injected signal, --input the "
              "signal after the injection point, --output the signal returning to it; reports L = -G_ry/G_ru");
  if (!pipeline)
    c->add_option("--band", a.band, "Frequency band LO:HI in Hz to keep (either side may be empty; default: "
                  "every line above 0 Hz up to Nyquist)");
}

void add_frf_command(CLI::App& app, const std::string& command_line) {
  auto cmd = std::make_shared<FrfCommand>();
  cmd->frf.command_line = command_line;
  CLI::App* c = app.add_subcommand(
      "frf",
      "Estimate a frequency response (FRF) with coherence and error bars from a recording of an\n"
      "excitation (input) and a response (output). Writes the FRF CSV (DESIGN.md) to -o or stdout\n"
      "and a summary to stderr.");
  add_frf_options(c, cmd->frf, false);
  c->add_option("-o,--out", cmd->out, "FRF CSV to write (default: stdout); never an input path");
  add_force_flag(c);
  c->add_option("--report", cmd->report, "Also write a plain-text report (settings, quality, selected lines with "
                "error bars, warnings, caution) to this file (default: none)");
  c->add_flag("-q,--quiet", cmd->quiet, "No summary on stderr");
  c->callback([cmd] {
    cmd->frf.record = cmd->frf.records.front();
    cmd->frf.more_records.assign(cmd->frf.records.begin() + 1, cmd->frf.records.end());
    run_frf(*cmd);
  });
}

}  // namespace benchid::cli
