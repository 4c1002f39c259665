// benchid tune PLANT [--structure pi|pid|pi+lead] [--objective integral|crossover] [-o CONTROLLER.json]
#include <cmath>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <memory>
#include <sstream>

#include "cli/commands.h"
#include "cli/output.h"
#include "cli/parse.h"
#include "cli/stages.h"
#include "cli/tune_stage.h"
#include "fit/model_json.h"
#include "ident/error.h"
#include "ident/frf_csv.h"
#include "ident/json_file.h"
#include "ident/trusted.h"
#include "loop/controller.h"

namespace benchid::cli {

const char* const kTuneCaution =
    "Proposed gains are a starting point computed from the plant as measured, valid only in its measured band. "
    "Apply them to the machine gradually (a fraction of the gain first), with output limits and a way to stop, "
    "under the machine's safety rules and licensed practice.";

namespace {

// What keeps the candidate closest to the targets from being a proposal.
std::string shortfall(const loop::TuneFigures& f, const loop::TuneOptions& o) {
  std::vector<std::string> why;
  if (f.pm_deg < o.pm_min_deg) why.push_back("PM below target");
  if (f.gm_db < o.gm_min_db) why.push_back("GM below target");
  if (f.ms_db > o.ms_max_db) why.push_back("Ms above target");
  if (f.crossover_hz < o.min_crossover_hz) why.push_back("crossover below --min-crossover");
  if (std::isfinite(f.outside_band_hz))
    why.push_back(std::string(f.outside_what) + " at " + fmt("%.4g", f.outside_band_hz) + " Hz, outside the fitted " +
                  (o.band_hi_hz > 0 ? "band " + fmt("%.4g", o.band_lo_hz) + " to " + fmt("%.4g", o.band_hi_hz) + " Hz"
                                    : std::string("band")));
  if (!f.top_ok) why.push_back("|L| at the top of the measured band not below the gain-margin target");
  if (why.empty()) return "it meets the targets on the search grid but not in the final root-refined check";
  std::string out = "fails on: ";
  for (std::size_t i = 0; i < why.size(); ++i) out += (i ? ", " : "") + why[i];
  return out;
}

nlohmann::json num_or_null(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

nlohmann::json figures_json(const loop::TuneFigures& f) {
  return {{"phase_margin_deg", num_or_null(f.pm_deg)},
          {"gain_margin_db", num_or_null(f.gm_db)},
          {"peak_sensitivity_db", num_or_null(f.ms_db)},
          {"crossover_hz", num_or_null(f.crossover_hz)},
          {"closed_loop_stable", f.stable}};
}

std::string figure(double v, const char* f, const char* unit) {
  if (std::isinf(v)) return v > 0 ? "infinite" : "-infinite";
  if (std::isnan(v)) return "-";
  return fmt(f, v) + unit;
}

// b, a of the product of the sections (powers of z^-1)
std::pair<std::vector<double>, std::vector<double>> product(const std::vector<std::vector<double>>& sos) {
  std::vector<double> b{1}, a{1};
  const auto mul = [](const std::vector<double>& x, const double* y) {
    std::vector<double> r(x.size() + 2, 0.0);
    for (std::size_t i = 0; i < x.size(); ++i)
      for (std::size_t j = 0; j < 3; ++j) r[i + j] += x[i] * y[j];
    return r;
  };
  for (const auto& s : sos) {
    b = mul(b, s.data());
    a = mul(a, s.data() + 3);
  }
  while (b.size() > 1 && b.back() == 0 && a.size() > 1 && a.back() == 0) b.pop_back(), a.pop_back();
  while (b.size() > 1 && b.back() == 0 && b.size() > a.size()) b.pop_back();
  while (a.size() > 1 && a.back() == 0 && a.size() > b.size()) a.pop_back();
  return {b, a};
}

}  // namespace

loop::TuneOptions tune_options(const TuneArgs& a) {
  loop::TuneOptions o;
  if (a.structure == "pi") o.structure = loop::TuneStructure::pi;
  else if (a.structure == "pid") o.structure = loop::TuneStructure::pid;
  else if (a.structure == "pi+lead") o.structure = loop::TuneStructure::pi_lead;
  else throw InputError("--structure '" + a.structure + "': expected pi, pid or pi+lead");
  if (a.objective == "integral") o.objective = loop::TuneObjective::integral;
  else if (a.objective == "crossover") o.objective = loop::TuneObjective::crossover;
  else throw InputError("--objective '" + a.objective + "': expected integral or crossover");
  o.pm_min_deg = a.pm_min;
  o.gm_min_db = a.gm_min;
  o.ms_max_db = a.ms_max_db;
  o.min_crossover_hz = a.min_crossover_hz;
  o.notch_depth_db = a.notch_depth_db;
  o.notch_width_factor = a.notch_width;
  o.dt_s = a.dt_s;
  o.compute_delay_s = a.compute_delay_s;
  o.error_sigmas = a.error_sigmas;
  o.plant_integrators = a.plant_integrators;
  o.derivative_filter = a.derivative_filter;
  o.integral_ratio = a.integral_ratio;
  o.max_lead_deg = a.max_lead_deg;
  if (a.plant_integrators < 0 || a.plant_integrators > 3)
    throw InputError("--plant-integrators " + std::to_string(a.plant_integrators) + ": expected 0 to 3");
  for (const std::string& n : a.notches) {
    if (n == "auto") {
      o.auto_notch = true;
      continue;
    }
    loop::NotchSetting s;
    bool f = false, w = false, d = false;
    for (const std::string& item : split_list(n)) {
      const auto eq = item.find('=');
      const std::string key = eq == std::string::npos ? item : item.substr(0, eq);
      const std::string val = eq == std::string::npos ? "" : item.substr(eq + 1);
      if (key == "f") s.freq_hz = parse_number(val, "--notch f"), f = true;
      else if (key == "width") s.width_hz = parse_number(val, "--notch width"), w = true;
      else if (key == "depth") s.depth_db = parse_number(val, "--notch depth"), d = true;
      else throw InputError("--notch '" + n + "': unknown item '" + item + "'; expected f=HZ,width=HZ,depth=DB or auto");
    }
    if (!f || !w || !d) throw InputError("--notch '" + n + "': expected f=HZ,width=HZ,depth=DB (all three) or auto");
    o.notches.push_back(s);
  }
  if (!a.band.empty()) {
    const Band b = parse_band(a.band, "--band");
    o.frf_band_given = true;
    o.frf_band_lo_hz = b.lo_hz, o.frf_band_hi_hz = b.hi_hz;
  }
  return o;
}

TuneOutcome tune_plant(const TuneArgs& a, const std::string& plant_name, const fit::RationalModel* model,
                       const ident::Frf* frf, double band_lo_hz, double band_hi_hz) {
  loop::TuneOptions o = tune_options(a);
  if (model) o.band_lo_hz = band_lo_hz, o.band_hi_hz = band_hi_hz;
  TuneOutcome out;
  loop::TuneResult& r = out.r;
  r = model ? loop::tune_model(*model, o) : loop::tune_frf(*frf, o);
  const std::string targets = "PM >= " + fmt("%g", o.pm_min_deg) + " deg, GM >= " + fmt("%g", o.gm_min_db) + " dB, Ms <= " +
                              fmt("%g", o.ms_max_db) + " dB" +
                              (o.min_crossover_hz > 0 ? ", crossover >= " + fmt("%g", o.min_crossover_hz) + " Hz" : "") +
                              (frf ? " (at the error bound, " + fmt("%g", o.error_sigmas) + " s.d. of each line)" : "") +
                              (o.band_hi_hz > 0 ? " inside the fitted band " + fmt("%g", o.band_lo_hz) + " to " +
                                                      fmt("%g", o.band_hi_hz) + " Hz" : "");
  if (!r.found) {
    std::ostringstream m;
    m << "no " << loop::structure_name(o.structure) << " controller meets " << targets << " on " << plant_name
      << "; best achievable over the stable ones of " << r.candidates << " candidates searched (each figure on its own): ";
    if (std::isfinite(r.best_pm.pm_deg))
      m << "PM " << fmt("%.3g", r.best_pm.pm_deg) << " deg, GM " << fmt("%.3g", r.best_gm.gm_db) << " dB, Ms "
        << fmt("%.3g", r.best_ms.ms_db) << " dB; closest to all targets: " << r.closest_spec << " (PM "
        << fmt("%.3g", r.closest.pm_deg) << " deg, GM " << fmt("%.3g", r.closest.gm_db) << " dB, Ms "
        << fmt("%.3g", r.closest.ms_db) << " dB, crossover " << fmt("%.4g", r.closest.crossover_hz) << " Hz; "
        << shortfall(r.closest, o) << ")";
    else if (r.not_judged > 0 && r.frf_plant)
      m << "none is judged stable (" << r.not_judged
        << " candidates could not be judged as loop judges a measured loop: most often the plant's phase at the "
           "bottom of the band is more than 90 deg from what the declared integrators give while |L| is not large "
           "there, else |L| is not small at its top); declare the plant's integrators (--plant-integrators), "
           "measure a wider band, or tune on the fitted model";
    else if (r.not_judged > 0)
      m << "none is judged stable: the Nyquist count over the frequency grid is not a whole number of turns ("
        << r.not_judged << " candidates)";
    else
      m << "none gives a stable loop with a gain crossover";
    m << ". Relax a target, lower --min-crossover, or try another --structure (pid, pi+lead)";
    throw NoResult(m.str());
  }
  std::vector<std::vector<double>> sos;
  if (o.dt_s > 0) sos = loop::controller_sections(r.spec);

  // the proposal through the loop stage, as `benchid loop` would judge it
  LoopArgs la;
  la.controller = r.spec;
  la.pm_min = o.pm_min_deg;
  la.gm_min = o.gm_min_db;
  la.ms_max_db = o.ms_max_db;
  la.plant_integrators = o.plant_integrators;
  la.band = a.band;
  la.draws = 0;
  const LoopAnalysis lp = analyse_loop(la, plant_name, model, frf, band_lo_hz, band_hi_hz);

  std::ostringstream t;
  t << "benchid tune: plant " << plant_name << " (" << (frf ? "measured FRF" : "model") << "), structure "
    << loop::structure_name(o.structure) << (o.dt_s > 0 ? ", discrete dt = " + fmt("%g", o.dt_s) + " s" : "")
    << ", objective " << (o.objective == loop::TuneObjective::integral ? "highest integral gain" : "highest crossover") << "\n";
  t << "  method: " << r.method << "\n";
  for (const std::string& n : r.notes) t << "  " << n << "\n";
  t << "  proposal: " << r.spec << "\n";
  t << "    kp " << fmt("%.6g", r.kp) << ", ki " << fmt("%.6g", r.ki) << " 1/s (integral time " << fmt("%.4g", r.kp / r.ki) << " s)";
  if (r.kd > 0) t << ", kd " << fmt("%.6g", r.kd) << " s, derivative filter tf " << fmt("%.4g", r.tf_s) << " s";
  if (r.lead_zero_hz > 0) t << ", lead zero " << fmt("%.5g", r.lead_zero_hz) << " Hz, pole " << fmt("%.5g", r.lead_pole_hz) << " Hz";
  t << "\n";
  for (const loop::NotchSetting& n : r.notches)
    t << "    notch at " << fmt("%.5g", n.freq_hz) << " Hz, width " << fmt("%.4g", n.width_hz) << " Hz, depth " << fmt("%.3g", n.depth_db) << " dB\n";
  t << "  figure            target        achieved" << (frf ? "      at the error bound" : "") << "\n";
  const auto row = [&](const char* name, const std::string& target, const std::string& v, const std::string& b) {
    char line[200];
    std::snprintf(line, sizeof line, "  %-17s %-13s %-13s %s\n", name, target.c_str(), v.c_str(), frf ? b.c_str() : "");
    t << line;
  };
  row("phase margin", ">= " + fmt("%g", o.pm_min_deg) + " deg", figure(r.nominal.pm_deg, "%.4g", " deg"), figure(r.at_bound.pm_deg, "%.4g", " deg"));
  row("gain margin", ">= " + fmt("%g", o.gm_min_db) + " dB", figure(r.nominal.gm_db, "%.4g", " dB"), figure(r.at_bound.gm_db, "%.4g", " dB"));
  row("Ms", "<= " + fmt("%g", o.ms_max_db) + " dB", figure(r.nominal.ms_db, "%.3g", " dB"), figure(r.at_bound.ms_db, "%.3g", " dB"));
  row("crossover", o.min_crossover_hz > 0 ? ">= " + fmt("%g", o.min_crossover_hz) + " Hz" : "-", figure(r.nominal.crossover_hz, "%.5g", " Hz"), "");
  row("integral gain", o.objective == loop::TuneObjective::integral ? "highest" : "-", fmt("%.5g", r.integral_gain) + " 1/s", "");
  row("closed loop", "stable", r.nominal.stable ? (frf || o.dt_s > 0 ? "stable (inferred)" : "stable") : "UNSTABLE", "");
  t << "  checked by the loop stage (as 'benchid loop' judges it): verdict " << (lp.pass ? "pass" : "FAIL");
  for (const std::string& w : lp.outside_band)
    t << "; " << w << " lies outside the fitted band, where the model is not evidence (measure a wider band, or "
      << "choose a lower --min-crossover)";
  if (!lp.st.judged)
    t << "; closed-loop stability not judged there (" << lp.st.reason << "); tune inferred it from the Nyquist count "
      << "of the frequency response below Nyquist, without aliasing";
  t << " (" << r.candidates << " candidates evaluated)\n";
  if (!sos.empty()) {
    t << "  discrete controller, Tustin at dt = " << fmt("%g", o.dt_s) << " s"
      << (o.compute_delay_s > 0 ? ", computation delay " + fmt("%g", o.compute_delay_s) + " s assumed" : "") << "\n";
    t << "  second-order sections, each y = (b0 + b1 z^-1 + b2 z^-2)/(1 + a1 z^-1 + a2 z^-2) x, in series:\n";
    for (std::size_t i = 0; i < sos.size(); ++i) {
      t << "    section " << i + 1 << ":";
      for (int j : {0, 1, 2, 4, 5}) t << " " << (j < 3 ? "b" : "a") << (j < 3 ? j : j - 3) << "=" << fmt("%.12g", sos[i][j]);
      t << "\n";
    }
    const auto [b, av] = product(sos);
    t << "  difference equation (error e, output u; the sections are better conditioned):\n    u[k] =";
    // u[k] = sum b_i e[k-i] - sum a_i u[k-i], each term with its own sign
    const auto term = [&](double c, const std::string& x, bool first) {
      t << (first ? (c < 0 ? " -" : " ") : (c < 0 ? " - " : " + ")) << fmt("%.12g", std::abs(c)) << " " << x;
    };
    for (std::size_t i = 0; i < b.size(); ++i) term(b[i], "e[k" + (i ? "-" + std::to_string(i) : std::string()) + "]", i == 0);
    for (std::size_t i = 1; i < av.size(); ++i) term(-av[i], "u[k-" + std::to_string(i) + "]", false);
    t << "\n  the integrator needs anti-windup (clamp or back-calculate u at the actuator's limits)\n";
  }
  t << "  CAUTION: " << kTuneCaution << "\n";

  nlohmann::json j;
  j["format"] = "benchid.controller/1";
  j["spec"] = r.spec;
  j["structure"] = loop::structure_name(o.structure);
  j["objective"] = a.objective;
  j["method"] = r.method;
  j["plant"] = plant_name;
  j["plant_kind"] = frf ? "frf" : "model";
  nlohmann::json notches = nlohmann::json::array();
  for (const loop::NotchSetting& n : r.notches)
    notches.push_back({{"freq_hz", n.freq_hz}, {"width_hz", n.width_hz}, {"depth_db", n.depth_db}});
  j["parameters"] = {{"kp", r.kp}, {"ki", r.ki}, {"kd", r.kd}, {"tf_s", r.tf_s},
                     {"lead_zero_hz", num_or_null(r.lead_zero_hz > 0 ? r.lead_zero_hz : NAN)},
                     {"lead_pole_hz", num_or_null(r.lead_pole_hz > 0 ? r.lead_pole_hz : NAN)},
                     {"notches", notches}};
  j["integral_gain_per_s"] = r.integral_gain;
  j["targets"] = {{"phase_margin_deg", o.pm_min_deg}, {"gain_margin_db", o.gm_min_db},
                  {"peak_sensitivity_db", o.ms_max_db}, {"min_crossover_hz", o.min_crossover_hz}};
  j["achieved"] = figures_json(r.nominal);
  if (frf) {
    j["at_error_bound"] = figures_json(r.at_bound);
    j["at_error_bound"]["error_sigmas"] = o.error_sigmas;
  } else {
    j["at_error_bound"] = nullptr;
  }
  if (!sos.empty()) {
    const auto [b, av] = product(sos);
    j["discrete"] = {{"sample_time_s", o.dt_s}, {"compute_delay_s", o.compute_delay_s}, {"sections", sos},
                     {"numerator", b}, {"denominator", av},
                     {"note", "Tustin; coefficients in powers of z^-1, a0 = 1; sections in series"}};
  } else {
    j["discrete"] = nullptr;
  }
  j["loop_verdict_pass"] = lp.pass;
  j["notes"] = r.notes;
  j["candidates_evaluated"] = r.candidates;
  j["caution"] = kTuneCaution;
  out.text = t.str();
  out.json = std::move(j);
  return out;
}

void add_tune_options(CLI::App* c, TuneArgs& a, bool pipeline) {
  if (!pipeline) {
    c->add_option("--structure", a.structure, "pi, pid (with derivative filter) or pi+lead (default pid)");
    c->add_option("--pm-min", a.pm_min, "Phase margin target, deg (default 45, common practice)");
    c->add_option("--gm-min", a.gm_min, "Gain margin target, dB (default 10, common practice)");
    c->add_option("--ms-max", a.ms_max_db, "Peak sensitivity target, dB (default 6: Ms <= 2, Astrom & Murray)");
    c->add_option("--plant-integrators", a.plant_integrators, "FRF plant: integrators below the measured band (default 0)");
    c->add_option("--band", a.band,
                  "FRF plant: use only trusted lines in LO:HI, Hz (default: the trusted band, " +
                      ident::trusted_band_rule() + ")");
  }
  c->add_option("--objective", a.objective, "integral: the highest integral gain ki, i.e. the smallest integrated error "
                "after a load step (MIGO, Astrom & Hagglund); crossover: the highest gain crossover (loop shaping) "
                "(default integral)");
  c->add_option("--min-crossover", a.min_crossover_hz, "Required gain crossover, at least this, Hz (default 0: none)");
  c->add_option("--notch", a.notches, "A fixed notch f=HZ,width=HZ,depth=DB (repeatable), or auto: one on each "
                "lightly damped resonance (damping <= 0.1) of a model plant above the crossover, kept when it raises "
                "the objective (default: none)");
  c->add_option("--notch-depth", a.notch_depth_db, "Depth of auto notches, dB (default 20)");
  c->add_option("--notch-width", a.notch_width, "Width of auto notches as a multiple of the resonance's half-power "
                "bandwidth 2 zeta f_n (default 2)");
  c->add_option("--dt", a.dt_s, "Discrete controller: sample period, s (Tustin); prints second-order sections and the "
                "difference equation (default 0: continuous)");
  c->add_option("--compute-delay", a.compute_delay_s, "Delay the controller adds (computation; half a sample for a "
                "zero-order hold not already in the measured plant), s (default 0)");
  c->add_option("--error-sigmas", a.error_sigmas, "FRF plant: the margins must hold with each line moved by this many "
                "standard deviations of its random error (default 2)");
  c->add_option("--derivative-filter", a.derivative_filter, "PID: N, the derivative filter time tf = (kd/kp)/N "
                "(default 10)");
  c->add_option("--integral-ratio", a.integral_ratio, "Crossover objective: the integral corner at least this factor "
                "below the crossover (default 5)");
  c->add_option("--max-lead", a.max_lead_deg, "PI+lead: the most phase lead searched, deg (default 60)");
}

namespace {

struct TuneCommand {
  TuneArgs args;
  std::string plant, out;
  bool json = false;
};

bool is_frf_file(const std::string& path) {
  std::string head;
  std::ifstream in(path);
  std::getline(in, head);
  return head.rfind("# benchid frf", 0) == 0 || head.rfind("freq_hz", 0) == 0;
}

void run_tune(const TuneCommand& cmd) {
  check_output(cmd.out, OutputKind::controller_json, {cmd.plant});
  TuneOutcome t;
  if (is_frf_file(cmd.plant)) {
    const ident::Frf frf = ident::read_frf_csv(cmd.plant);
    t = tune_plant(cmd.args, cmd.plant, nullptr, &frf);
  } else {
    const fit::RationalModel plant = fit::read_model_json(cmd.plant);
    double band_lo = 0, band_hi = 0;
    const nlohmann::json pj = read_json_file(cmd.plant, "a model from 'benchid fit'");
    if (pj.contains("fit") && pj["fit"].contains("band_hz") && pj["fit"]["band_hz"].is_array() &&
        pj["fit"]["band_hz"].size() == 2 && pj["fit"]["band_hz"][0].is_number() && pj["fit"]["band_hz"][1].is_number()) {
      band_lo = pj["fit"]["band_hz"][0].get<double>();
      band_hi = pj["fit"]["band_hz"][1].get<double>();
    }
    t = tune_plant(cmd.args, cmd.plant, &plant, nullptr, band_lo, band_hi);
  }
  const std::string js = t.json.dump(2) + "\n";
  if (cmd.json) {
    std::cerr << t.text;
    std::cout << js;
  } else {
    std::cout << t.text;
  }
  if (!cmd.out.empty()) write_file_atomically(cmd.out, js);
}

}  // namespace

void add_tune_command(CLI::App& app) {
  auto a = std::make_shared<TuneCommand>();
  CLI::App* c = app.add_subcommand(
      "tune", "Controller gains that meet phase margin, gain margin and Ms targets on a model or a measured FRF: "
              "PI, PID or PI+lead, optionally with notches, continuous or discrete. Writes a controller JSON "
              "that 'benchid loop --controller' reads. Exit 1 when no controller of the structure meets the targets.");
  c->add_option("plant", a->plant, "Plant: a model JSON from 'benchid fit' (s domain) or an FRF CSV from 'benchid frf'")
      ->required();
  add_tune_options(c, a->args, false);
  c->add_option("-o,--out", a->out, "Controller JSON to write (benchid.controller/1, with the figures)");
  add_force_flag(c);
  c->add_flag("--json", a->json, "Print only the controller JSON on stdout (the table goes to stderr)");
  c->callback([a] { run_tune(*a); });
}

}  // namespace benchid::cli
