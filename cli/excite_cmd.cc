// benchid excite KIND [options] -o FILE: make the excitation a bench will
// play, and a sidecar JSON that tells `benchid frf --excitation` how.
#include <algorithm>
#include <cmath>
#include <complex>
#include <functional>
#include <iostream>
#include <memory>
#include <vector>

#include "cli/commands.h"
#include "cli/output.h"
#include "cli/parse.h"
#include "ident/error.h"
#include "ident/excite.h"
#include "ident/excite_io.h"
#include "ident/frf_csv.h"

namespace benchid::cli {

namespace {

struct Common {
  std::string out, sidecar, name = "excitation", unit, sample_format = "pcm24";
  std::string levels;  // "L1,L2": the two-level linearity check
  double headroom_db = ident::SignalWriteOptions{}.headroom_db;
  bool quiet = false;
};

std::string default_sidecar(const std::string& out) {
  const auto slash = out.rfind('/');
  const auto dot = out.rfind('.');
  const std::string stem = dot != std::string::npos && (slash == std::string::npos || dot > slash) ? out.substr(0, dot) : out;
  return stem + ".excite.json";
}

// The signal played twice at two levels of its AC part (a fraction of the
// amplitude each), for the linearity check of `frf --excitation`: the first
// half of the periods at L1, the second at L2, a raised-cosine ramp-in over
// the first period and ramp-out over the last (frf leaves out the first
// period of each half and the last period).
ident::Excitation at_two_levels(ident::Excitation e, const std::string& spec) {
  const std::vector<std::string> items = split_list(spec);
  if (items.size() != 2) throw InputError("--levels '" + spec + "': expected two fractions L1,L2, e.g. 0.3,1");
  const double l1 = parse_number(items[0], "--levels"), l2 = parse_number(items[1], "--levels");
  if (!(l1 > 0 && l1 <= 1 && l2 > 0 && l2 <= 1) || l1 == l2)
    throw InputError("--levels '" + spec + "': expected two different fractions of the amplitude in (0, 1]");
  if (e.period == 0 || e.kind == "steps")
    throw InputError("--levels needs a periodic excitation: multisine, prbs, or a sweep with --repeat 2 or more");
  if (e.repeats < 2) throw InputError("--levels needs at least 2 periods per level; expected --repeat 2 or more");
  const std::size_t n = e.samples.size(), p = e.period;
  std::vector<double> x(2 * n);
  for (std::size_t i = 0; i < 2 * n; ++i) {
    const double l = i < n ? l1 : l2;
    double ramp = 1.0;
    if (i < p) ramp = 0.5 - 0.5 * std::cos(M_PI * static_cast<double>(i) / static_cast<double>(p));
    if (i >= 2 * n - p) ramp = 0.5 - 0.5 * std::cos(M_PI * static_cast<double>(2 * n - 1 - i) / static_cast<double>(p));
    x[i] = e.offset + l * ramp * (e.samples[i % n] - e.offset);
  }
  e.samples = std::move(x);
  e.repeats *= 2;
  e.levels = {l1, l2};
  e.description += "; played at levels " + fmt_num(l1) + " then " + fmt_num(l2) + " of it (linearity check)";
  return e;
}

void emit(const ident::Excitation& e_in, const Common& c, const ident::SweepOptions* sweep, bool signal_optional) {
  const ident::Excitation e = c.levels.empty() ? e_in : at_two_levels(e_in, c.levels);
  if (c.out.empty() && !signal_optional) throw InputError("no output file; expected -o FILE (.csv, .wav, .flac, .aiff)");
  if (c.out.empty() && c.sidecar.empty()) throw InputError("nothing to write; expected -o FILE and/or --plan FILE");
  if (!(c.headroom_db >= 0 && c.headroom_db <= 60))
    throw InputError("--headroom " + fmt_num(c.headroom_db) + " dB: expected 0 to 60 dB");
  const std::string side = !c.sidecar.empty() ? c.sidecar : default_sidecar(c.out);
  if (side == c.out) throw InputError("the sidecar '" + side + "' would overwrite the signal; expected another path");
  check_output(c.out, OutputKind::signal, {});
  check_output(side, OutputKind::sidecar, {});
  ident::SignalWriteOptions wo;
  wo.channel_name = c.name;
  wo.unit = c.unit;
  wo.headroom_db = c.headroom_db;
  wo.sample_format = ident::parse_sample_format(c.sample_format);
  std::unique_ptr<PendingFile> sig;
  if (!c.out.empty()) {
    sig = std::make_unique<PendingFile>(c.out);
    ident::write_signal(sig->temp_path(), c.out, e, wo);
  }
  const std::string signal_name = c.out.empty() ? "" : c.out.substr(c.out.rfind('/') == std::string::npos ? 0 : c.out.rfind('/') + 1);
  write_file_atomically(side, ident::sidecar_json(e, signal_name, sweep));
  if (sig) sig->commit();
  if (!c.quiet) {
    std::cerr << "benchid excite: " << e.description << "\n  " << e.samples.size() << " samples at "
              << fmt_num(e.rate_hz) << " Hz (" << fmt_num(static_cast<double>(e.samples.size()) / e.rate_hz)
              << " s); peak " << fmt_num(e.amplitude) << ", rms " << fmt_num(e.rms) << ", crest factor "
              << fmt_num(e.crest_factor) << "\n";
    if (!c.out.empty()) std::cerr << "  wrote " << c.out << "\n";
    std::cerr << "  wrote " << side << (e.kind == "steps" ? " (the plan for frf --stepped)" : " (for frf --excitation)") << "\n";
    std::cerr << "  caution: excitation of running machinery can damage it or hurt people; start at a low level, "
                 "keep a way to stop, and follow the machine's safety rules\n";
  }
}

void add_common(CLI::App* s, Common& c, double& rate, double& amplitude, double& offset, bool plan = false) {
  s->add_option("-o,--out", c.out, plan ? "Also write the time signal: .csv (time + channel), .wav, .flac, .aiff or .ogg"
                                        : "Signal file: .csv (time + channel), .wav, .flac, .aiff or .ogg (by extension)");
  add_force_flag(s);
  s->add_option(plan ? "--plan,--sidecar" : "--sidecar", c.sidecar,
                plan ? "Plan JSON for frf --stepped (default: beside -o as NAME.excite.json)"
                     : "Sidecar JSON for frf --excitation (default: beside -o as NAME.excite.json)");
  s->add_option("--rate", rate, "Sample rate in Hz (default 48000)");
  s->add_option("--amplitude", amplitude, "Peak level in the output's unit; sound files: full scale = 1 (default 0.5)");
  s->add_option("--offset", offset, "Constant added to the signal, same unit (default 0)");
  s->add_option("--headroom", c.headroom_db, "Sound files: the peak must stay this many dB below full scale, "
                "or benchid refuses rather than clip (default 1 dB)");
  s->add_option("--sample-format", c.sample_format, "Sound files: pcm16, pcm24 or float (default pcm24; FLAC: pcm16/pcm24)");
  s->add_option("--name", c.name, "CSV column name (default excitation)");
  s->add_option("--unit", c.unit, "CSV column unit, e.g. V (default none)");
  s->add_flag("-q,--quiet", c.quiet, "No summary on stderr");
  if (!plan)
    s->add_option("--levels", c.levels, "L1,L2: play the periodic signal twice, at L1 then L2 times its amplitude, "
                  "with a ramp in and out, for the linearity check of 'frf --excitation' (default: once)");
}


// An earlier FRF of the plant: the response it predicts, and the drive
// shaped so that the response is flat.
struct PlantOptions {
  std::string plant;           // FRF CSV from 'benchid frf' (its output is the predicted quantity)
  bool flat = false;           // line amplitudes 1/|H|: a flat response instead of a flat drive
  double max_boost_db = 40;    // flat: the drive's line amplitudes span at most this range
  double response_limit = 0;   // > 0: refuse a signal whose predicted peak response exceeds it
};

// H at f from the FRF's reliable lines: log|H| and the unwrapped phase
// linear in log frequency; lo/hi: the span of those lines.
std::function<std::complex<double>(double)> plant_response(const ident::Frf& f, double& lo, double& hi) {
  auto fs = std::make_shared<std::vector<double>>();
  auto lm = std::make_shared<std::vector<double>>();
  auto ph = std::make_shared<std::vector<double>>();
  const std::vector<double> pd = f.phase_deg();
  for (std::size_t k = 0; k < f.size(); ++k)
    if (f.reliable[k] && f.freq_hz[k] > 0 && std::abs(f.h[k]) > 0) {
      fs->push_back(f.freq_hz[k]);
      lm->push_back(std::log(std::abs(f.h[k])));
      ph->push_back(pd[k] * M_PI / 180);
    }
  if (fs->size() < 2) throw InputError(f.source + ": fewer than 2 reliable lines; expected an FRF of the plant");
  lo = fs->front(), hi = fs->back();
  return [fs, lm, ph](double x) {
    const auto it = std::upper_bound(fs->begin(), fs->end(), x);
    const std::size_t i = std::clamp<std::size_t>(static_cast<std::size_t>(it - fs->begin()), 1, fs->size() - 1);
    const double t = std::log(x / (*fs)[i - 1]) / std::log((*fs)[i] / (*fs)[i - 1]);
    return std::polar(std::exp((*lm)[i - 1] + t * ((*lm)[i] - (*lm)[i - 1])), (*ph)[i - 1] + t * ((*ph)[i] - (*ph)[i - 1]));
  };
}

// The plant of --plant, read once: its response between the reliable lines
// and what the prediction may claim from it.
struct Plant {
  const PlantOptions& opt;
  ident::Frf frf;
  std::function<std::complex<double>(double)> h;
  double lo = 0, hi = 0;  // span of the reliable lines, Hz

  explicit Plant(const PlantOptions& p) : opt(p), frf(ident::read_frf_csv(p.plant)) {
    if (!(p.max_boost_db > 0 && p.max_boost_db <= 120))
      throw InputError("--max-boost " + fmt_num(p.max_boost_db) + " dB: expected 0 to 120 dB");
    h = plant_response(frf, lo, hi);
  }
  // Refuses a band beyond the reliable lines; `runs` says what spans it ("the sweep runs from").
  void cover(double f_lo, double f_hi, const std::string& runs) const {
    if (f_lo < lo * (1 - 1e-9) || f_hi > hi * (1 + 1e-9))
      throw InputError(opt.plant + ": its reliable lines span " + fmt_num(lo) + " to " + fmt_num(hi) + " Hz but " + runs +
                       " " + fmt_num(f_lo) + " to " + fmt_num(f_hi) +
                       " Hz; expected --f0/--f1 within the measured band to predict the response");
  }
  // Prints the predicted peak response (also with -q: it is what keeps the
  // machine safe) and refuses one above --response-limit, before anything is
  // written. detail: in the printed brackets; at: after the output's name in
  // the refusal; advice: what would pass.
  void judge(double peak, const std::string& detail, const std::string& at, const std::string& advice) const {
    const std::string unit = frf.output_unit.empty() ? "" : " " + frf.output_unit;
    std::cerr << "benchid excite: predicted peak response " << fmt_num(peak) << unit << " at '" << frf.output << "' ("
              << detail << "\n";
    if (opt.response_limit > 0 && peak > opt.response_limit)
      throw InputError("predicted peak response " + fmt_num(peak) + unit + " at '" + frf.output + "'" + at +
                       " exceeds --response-limit " + fmt_num(opt.response_limit) + "; expected " + advice +
                       " (nothing was written)");
  }
  double advice_amplitude(double amplitude, double peak) const { return amplitude * opt.response_limit / peak; }
};

// A periodic excitation with known lines: its exact steady-state peak.
// note: said after the figure (what the prediction leaves out)
void predict(const ident::Excitation& e, const Plant& plant, const std::string& note = "") {
  plant.cover(e.band_lo_hz, e.band_hi_hz, "the signal excites");
  double peak = 0;
  for (double v : ident::predicted_response(e, plant.h)) peak = std::max(peak, std::fabs(v));
  plant.judge(peak, "steady state, the AC part; from " + plant.opt.plant + ")" + note, "",
              "--amplitude at most " + fmt_num(plant.advice_amplitude(e.amplitude, peak)));
}

}  // namespace

void add_excite_command(CLI::App& app) {
  CLI::App* ex = app.add_subcommand("excite", "Make an excitation signal to play into the machine, and a sidecar JSON "
                                              "that later tells 'benchid frf --excitation' how to analyse the record.");
  ex->require_subcommand(1);

  for (const bool log : {false, true}) {
    auto o = std::make_shared<ident::SweepOptions>();
    auto c = std::make_shared<Common>();
    o->logarithmic = log;
    o->repeats = 1;
    CLI::App* s = ex->add_subcommand(
        log ? "logchirp" : "chirp",
        log ? "Exponential sine sweep (Farina): equal time per octave, pink spectrum; the deconvolved record "
              "separates harmonic distortion from the linear response. Good for a first look and for nonlinear "
              "plants."
            : "Linear sine sweep: flat spectrum over the band, simple to reason about; averaging repeated sweeps "
              "gives the error. Good for narrow bands and resonance hunting.");
    add_common(s, *c, o->rate_hz, o->amplitude, o->offset);
    s->add_option("--f0", o->f0_hz, "Start frequency, Hz (default 10)");
    s->add_option("--f1", o->f1_hz, "Stop frequency, Hz, below Nyquist (default 1000)");
    s->add_option("--duration", o->duration_s, "Length of one sweep, s (default 10)");
    s->add_option("--fade", o->fade_s, "Raised-cosine fade-in and fade-out, s (default 0)");
    s->add_option("--phase", o->phase_deg, "Phase of the cosine at t = 0, deg (default -90: starts at zero as a sine)");
    s->add_option("--repeat", o->repeats, "Sweeps back to back; 2 or more make the record periodic so the sweeps "
                  "can be averaged with an error bar (default 1)");
    auto pp = std::make_shared<PlantOptions>();
    s->add_option("--plant", pp->plant, "An earlier FRF CSV of the plant: the peak response, amplitude x the largest "
                  "|H| over the sweep (quasi-steady: a slow sweep), is printed before anything is written (default: none)");
    s->add_option("--response-limit", pp->response_limit, "With --plant: refuse a sweep whose predicted peak response "
                  "exceeds this, in the FRF output's unit (default: no limit)");
    s->callback([o, c, pp] {
      if (!pp->plant.empty()) {
        // a slow sweep passes each frequency in steady state: the response's envelope is A |H(f(t))|
        const Plant plant(*pp);
        const double f_lo = std::min(o->f0_hz, o->f1_hz), f_hi = std::max(o->f0_hz, o->f1_hz);
        plant.cover(f_lo, f_hi, "the sweep runs from");
        double peak = 0, at_hz = 0;
        for (int i = 0; i <= 2000; ++i) {
          const double f = f_lo * std::pow(f_hi / f_lo, i / 2000.0);
          const double r = o->amplitude * std::abs(plant.h(f));
          if (r > peak) peak = r, at_hz = f;
        }
        plant.judge(peak,
                    "near " + fmt_num(at_hz) + " Hz; quasi-steady, a slow sweep: a fast one through a sharp resonance "
                    "rings less; from " + pp->plant + ")",
                    "", "--amplitude at most " + fmt_num(plant.advice_amplitude(o->amplitude, peak)));
      } else if (pp->response_limit > 0) {
        throw InputError("--response-limit needs --plant FRF.csv");
      }
      emit(ident::make_sweep(*o), *c, o.get(), false);
    });
  }

  {
    auto o = std::make_shared<ident::MultisineOptions>();
    auto c = std::make_shared<Common>();
    auto phases = std::make_shared<std::string>("schroeder");
    auto spacing = std::make_shared<std::string>("log");
    CLI::App* s = ex->add_subcommand(
        "multisine", "Periodic sum of sines on the FFT grid: leakage-free when whole periods are analysed, "
                     "controlled spectrum, error bar from period-to-period variation, and non-excited lines that "
                     "reveal nonlinear distortion. Best for linear plants.");
    add_common(s, *c, o->rate_hz, o->amplitude, o->offset);
    s->add_option("--f0", o->f0_hz, "Lowest excited frequency, Hz (default 10)");
    s->add_option("--f1", o->f1_hz, "Highest excited frequency, Hz (default 1000)");
    s->add_option("--resolution", o->resolution_hz, "Line spacing, Hz; rate/resolution must be a whole number of "
                  "samples (default 1)");
    s->add_option("--period", o->period, "Samples per period, instead of --resolution (default: none)");
    s->add_option("--spacing", *spacing, "lin or log line spacing (default log)");
    s->add_option("--lines-per-decade", o->lines_per_decade, "Log spacing: lines per decade (default 30)");
    s->add_option("--every", o->every, "Lin spacing: every k-th grid line (default 1)");
    s->add_option("--phases", *phases, "schroeder (low crest factor, deterministic) or random (default schroeder)");
    s->add_option("--seed", o->seed, "Random phases: seed (default 1)");
    s->add_option("--crest-iterations", o->crest_iterations, "Passes of iterative clipping to lower the crest "
                  "factor (default 0: none)");
    s->add_option("--repeat", o->repeats, "Periods written; the first is usually skipped as transient (default 4)");
    auto pp = std::make_shared<PlantOptions>();
    s->add_option("--plant", pp->plant, "An earlier FRF CSV of the plant: the peak response it predicts at its output "
                  "(travel, speed, current) is printed before anything is written (default: none)");
    s->add_flag("--flat-response", pp->flat, "With --plant: line amplitudes 1/|H| so the response, not the drive, is "
                "flat (within --max-boost)");
    s->add_option("--max-boost", pp->max_boost_db, "With --flat-response: the drive's line amplitudes span at most this "
                  "many dB (default 40)");
    s->add_option("--response-limit", pp->response_limit, "With --plant: refuse a signal whose predicted peak response "
                  "exceeds this, in the FRF output's unit (default: no limit)");
    s->callback([o, c, phases, spacing, pp] {
      o->phases = ident::parse_phases(*phases);
      o->spacing = ident::parse_spacing(*spacing);
      if (pp->plant.empty()) {
        if (pp->flat || pp->response_limit > 0) throw InputError("--flat-response and --response-limit need --plant FRF.csv");
        emit(ident::make_multisine(*o), *c, nullptr, false);
        return;
      }
      const Plant pl(*pp);
      const ident::Frf& plant = pl.frf;
      if (pp->flat) {
        o->profile.clear();
        double a_min = 1e300;
        for (std::size_t k = 0; k < plant.size(); ++k)
          if (plant.reliable[k] && plant.freq_hz[k] > 0 && std::abs(plant.h[k]) > 0)
            a_min = std::min(a_min, 1 / std::abs(plant.h[k]));
        const double cap = a_min * std::pow(10.0, pp->max_boost_db / 20);
        for (std::size_t k = 0; k < plant.size(); ++k)
          if (plant.reliable[k] && plant.freq_hz[k] > 0 && std::abs(plant.h[k]) > 0)
            o->profile.emplace_back(plant.freq_hz[k], std::min(1 / std::abs(plant.h[k]), cap));
      }
      ident::Excitation e = ident::make_multisine(*o);
      if (pp->flat) e.description += "; shaped for a flat response at '" + plant.output + "' (" + pp->plant + ")";
      predict(e, pl);
      emit(e, *c, nullptr, false);
    });
  }

  {
    auto o = std::make_shared<ident::PrbsOptions>();
    auto c = std::make_shared<Common>();
    CLI::App* s = ex->add_subcommand(
        "prbs", "Maximum-length binary sequence: crest factor 1 (the most power for a given peak), flat spectrum "
                "up to about 0.44 x the clock; good for drives with a hard current or voltage limit.");
    add_common(s, *c, o->rate_hz, o->amplitude, o->offset);
    s->add_option("--order", o->order, "Register length n: the sequence has 2^n - 1 bits (2..24, default 12)");
    s->add_option("--divider", o->divider, "Samples per bit: clock = rate/divider places the band (default 1)");
    s->add_option("--repeat", o->repeats, "Periods written (default 4)");
    auto pp = std::make_shared<PlantOptions>();
    s->add_option("--plant", pp->plant, "An earlier FRF CSV of the plant: the peak response it predicts over the "
                  "sequence's lines is printed before anything is written (default: none)");
    s->add_option("--response-limit", pp->response_limit, "With --plant: refuse a sequence whose predicted peak "
                  "response exceeds this, in the FRF output's unit (default: no limit)");
    s->callback([o, c, pp] {
      const ident::Excitation e = ident::make_prbs(*o);
      if (!pp->plant.empty()) {
        predict(e, Plant(*pp),
                "; the lines above the useful band, 3 dB down and falling, are left out: an underestimate where the "
                "plant passes them");
      } else if (pp->response_limit > 0) {
        throw InputError("--response-limit needs --plant FRF.csv");
      }
      emit(e, *c, nullptr, false);
    });
  }

  {
    auto o = std::make_shared<ident::StepsOptions>();
    auto c = std::make_shared<Common>();
    auto spacing = std::make_shared<std::string>("log");
    auto profile = std::make_shared<std::string>();
    CLI::App* s = ex->add_subcommand(
        "steps", "Stepped-sine plan: one frequency at a time, the best signal-to-noise per point and a distortion "
                 "figure per step; slow, but the reference for nonlinear or noisy plants. Writes the plan JSON for "
                 "frf --stepped, and the signal with -o.");
    add_common(s, *c, o->rate_hz, o->amplitude, o->offset, true);
    s->add_option("--f0", o->f0_hz, "First step frequency, Hz (default 10)");
    s->add_option("--f1", o->f1_hz, "Last step frequency, Hz (default 1000)");
    s->add_option("--count", o->count, "Number of steps (default 20)");
    s->add_option("--spacing", *spacing, "lin or log (default log)");
    s->add_option("--settle-cycles", o->settle_cycles, "Cycles before measuring, the first a fade-in (default 10)");
    s->add_option("--measure-cycles", o->measure_cycles, "Cycles measured per step (default 20)");
    s->add_option("--min-settle", o->min_settle_s, "At least this settling time per step, s (default 0)");
    s->add_option("--profile", *profile, "Amplitude per frequency as F:A,F:A,... (Hz:peak), interpolated log-log; "
                  "replaces --amplitude (default: none, constant --amplitude)");
    auto pp = std::make_shared<PlantOptions>();
    s->add_option("--plant", pp->plant, "An earlier FRF CSV of the plant: the largest response of any step at its "
                  "output (amplitude x |H|) is printed before anything is written (default: none)");
    s->add_flag("--flat-response", pp->flat, "With --plant: step amplitudes proportional to 1/|H(f)|, the largest "
                "--amplitude, so every step gives the same response (within --max-boost)");
    s->add_option("--max-boost", pp->max_boost_db, "With --flat-response: the step amplitudes span at most this many dB "
                  "(default 40)");
    s->add_option("--response-limit", pp->response_limit, "With --plant: refuse a plan whose largest predicted step "
                  "response exceeds this, in the FRF output's unit (default: no limit)");
    s->callback([o, c, spacing, profile, pp] {
      o->spacing = ident::parse_spacing(*spacing);
      if (!profile->empty()) {
        for (const auto& item : split_list(*profile)) {
          const auto colon = item.find(':');
          if (colon == std::string::npos) throw InputError("--profile item '" + item + "': expected FREQ_HZ:AMPLITUDE");
          o->profile.emplace_back(parse_number(item.substr(0, colon), "--profile frequency"),
                                  parse_number(item.substr(colon + 1), "--profile amplitude"));
        }
      }
      if (pp->plant.empty()) {
        if (pp->flat || pp->response_limit > 0) throw InputError("--flat-response and --response-limit need --plant FRF.csv");
        emit(ident::make_steps(*o), *c, nullptr, true);
        return;
      }
      const Plant plant(*pp);
      const auto& h = plant.h;
      plant.cover(std::min(o->f0_hz, o->f1_hz), std::max(o->f0_hz, o->f1_hz), "the steps run from");
      if (pp->flat) {
        if (!profile->empty()) throw InputError("give --profile or --flat-response, not both");
        // |H| at the step frequencies (as make_steps places them), then amplitude ~ 1/|H|
        std::vector<std::pair<double, double>> prof;
        double h_max = 0;
        const std::size_t n = std::max<std::size_t>(o->count, 1);
        for (std::size_t i = 0; i < n; ++i) {
          const double t = n == 1 ? 0.0 : static_cast<double>(i) / static_cast<double>(n - 1);
          const double f = o->spacing == ident::Spacing::log ? o->f0_hz * std::pow(o->f1_hz / o->f0_hz, t)
                                                              : o->f0_hz + t * (o->f1_hz - o->f0_hz);
          prof.emplace_back(f, std::abs(h(f)));
          h_max = std::max(h_max, prof.back().second);
        }
        // amplitude ~ 1/|H|, with |H| floored at --max-boost below its peak; the largest step is --amplitude
        const double floor_h = h_max * std::pow(10.0, -pp->max_boost_db / 20);
        for (auto& pa : prof) pa.second = 1.0 / std::max(pa.second, floor_h);
        double a_max = 0;
        for (const auto& pa : prof) a_max = std::max(a_max, pa.second);
        for (auto& pa : prof) pa.second *= o->amplitude / a_max;
        o->profile = prof;
      }
      ident::Excitation e = ident::make_steps(*o);
      double peak = 0, at_hz = 0;
      for (const auto& st : e.steps) {
        const double r = st.amplitude * std::abs(h(st.freq_hz));
        if (r > peak) peak = r, at_hz = st.freq_hz;
      }
      plant.judge(peak, "the step at " + fmt_num(at_hz) + " Hz; steady state, from " + pp->plant + ")",
                  " (the step at " + fmt_num(at_hz) + " Hz)", "lower step amplitudes");
      emit(e, *c, nullptr, true);
    });
  }
}

}  // namespace benchid::cli
