// Controller gains that meet stated margins: `benchid tune`.
//
// Structures (continuous, s in rad/s; the SPEC forms of controller.h):
//   PI        kp (1 + wi/s)                                 -> pid:kp=,ki=kp wi
//   PID       kp (1 + wi/s + Td s/(Td/N s + 1))             -> pid:kp=,ki=,kd=kp Td,tf=Td/N
//   PI + lead kp (1 + wi/s) (1 + s/wz)/(1 + s/wp)           -> pid:kp=,ki=*lead:z=,p=
// each times any fixed notches (notch: form), and for a discrete controller
// made discrete by Tustin at dt (the controller is then evaluated at
// s = j (2/dt) tan(w dt/2), which is exactly its Tustin image on the unit
// circle) with a computation delay.
//
// Targets: PM >= pm_min, GM >= gm_min (both sides of a conditionally stable
// loop), Ms <= ms_max, a stable closed loop, optionally crossover >= a floor.
// Objectives (published methods):
//   integral  - maximise the integral gain ki = lim s C(s) under the
//               robustness constraints: MIGO, Astrom, Panagopoulos & Hagglund,
//               "Design of PI controllers based on non-convex optimization",
//               Automatica 34(5), 1998; Astrom & Hagglund, Advanced PID Control,
//               ISA 2006, ch. 7 (from memory). ki sets the integrated error
//               after a load step (IE = 1/ki), so it is the criterion for load-
//               disturbance rejection.
//   crossover - the highest gain crossover meeting the constraints with the
//               integral corner a fixed ratio below it: loop shaping (Astrom &
//               Murray, Feedback Systems, 2008, ch. 11, from memory).
// Search: every candidate is parameterised by its gain crossover fc and its
// shape (wi = 2 pi fc/alpha; Td = beta/(2 pi fc); lead phase phi centred at fc),
// kp then follows from |L(fc)| = 1. A coarse scan over fc on the frequency
// grid and a grid of shapes, then a pattern search in (log fc, log alpha,
// beta or phi) from the best candidates. Every proposal is checked at the end
// with the margin and stability routines `loop` uses.
//
// Measured FRF plants: the plant between lines is interpolated as `loop`
// does; with rel_err = eps per line, the loop L may lie anywhere in the disk
// L (1 + k eps e^{j theta}), k = error_sigmas. The figures "at the error
// bound" are the worst over that disk: Ms_b = max 1/(|1 + L| - k eps |L|),
// PM_b = PM - asin(k eps) at each crossover, GM_b = GM - 20 log10(1 + k eps)
// at each phase crossing (below the crossover: + 20 log10(1 - k eps) for the
// gain that may fall). Tuning on an FRF meets the targets at the bound.
// Stability is inferred as `loop` infers it (open-loop stable plant and the
// declared integrators below the band), and the crossover must lie inside
// the band with |L| at its top below the gain-margin target.
#pragma once

#include <limits>
#include <string>
#include <vector>

#include "fit/model.h"
#include "ident/frf.h"

namespace benchid::loop {

enum class TuneStructure { pi, pid, pi_lead };
enum class TuneObjective { integral, crossover };

struct NotchSetting {
  double freq_hz = 0, width_hz = 0, depth_db = 0;  // as the notch: SPEC form
};

struct TuneOptions {
  TuneStructure structure = TuneStructure::pid;
  TuneObjective objective = TuneObjective::integral;
  double pm_min_deg = 45;         // common practice
  double gm_min_db = 10;          // common practice
  double ms_max_db = 6;           // Ms <= 2, Astrom & Murray, Feedback Systems
  double min_crossover_hz = 0;    // 0: no floor
  // model plant: the band it was fitted in (0: unknown). The gain crossovers
  // must lie inside it, where the model is evidence; a phase crossing or a
  // small Ms peak outside it is allowed (a delay winds the phase on above
  // any band; |S| tends to 1 beyond the crossover), and `tune` reports them
  // as `loop` would.
  double band_lo_hz = 0, band_hi_hz = 0;
  double derivative_filter = 10;  // N: tf = Td/N (common practice: 5 to 20)
  double integral_ratio = 5;      // crossover objective: fc / (wi/2 pi) (common practice: 3 to 10)
  double max_lead_deg = 60;       // PI + lead: the most phase lead searched
  std::vector<NotchSetting> notches;
  bool auto_notch = false;        // model plant: notch lightly damped resonances above the crossover
  double auto_notch_damping = 0.1;   // "lightly damped": zeta at most this
  double notch_depth_db = 20;        // auto notches: depth
  double notch_width_factor = 2;     // auto notches: width = factor x the resonance's 2 zeta f_n
  std::size_t max_auto_notches = 4;
  double dt_s = 0;                // > 0: a discrete controller (Tustin) with this sample period
  double compute_delay_s = 0;     // delay added to the controller (computation, output hold)
  double error_sigmas = 2;        // FRF plant: margins held at estimate +- this many rel_err
  bool frf_band_given =
      false;  // FRF plant: trusted lines in this band (else its trusted band, as `loop`)
  double frf_band_lo_hz = 0, frf_band_hi_hz = 0;
  int plant_integrators = 0;      // FRF plant: integrators below the measured band (as `loop`)
  std::size_t grid_points = 1200; // log grid of the search (model plant), refined near resonances
};

// Figures of one loop (deg, dB, Hz); GM is the smaller of the headline and
// the lower (conditionally stable) margin.
struct TuneFigures {
  double pm_deg = std::numeric_limits<double>::quiet_NaN();
  double gm_db = std::numeric_limits<double>::quiet_NaN();
  double ms_db = std::numeric_limits<double>::quiet_NaN();
  double crossover_hz = std::numeric_limits<double>::quiet_NaN();
  bool stable = false;
  bool judged = true;  // false: the Nyquist count over the grid was not a whole number of turns
  // a figure outside the fitted band (NaN: none) and which; FRF plant: |L|
  // at the top of the band below the gain-margin target
  double outside_band_hz = std::numeric_limits<double>::quiet_NaN();
  const char* outside_what = "";  // what lies there: a gain crossover, the gain margin's phase crossover, the Ms peak
  bool top_ok = true;
};

struct TuneResult {
  bool found = false;
  std::string spec;                  // the controller for `loop` (with @dt for a discrete one)
  double kp = 0, ki = 0, kd = 0, tf_s = 0;   // pid: parameters (ki in 1/s, kd in s)
  double lead_zero_hz = 0, lead_pole_hz = 0; // PI + lead (0: none)
  std::vector<NotchSetting> notches;        // the notches in the proposal
  std::vector<std::string> notes;           // auto notches placed or left out, and why; a PID's unusual shape
  double integral_gain = 0;         // lim s C(s), 1/s
  TuneFigures nominal;              // at the estimate (the model, or the FRF's values)
  TuneFigures at_bound;             // FRF plant: at the error bound (else = nominal)
  bool frf_plant = false;
  // No proposal: the best each figure reaches on its own over the stable
  // candidates searched, and the candidate closest to all targets.
  TuneFigures best_pm, best_gm, best_ms;
  std::string closest_spec;
  TuneFigures closest;
  std::size_t candidates = 0;       // controllers evaluated
  std::size_t not_judged = 0;       // no proposal: candidates whose closed-loop stability could not be judged
  std::string method;               // the published method used
};

// Throws InputError for options out of range or a plant it cannot take
// (a z-domain model); a plant with no proposal gives found = false.
TuneResult tune_model(const fit::RationalModel& plant, const TuneOptions& o);
TuneResult tune_frf(const ident::Frf& plant, const TuneOptions& o);

const char* structure_name(TuneStructure s);

// The controller SPEC of these parameters (shortest exact decimal form).
std::string tune_spec(const TuneResult& r, const TuneOptions& o);

// Second-order sections of a discrete controller SPEC (one per factor: the
// pid part, a lead, each notch), each {b0, b1, b2, a0 = 1, a1, a2} in powers
// of z^-1; the overall gain is in the first section. Throws InputError for a
// continuous spec.
std::vector<std::vector<double>> controller_sections(const std::string& spec);

}  // namespace benchid::loop
