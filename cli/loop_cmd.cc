// benchid loop PLANT.json --controller SPEC [--json] [-o LOOP.json]
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <limits>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <sstream>

#include "cli/commands.h"
#include "cli/output.h"
#include "cli/parse.h"
#include "cli/stages.h"
#include "fit/model_json.h"
#include "ident/error.h"
#include "ident/frf_csv.h"
#include "ident/json_file.h"
#include "ident/trusted.h"
#include "loop/controller.h"
#include "loop/frf_loop.h"
#include "loop/margins.h"
#include "loop/stability.h"
#include "loop/step.h"

namespace benchid::cli {

namespace {

struct LoopCommand {
  LoopArgs loop;
  std::vector<std::string> plants;  // one, or several for the worst case
  std::string plant, out, sweep;    // plant: the first
  bool json = false, strict = false;
};

nlohmann::json num_or_null(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

// --sweep NAME=LO:HI:N: the figures for N values of one controller parameter
void run_sweep(const LoopCommand& cmd, const std::string& controller, bool frf_plant) {
  const LoopArgs& a = cmd.loop;
  const auto eq = cmd.sweep.find('='), c1 = cmd.sweep.find(':', eq == std::string::npos ? 0 : eq);
  const auto c2 = c1 == std::string::npos ? std::string::npos : cmd.sweep.find(':', c1 + 1);
  if (eq == std::string::npos || c1 == std::string::npos || c2 == std::string::npos)
    throw InputError("--sweep '" + cmd.sweep + "': expected NAME=LO:HI:N, e.g. kp=0.5:2:10");
  const std::string name = cmd.sweep.substr(0, eq);
  const double lo = parse_number(cmd.sweep.substr(eq + 1, c1 - eq - 1), "--sweep LO"),
               hi = parse_number(cmd.sweep.substr(c1 + 1, c2 - c1 - 1), "--sweep HI");
  const double nn = parse_number(cmd.sweep.substr(c2 + 1), "--sweep N");
  if (!(nn >= 2 && nn <= 10000 && nn == std::floor(nn))) throw InputError("--sweep N: expected a whole number 2..10000");
  // the parameter's place in the spec: "name=" at the start or after ':', ',' or ';'
  std::size_t at = std::string::npos;
  for (std::size_t p = controller.find(name + "="); p != std::string::npos; p = controller.find(name + "=", p + 1))
    if (p == 0 || controller[p - 1] == ':' || controller[p - 1] == ',' || controller[p - 1] == ';') {
      at = p;
      break;
    }
  if (at == std::string::npos)
    throw InputError("--sweep: the controller '" + controller + "' has no parameter '" + name + "'");
  const std::size_t vstart = at + name.size() + 1, vend = controller.find_first_of(",;*@", vstart);
  std::unique_ptr<ident::Frf> frf;
  std::unique_ptr<fit::RationalModel> plant;
  std::unique_ptr<loop::PlantOnGrid> grid;  // the plant evaluated once for all values
  std::pair<double, double> range;
  if (frf_plant) {
    frf = std::make_unique<ident::Frf>(ident::read_frf_csv(cmd.plant));
  } else {
    plant = std::make_unique<fit::RationalModel>(fit::read_model_json(cmd.plant));
    range = loop::loop_range(*plant, loop::parse_controller(controller));
    grid = std::make_unique<loop::PlantOnGrid>(*plant, range.first, range.second, loop::MarginOptions{}.points);
  }
  std::cout << "benchid loop --sweep " << cmd.sweep << " on " << cmd.plant << "\n"
            << "  " << name << "          GM dB    PM deg     Ms dB   crossover Hz   closed loop\n";
  const int n = static_cast<int>(nn);
  for (int i = 0; i < n; ++i) {
    const double v = lo + (hi - lo) * i / (n - 1);
    char vb[32];
    std::snprintf(vb, sizeof vb, "%.6g", v);
    const std::string spec = controller.substr(0, vstart) + vb + (vend == std::string::npos ? "" : controller.substr(vend));
    const loop::Controller c = loop::parse_controller(spec);
    loop::Margins m;
    std::string stable = "not judged";
    if (frf) {
      loop::FrfLoopOptions fo;
      fo.draws = 0;
      fo.plant_integrators = a.plant_integrators;
      const loop::FrfMargins fm = loop::frf_margins(*frf, c, fo);
      m = fm.nominal;
      if (fm.inferred_unstable >= 0) stable = fm.inferred_unstable == 0 ? "stable (inferred)" : "UNSTABLE (inferred)";
    } else {
      m = loop::margins([&](double f) { return (*grid)(f) * c.model.response(f); }, range.first, range.second,
                        loop::MarginOptions{}.points);
      // a coarser Nyquist grid for the table (damping down to ~5e-3); the single-loop
      // command uses the full one
      const loop::Stability st = loop::closed_loop_stability(*plant, c, m.f_lo_hz, m.f_hi_hz, 20000);
      if (st.judged) stable = st.stable ? "stable" : "UNSTABLE";
    }
    // no crossing where the gain may rise, one above 0 dB: the gain must fall (negative margin)
    const double gm = std::isinf(m.gain_margin_db) && std::isfinite(m.lower_gain_margin_db) ? -m.lower_gain_margin_db
                                                                                          : m.gain_margin_db;
    char row[200];
    std::snprintf(row, sizeof row, "  %-10s %8.3g  %8.3g  %8.3g  %13.5g   %s\n", vb, gm, m.phase_margin_deg,
                  20 * std::log10(m.ms), m.crossover_hz, stable.c_str());
    std::cout << row;
  }
  std::cout << "  CAUTION: figures hold only where the plant was measured and the model fits; change gains on live "
               "machinery gradually, under the machine's safety rules.\n";
}

}  // namespace

const char* const kLoopCaution =
    "These figures hold only where the plant was measured and the model fits; changing a controller on live "
    "machinery is at the user's own risk, under the machine's safety rules.";

LoopAnalysis analyse_loop(const LoopArgs& a, const std::string& plant_name, const fit::RationalModel* model,
                          const ident::Frf* frf, double band_lo, double band_hi) {
  if (a.controller.empty()) throw InputError("no controller; expected --controller SPEC (e.g. pid:kp=1,ki=10)");
  LoopAnalysis out;
  out.plant_name = plant_name;
  out.controller = a.controller;
  out.band_lo_hz = band_lo;
  out.band_hi_hz = band_hi;
  const bool frf_plant = frf != nullptr;
  out.frf_plant = frf_plant;
  const loop::Controller c = loop::parse_controller(a.controller);
  loop::Margins& m = out.m;
  loop::Stability& st = out.st;
  loop::FrfMargins& fm = out.fm;
  static const fit::RationalModel kNoModel;
  const fit::RationalModel& plant = model ? *model : kNoModel;
  if (frf_plant) {
    loop::FrfLoopOptions fo;
    fo.plant_integrators = a.plant_integrators;
    fo.draws = a.draws;
    if (!a.band.empty()) {
      const Band b = parse_band(a.band, "--band");
      fo.band_given = true;
      fo.band_lo_hz = b.lo_hz;
      fo.band_hi_hz = b.hi_hz;
    }
    fm = loop::frf_margins(*frf, c, fo);
    m = fm.nominal;
    st.judged = fm.inferred_unstable >= 0;
    st.stable = fm.inferred_unstable == 0;
    st.reason = fm.stability_note;
  } else {
    m = loop::model_margins(plant, c);
    st = loop::closed_loop_stability(plant, c, m.f_lo_hz, m.f_hi_hz);
  }
  const double ms_db = 20 * std::log10(m.ms), mt_db = 20 * std::log10(m.mt);
  // tracking error |S| = 1/|1 + L| at a stated frequency: a decade below the
  // crossover unless given (L = 100 leaves about 1 %: 1/(1 + 100))
  double track_hz = a.tracking_hz > 0 ? a.tracking_hz : (std::isfinite(m.crossover_hz) ? m.crossover_hz / 10 : m.f_lo_hz);
  track_hz = std::clamp(track_hz, m.f_lo_hz, m.f_hi_hz);
  const auto loop_at = [&](double f) {
    if (frf_plant) return loop::margins_loop_value(fm, f);
    return plant.response(f) * c.model.response(f);
  };
  const double tracking = 1.0 / std::abs(1.0 + loop_at(track_hz));
  // step behaviour of a stable model loop
  std::optional<loop::StepMetrics> step;
  std::string step_note = "step metrics need a model plant and a closed loop judged stable";
  if (!frf_plant && st.judged && st.stable && std::isfinite(m.crossover_hz)) {
    double lowest = m.crossover_hz;
    for (const fit::RationalModel* mm : {static_cast<const fit::RationalModel*>(&plant), &c.model})
      for (const fit::cplx& q : mm->zpk().poles) {
        const fit::cplx sq = mm->domain == fit::Domain::z ? std::log(q) / mm->sample_time_s : q;
        if (std::abs(sq) > 0) lowest = std::min(lowest, std::abs(sq) / (2 * M_PI));
      }
    lowest = std::max(lowest, m.crossover_hz / 2000);  // at most 2000 crossover periods of waiting
    const loop::LoopFn lf = [&](double f) { return plant.response(f) * c.model.response(f); };
    loop::LoopFn ref = nullptr;
    if (c.setpoint_free) ref = [&](double f) { return plant.response(f) * c.reference_path.response(f); };
    step = loop::step_metrics(lf, m.crossover_hz, lowest, ref);
    step_note.clear();
  }
  // A measured plant is known only in its band: when |L| is still >= 1 at the
  // top of the band, the gain crossover (and any phase crossing after it)
  // lies above the measurement, so "no crossover" would be a wrong claim.
  const double l_top = frf_plant ? std::abs(loop_at(m.f_hi_hz)) : 0.0;
  const bool beyond_band = frf_plant && !(l_top < 1.0);
  const bool pm_known = !(beyond_band && std::isinf(m.phase_margin_deg));
  const bool gm_known = !(beyond_band && std::isinf(m.gain_margin_db));
  const std::vector<LoopCheck> checks{
      {"phase_margin_deg >=", a.pm_min, m.phase_margin_deg, pm_known && m.phase_margin_deg >= a.pm_min},
      {"gain_margin_db >=", a.gm_min, m.gain_margin_db, gm_known && m.gain_margin_db >= a.gm_min},
      {"peak_sensitivity_db <=", a.ms_max_db, ms_db, ms_db <= a.ms_max_db}};
  bool pass = st.judged && st.stable;  // and, below, every figure inside the fitted band
  for (const auto& k : checks) pass = pass && k.pass;
  const char* caution = kLoopCaution;

  std::ostringstream t;
  t << "benchid loop: plant " << plant_name << ", controller " << a.controller << "\n";
  t << "  searched " << fmt("%.4g", m.f_lo_hz) << " to " << fmt("%.4g", m.f_hi_hz) << " Hz; crossings (root-refined):\n";
  if (m.crossings.empty()) t << "    none\n";
  // every gain crossing; phase crossings up to eight (a delay makes the phase
  // wind on, with ever smaller |L|): the rest summarised by their smallest margin
  std::size_t phase_shown = 0, phase_hidden = 0;
  double hidden_min = std::numeric_limits<double>::infinity(), hidden_from = 0;
  for (const auto& x : m.crossings) {
    const bool gain = x.kind == loop::Crossing::Kind::gain;
    if (!gain && phase_shown >= 8) {
      if (phase_hidden++ == 0) hidden_from = x.freq_hz;
      hidden_min = std::min(hidden_min, x.margin);
      continue;
    }
    if (!gain) ++phase_shown;
    t << "    " << (gain ? "gain crossover  " : "phase crossover ") << fmt("%10.5g", x.freq_hz) << " Hz   "
      << (gain ? "phase margin " + fmt("%.4g", x.margin) + " deg" : "gain margin " + fmt("%.4g", x.margin) + " dB") << "\n";
  }
  if (phase_hidden > 0)
    t << "    ... " << phase_hidden << " more phase crossovers from " << fmt("%.5g", hidden_from)
      << " Hz (the delay winds the phase on), gain margins " << fmt("%.4g", hidden_min) << " dB or more\n";
  auto mark = [](bool ok) { return ok ? "pass" : "FAIL"; };
  auto pm_unc = [&](double v) { return std::isfinite(v) ? " +- " + fmt("%.2g", v) : std::string(); };
  if (frf_plant)
    t << "  plant: measured FRF (" << fm.lines << " trusted lines used, " << fm.left_out
      << " untrusted left out, in " << fm.band_note << "; margins within it)"
      << (fm.draws ? ", +- is 1 s.d. from " + std::to_string(fm.draws) +
                         " Monte Carlo draws of the per-line random error"
                   : "")
      << "\n";
  const std::string above = "unknown: |L| = " + fmt("%.3g", l_top) + " at the top of the measured band (" +
                            fmt("%.5g Hz", m.f_hi_hz) + "), so the crossover lies above it";
  t << "  gain margin      " << (!gm_known ? above : std::isinf(m.gain_margin_db) ? std::string("infinite") : fmt("%.4g", m.gain_margin_db) + pm_unc(fm.gm_sd_db) + " dB at " + fmt("%.5g Hz", m.gain_margin_hz))
    << "   [>= " << fmt("%g", a.gm_min) << " dB: " << mark(checks[1].pass) << "]\n";
  if (std::isfinite(m.lower_gain_margin_db)) t << "  lower gain margin " << fmt("%.4g dB", m.lower_gain_margin_db) << " (conditionally stable: how far the gain may fall)\n";
  t << "  phase margin     " << (!pm_known ? above : std::isinf(m.phase_margin_deg) ? std::string("infinite (no gain crossover)") : fmt("%.4g", m.phase_margin_deg) + pm_unc(fm.pm_sd_deg) + " deg at " + fmt("%.5g Hz", m.crossover_hz))
    << "   [>= " << fmt("%g", a.pm_min) << " deg: " << mark(checks[0].pass) << "]\n";
  t << "  delay margin     " << (!pm_known ? std::string("unknown (no gain crossover in the band)") : std::isinf(m.delay_margin_s) ? std::string("infinite") : fmt("%.4g ms", m.delay_margin_s * 1e3)) << "\n";
  t << "  peak sensitivity Ms " << fmt("%.4g", m.ms) << " (" << fmt("%.3g", ms_db) << pm_unc(fm.ms_sd_db) << " dB) at " << fmt("%.5g Hz", m.ms_hz)
    << "; modulus margin " << fmt("%.3g", 1 / m.ms) << "   [<= " << fmt("%g", a.ms_max_db) << " dB: " << mark(checks[2].pass) << "]\n";
  t << "  peak complementary sensitivity Mt " << fmt("%.4g", m.mt) << " (" << fmt("%.3g dB", mt_db) << ") at " << fmt("%.5g Hz", m.mt_hz) << "\n";
  t << "  tracking error |1/(1+L)| " << fmt("%.3g %%", 100 * tracking) << " at " << fmt("%.4g Hz", track_hz)
    << (a.tracking_hz > 0 ? "" : " (a decade below the crossover)") << "\n";
  t << "  closed-loop bandwidth " << (std::isfinite(m.bandwidth_hz) ? fmt("%.5g Hz", m.bandwidth_hz) : std::string("not found in the range")) << " (|T| 3 dB below its low-frequency value)\n";
  if (step)
    t << "  step (reference): rise "
      << (std::isfinite(step->rise_time_s) ? fmt("%.4g s", step->rise_time_s) : std::string("none (the final value is 0)"))
      << " (10-90 %), overshoot "
      << fmt("%.3g %%", step->overshoot_pct) << ", settling " << fmt("%.4g s", step->settling_time_s)
      << " (2 %), steady-state error " << fmt("%.3g", step->steady_state_error) << "\n"
      << "  step (output disturbance): peak " << fmt("%.3g", step->disturbance_peak) << ", back within 2 % after "
      << fmt("%.4g s", step->disturbance_recovery_s) << "\n";
  else
    t << "  step: not computed (" << step_note << ")\n";
  t << "  closed-loop stability: " << (st.judged ? (st.stable ? "stable" : "UNSTABLE") : "not judged")
    << (frf_plant && st.judged ? " (inferred)" : "") << " (" << st.reason << ")\n";
  std::vector<std::string> outside;
  if (band_hi > 0) {
    auto check = [&](const char* what, double f) {
      if (std::isfinite(f) && (f < band_lo || f > band_hi)) outside.push_back(std::string(what) + " at " + fmt("%.4g Hz", f));
    };
    check("the gain margin", std::isfinite(m.gain_margin_db) ? m.gain_margin_hz : NAN);
    check("the phase margin", std::isfinite(m.phase_margin_deg) ? m.crossover_hz : NAN);
    check("Ms", m.ms_hz);
    if (!outside.empty()) {
      t << "  WARNING: outside the model's fitted band (" << fmt("%.4g", band_lo) << " to " << fmt("%.4g", band_hi)
        << " Hz), where the model is not evidence:";
      for (std::size_t i = 0; i < outside.size(); ++i) t << (i ? ", " : " ") << outside[i];
      t << "\n";
      pass = false;
    }
  }
  t << "  verdict: " << (pass ? "pass" : "FAIL") << " (thresholds: phase and gain margin as common practice, Ms as in Astrom & Murray, Feedback Systems; and a stable closed loop)\n";
  t << "  CAUTION: " << caution << "\n";

  nlohmann::json j;
  j["format"] = "benchid.loop/1";
  j["plant"] = plant_name;
  j["controller"] = a.controller;
  j["gain_margin_db"] = num_or_null(m.gain_margin_db);
  j["gain_margin_hz"] = num_or_null(m.gain_margin_hz);
  j["lower_gain_margin_db"] = num_or_null(m.lower_gain_margin_db);
  j["phase_margin_deg"] = num_or_null(m.phase_margin_deg);
  if (frf_plant) j["crossover_above_band"] = beyond_band;  // true: the null margins are unknown, not infinite
  j["crossover_hz"] = num_or_null(m.crossover_hz);
  j["delay_margin_s"] = num_or_null(m.delay_margin_s);
  j["peak_sensitivity_db"] = ms_db;
  j["peak_sensitivity_hz"] = m.ms_hz;
  j["peak_complementary_db"] = mt_db;
  j["peak_complementary_hz"] = m.mt_hz;
  j["bandwidth_hz"] = num_or_null(m.bandwidth_hz);
  j["tracking_error"] = {{"freq_hz", track_hz}, {"fraction", tracking}};
  j["closed_loop_stable"] = st.judged ? nlohmann::json(st.stable) : nlohmann::json(nullptr);
  j["stability_basis"] = st.reason;
  j["plant_kind"] = frf_plant ? "frf" : "model";
  if (frf_plant)
    j["uncertainty"] = {{"draws", fm.draws},
                        {"phase_margin_sd_deg", num_or_null(fm.pm_sd_deg)},
                        {"gain_margin_sd_db", num_or_null(fm.gm_sd_db)},
                        {"peak_sensitivity_sd_db", num_or_null(fm.ms_sd_db)},
                        {"crossover_sd_hz", num_or_null(fm.crossover_sd_hz)}};
  nlohmann::json cr = nlohmann::json::array();
  std::size_t listed = 0;
  for (const auto& x : m.crossings)
    if (listed++ < 50) cr.push_back({{"kind", x.kind == loop::Crossing::Kind::gain ? "gain" : "phase"},
                  {"freq_hz", x.freq_hz},
                  {x.kind == loop::Crossing::Kind::gain ? "phase_margin_deg" : "gain_margin_db", x.margin}});
  j["crossings"] = cr;
  j["crossings_total"] = m.crossings.size();  // the first 50 are listed
  if (step)
    j["step"] = {{"rise_time_s", num_or_null(step->rise_time_s)},
                 {"overshoot_pct", step->overshoot_pct},
                 {"settling_time_s", step->settling_time_s},
                 {"steady_state_error", step->steady_state_error},
                 {"disturbance_peak", step->disturbance_peak},
                 {"disturbance_recovery_s", step->disturbance_recovery_s}};
  else
    j["step"] = nullptr;
  nlohmann::json v = nlohmann::json::array();
  for (const auto& k : checks) v.push_back({{"check", k.name}, {"threshold", k.threshold}, {"value", num_or_null(k.value)}, {"pass", k.pass}});
  v.push_back({{"check", "closed_loop_stable"}, {"pass", st.judged && st.stable}});
  j["verdict"] = {{"pass", pass}, {"checks", v}};
  j["caution"] = caution;
  out.track_hz = track_hz;
  out.tracking = tracking;
  out.step = std::move(step);
  out.step_note = step_note;
  out.checks = checks;
  out.crossover_above_band = beyond_band;
  out.outside_band = outside;
  out.pass = pass;
  out.text = t.str();
  out.json = std::move(j);
  return out;
}

namespace {

bool is_frf_file(const std::string& path) {
  std::string head;
  std::ifstream in(path);
  std::getline(in, head);
  return head.rfind("# benchid frf", 0) == 0 || head.rfind("freq_hz", 0) == 0;
}

// One plant file (model JSON or FRF CSV) with the controller of `a`.
LoopAnalysis analyse_plant_file(const LoopArgs& a, const std::string& path) {
  if (is_frf_file(path)) {
    const ident::Frf frf = ident::read_frf_csv(path);
    return analyse_loop(a, path, nullptr, &frf);
  }
  const fit::RationalModel plant = fit::read_model_json(path);
  double band_lo = 0, band_hi = 0;  // the band the model was fitted in, when it says
  const nlohmann::json pj = read_json_file(path, "a model from 'benchid fit'");
  if (pj.contains("fit") && pj["fit"].contains("band_hz") && pj["fit"]["band_hz"].is_array() &&
      pj["fit"]["band_hz"].size() == 2 && pj["fit"]["band_hz"][0].is_number() && pj["fit"]["band_hz"][1].is_number()) {
    band_lo = pj["fit"]["band_hz"][0].get<double>();
    band_hi = pj["fit"]["band_hz"][1].get<double>();
  }
  return analyse_loop(a, path, &plant, nullptr, band_lo, band_hi);
}

// The gain margin as the table shows it: negative when the gain must fall.
double signed_gain_margin(const loop::Margins& m) {
  return std::isinf(m.gain_margin_db) && std::isfinite(m.lower_gain_margin_db) ? -m.lower_gain_margin_db
                                                                                : m.gain_margin_db;
}

// Several plants (positions, loads, temperatures) with one controller: each
// plant's figures and the worst of each, with the plant it came from. A
// margin that is unknown for a plant (its crossover above the measured band)
// makes that worst figure unknown. The verdict passes when every plant passes.
void run_worst_case(const LoopCommand& cmd, const LoopArgs& a) {
  std::vector<LoopAnalysis> all;
  for (const auto& p : cmd.plants) all.push_back(analyse_plant_file(a, p));
  struct Worst {
    double value;
    std::size_t plant = 0;
    bool unknown = false;
  };
  const double inf = std::numeric_limits<double>::infinity();
  Worst gm{inf}, pm{inf}, dm{inf}, ms{-inf};
  bool pass = true, stable = true, judged = true;
  for (std::size_t i = 0; i < all.size(); ++i) {
    const LoopAnalysis& r = all[i];
    const loop::Margins& m = r.m;
    pass = pass && r.pass;
    judged = judged && r.st.judged;
    stable = stable && (!r.st.judged || r.st.stable);
    const bool unknown = r.crossover_above_band;
    const auto take_min = [&](Worst& w, double v, bool unk) {
      if (w.unknown) return;
      if (unk) w = {v, i, true};
      else if (v < w.value) w = {v, i, false};
    };
    take_min(gm, signed_gain_margin(m), unknown && std::isinf(m.gain_margin_db));
    take_min(pm, m.phase_margin_deg, unknown && std::isinf(m.phase_margin_deg));
    take_min(dm, m.delay_margin_s, unknown && std::isinf(m.phase_margin_deg));
    if (20 * std::log10(m.ms) > ms.value) ms = {20 * std::log10(m.ms), i, false};
  }
  const auto name = [&](const Worst& w) { return all[w.plant].plant_name; };
  const auto shown = [&](const Worst& w, const char* f, double scale, const char* unit) {
    if (w.unknown) return std::string("unknown (") + name(w) + ": crossover above its measured band)";
    if (std::isinf(w.value)) return std::string("infinite (every plant)");
    return fmt(f, w.value * scale) + unit + " (" + name(w) + ")";
  };
  std::ostringstream t;
  t << "benchid loop: worst case over " << all.size() << " plants, controller " << a.controller << "\n";
  t << "  plant                              GM dB    PM deg   delay ms    Ms dB  crossover Hz  stable     verdict\n";
  for (const LoopAnalysis& r : all) {
    const loop::Margins& m = r.m;
    const std::string stab = r.st.judged ? (r.st.stable ? "yes" : "NO") : "not judged";
    char row[320];
    std::snprintf(row, sizeof row, "  %-32s %8.4g  %8.4g  %9.4g  %7.3g  %12.5g  %-10s %s\n", r.plant_name.c_str(),
                  signed_gain_margin(m), m.phase_margin_deg, m.delay_margin_s * 1e3, 20 * std::log10(m.ms),
                  m.crossover_hz, stab.c_str(), r.pass ? "pass" : "FAIL");
    t << row;
  }
  t << "  worst gain margin   " << shown(gm, "%.4g", 1, " dB") << "\n";
  t << "  worst phase margin  " << shown(pm, "%.4g", 1, " deg") << "\n";
  t << "  worst delay margin  " << shown(dm, "%.4g", 1e3, " ms") << "\n";
  t << "  worst Ms            " << shown(ms, "%.3g", 1, " dB") << "\n";
  t << "  closed loop: " << (!stable ? "UNSTABLE for at least one plant" : judged ? "stable for every plant" : "stable where judged; not judged for every plant") << "\n";
  t << "  verdict: " << (pass ? "pass" : "FAIL") << " (every plant must pass on its own: phase and gain margin as common practice, Ms as in Astrom & Murray)\n";
  t << "  CAUTION: " << kLoopCaution << "\n";
  nlohmann::json j;
  j["format"] = "benchid.loop/1";
  j["controller"] = a.controller;
  const auto wj = [&](const Worst& w) {
    nlohmann::json o;
    o["value"] = w.unknown ? nlohmann::json(nullptr) : num_or_null(w.value);
    o["plant"] = name(w);
    o["unknown"] = w.unknown;
    return o;
  };
  j["worst_case"] = {{"gain_margin_db", wj(gm)}, {"phase_margin_deg", wj(pm)}, {"delay_margin_s", wj(dm)},
                     {"peak_sensitivity_db", wj(ms)}, {"stable", stable}, {"pass", pass}};
  j["plants"] = nlohmann::json::array();
  for (const LoopAnalysis& r : all) j["plants"].push_back(r.json);
  const std::string js = j.dump(2) + "\n";
  if (cmd.json) {
    std::cerr << t.str();
    std::cout << js;
  } else {
    std::cout << t.str();
  }
  if (!cmd.out.empty()) write_file_atomically(cmd.out, js);
  if (cmd.strict && !pass) std::exit(3);
}

void run_loop(const LoopCommand& cmd) {
  LoopArgs a = cmd.loop;
  if (!a.controller.empty()) a.controller = controller_spec(a.controller);
  check_output(cmd.out, OutputKind::loop_json, cmd.plants);
  if (a.controller.empty()) throw InputError("no controller; expected --controller SPEC (e.g. pid:kp=1,ki=10)");
  if (cmd.plants.size() > 1) {
    if (!cmd.sweep.empty()) throw InputError("--sweep takes one plant; expected one plant file with --sweep");
    run_worst_case(cmd, a);
    return;
  }
  if (!cmd.sweep.empty()) {
    run_sweep(cmd, a.controller, is_frf_file(cmd.plant));
    return;
  }
  const LoopAnalysis r = analyse_plant_file(a, cmd.plant);
  const std::string js = r.json.dump(2) + "\n";
  if (cmd.json) {
    std::cerr << r.text;
    std::cout << js;
  } else {
    std::cout << r.text;
  }
  if (!cmd.out.empty()) write_file_atomically(cmd.out, js);
  if (cmd.strict && !r.pass) std::exit(3);
}

}  // namespace

void add_loop_options(CLI::App* c, LoopArgs& a, bool pipeline) {
  if (!pipeline) {
    c->add_option("--plant-integrators", a.plant_integrators, "FRF plant: integrators of the plant below the measured "
                  "band, for the Nyquist inference (default 0)");
    c->add_option("--band", a.band,
                  "FRF plant: use only trusted lines in LO:HI, Hz (default: the trusted band, " +
                      ident::trusted_band_rule() + ")");
  }
  c->add_option("--draws", a.draws, "FRF plant: Monte Carlo draws of the per-line random error for the +- figures "
                "(default 200; 0: none)");
  c->add_option("--controller", a.controller, "Controller SPEC (or a FILE.json holding {\"format\": \"benchid.controller/1\", \"spec\": SPEC}), e.g. pid:kp=2,ki=10,kd=0.05,tf=0.002*notch:f=50,width=10,depth=20 "
                "(forms gain, pid, lead, lag, notch, poly, roots; @dt=SECONDS for a discrete controller; see README; " +
                std::string(pipeline ? "default: none, no loop section)" : "required)"));
  c->add_option("--pm-min", a.pm_min, "Phase margin threshold, deg (default 45, common practice)");
  c->add_option("--gm-min", a.gm_min, "Gain margin threshold, dB (default 10, common practice)");
  c->add_option("--ms-max", a.ms_max_db, "Peak sensitivity threshold, dB (default 6, Astrom & Murray)");
  c->add_option("--tracking-hz", a.tracking_hz, "Frequency where the tracking error |1/(1+L)| is stated, Hz (default: a "
                "decade below the crossover)");
}

void add_loop_command(CLI::App& app) {
  auto a = std::make_shared<LoopCommand>();
  CLI::App* c = app.add_subcommand(
      "loop", "Loop gain L = C P of a model plant and a controller: every gain and phase crossover (root-refined), "
              "gain, phase and delay margins, Ms, Mt, closed-loop bandwidth and stability, and a verdict.");
  c->add_option("plant", a->plants, "Plant: a model JSON from 'benchid fit', or an FRF CSV from 'benchid frf' (model-free "
                "margins within the measured band, with their uncertainty). Several plants (positions, loads, "
                "temperatures): the figures of each and the worst of each, with the plant it came from")->required();
  add_loop_options(c, a->loop, false);
  c->add_option("--sweep", a->sweep, "NAME=LO:HI:N: recompute the figures for N values of one controller parameter "
                "(e.g. kp=0.5:2:10, linear steps) and print a table (default: none)");
  c->add_option("-o,--out", a->out, "Loop JSON to write (benchid.loop/1)");
  add_force_flag(c);
  c->add_flag("--json", a->json, "Print only the loop JSON on stdout (the table goes to stderr)");
  c->add_flag("--strict", a->strict, "Exit status 3 when the verdict fails");
  c->callback([a] {
    a->plant = a->plants.front();
    run_loop(*a);
  });
}

}  // namespace benchid::cli
