// Stability margins of a loop gain L(f) = C(f) P(f) (negative feedback).
//
//   gain crossover:  |L| = 1, a root of ln|L(f)|, refined by bisection in log f;
//                    phase margin PM = 180 - |arg L| (deg, arg in (-180, 180]): the
//                    smallest rotation, lag or lead, that puts L on -1 there (with
//                    several crossovers the phase may have come round from above;
//                    stability itself is judged by stability.h, not by PM's sign)
//   phase crossover: L real and negative, a root of Im L(f) with Re L < 0
//                    (no phase unwrapping needed); gain margin GM = -20 log10 |L|
//   delay margin     DM = (180 + arg L) [rad] / (2 pi f_c): the lag a delay must add to
//                    reach -1 at that crossover, the smallest over crossovers
//   Ms = max |1/(1 + L)|, Mt = max |L/(1 + L)| (golden-section refined maxima)
//   bandwidth: the lowest frequency where |T| falls 3 dB below |T| at the low end.
// The headline gain margin is the smallest over phase crossings where |L| < 1
// (the gain can still rise by that much); crossings where |L| > 1 (a
// conditionally stable loop) give lower_gain_margin_db: how far the gain may
// fall. Infinite margins are +inf (JSON null).
// Frequencies in Hz. Closed-loop stability is not judged here.
#pragma once

#include <complex>
#include <functional>
#include <limits>
#include <vector>

#include "fit/model.h"
#include "loop/controller.h"

namespace benchid::loop {

using fit::cplx;

struct Crossing {
  enum class Kind { gain, phase } kind;
  double freq_hz = 0;
  double margin = 0;  // PM in deg (gain crossing), GM in dB (phase crossing)
};

struct Margins {
  std::vector<Crossing> crossings;
  double gain_margin_db = std::numeric_limits<double>::infinity(), gain_margin_hz = std::numeric_limits<double>::quiet_NaN();
  double lower_gain_margin_db = std::numeric_limits<double>::quiet_NaN();
  double phase_margin_deg = std::numeric_limits<double>::infinity(), crossover_hz = std::numeric_limits<double>::quiet_NaN();
  double delay_margin_s = std::numeric_limits<double>::infinity();
  double ms = 0, ms_hz = 0, mt = 0, mt_hz = 0;  // linear
  double bandwidth_hz = std::numeric_limits<double>::quiet_NaN();
  double f_lo_hz = 0, f_hi_hz = 0;  // the range searched
};

struct MarginOptions {
  double f_lo_hz = 0, f_hi_hz = 0;  // 0: from the loop's poles and zeros (3 decades beyond them)
  std::size_t points = 20000;       // log-spaced grid, refined by root finding
};

using LoopFn = std::function<cplx(double freq_hz)>;
Margins margins(const LoopFn& loop, double f_lo_hz, double f_hi_hz, std::size_t points);
// L = C P of two models (s, or z with the same sample time as the controller's
// when the plant is continuous: the plant is then evaluated at f, valid below Nyquist).
Margins model_margins(const fit::RationalModel& plant, const Controller& c, const MarginOptions& o = {});

// The frequency range model_margins() searches for this plant and controller.
std::pair<double, double> loop_range(const fit::RationalModel& plant, const Controller& c, const MarginOptions& o = {});

// A plant's response on the grid margins() uses (the same log-spaced points),
// evaluated once, for sweeps where only the controller changes; exact off the grid.
class PlantOnGrid {
 public:
  PlantOnGrid(const fit::RationalModel& plant, double f_lo_hz, double f_hi_hz, std::size_t points);
  cplx operator()(double f_hz) const;

 private:
  const fit::RationalModel& plant_;
  double lo_, hi_;
  std::vector<double> f_;
  std::vector<cplx> h_;
};

}  // namespace benchid::loop
