// Replaying a recorded input through a model, and the tests that say whether
// the model explains the recorded output.
//
// Simulation, two ways:
//  - "as measured" (default): a model fitted to a measured FRF already holds
//    the converters and the hold (DESIGN.md: never add a second hold), so its
//    response is applied to the recorded samples as they are:
//    Y(f) = H(f) U(f) on an FFT grid of at least twice the record (zero
//    padding makes it a linear convolution from rest), the delay exact as
//    e^{-j 2 pi f delay}. Models with integrators cannot be applied at 0 Hz
//    and fall back to the hold simulation.
//  - "zoh": the input is held between samples (a DAC, a drive's command) and
//    the model is a continuous plant: its state space is discretised exactly,
//    [Ad Bd; 0 I] = exp([A B; 0 0] T) (Van Loan). A delay of (N + e) T is exact
//    too: N whole samples of shift, and the fraction e T by splitting the hold
//    interval (modified z-transform):
//      x[k+1] = Ad x[k] + B1 u[k-N] + B2 u[k-N-1],
//      B1 = int_0^{(1-e)T} e^{A s} ds B,  B2 = e^{A (1-e) T} int_0^{e T} e^{A s} ds B.
// Means are removed from input and output first (the fitted model leaves the
// DC line out), and the first `settle` samples are left out of every figure
// (the model starts at rest, the machine did not).
//
// match % = 100 (1 - ||y - y^|| / ||y - mean y||).
// Residual independence (Ljung, System Identification, 2nd ed., 1999, ch. 16):
//   rho_e(tau), tau = 1..M: autocorrelation of the residual e = y - y^;
//   rho_eu(tau), tau = -M..M: cross-correlation of e with the input.
// 99 % bounds: 2.576/sqrt(N) for rho_e; 2.576 sqrt(sum_k rho_e(k) rho_u(k))/sqrt(N)
// for rho_eu (Ljung's P for a coloured input). On long records these bounds
// shrink until every real model fails, so a lag counts as failing only above
// max(bound, practical), practical = 0.1 by default (length-aware rule), and
// a test passes when at most 1 % of its lags (and at least one allowed) fail.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "fit/model.h"

namespace benchid::fit {

enum class Hold { as_measured, zoh };

struct ReplayOptions {
  Hold hold = Hold::as_measured;
  std::size_t lags = 25;            // M
  double practical = 0.1;           // correlations below this never fail a lag
  double settle_fraction = 0.05;    // samples left out at the start: this fraction of the record...
  double settle_time_constants = 5; // ...or 5 time constants of the slowest pole, whichever is larger
  double holdout_fraction = 0;      // > 0: score only the last part of the record (held out of the fit)
};

struct CorrelationTest {
  std::vector<double> rho;   // per lag
  double bound = 0;          // statistical 99 % bound
  double threshold = 0;      // max(bound, practical)
  std::size_t failing = 0, allowed = 0;
  bool pass = false;
};

struct ReplayResult {
  std::vector<double> simulated;  // model output (with the output's mean added back)
  std::size_t settle = 0;         // samples left out of the figures
  std::size_t samples = 0;        // samples in the figures
  double match_pct = 0;
  CorrelationTest whiteness, cross;
  std::string verdict;            // one line
  Hold hold = Hold::as_measured;  // the simulation used
  bool streamed = false;          // replay_stream() on a long record: `simulated` is empty
  std::string note;               // e.g. where a streamed simulation truncated the model's response
};

// Exact zero-order-hold simulation of the model at rate_hz (s-domain models).
std::vector<double> simulate(const RationalModel& m, const std::vector<double>& u, double rate_hz);
// The model's frequency response applied to the samples (no hold added).
std::vector<double> simulate_as_measured(const RationalModel& m, const std::vector<double>& u, double rate_hz);

ReplayResult replay(const RationalModel& m, const std::vector<double>& u, const std::vector<double>& y,
                    double rate_hz, const ReplayOptions& o = {});

// A recording read block by block from its start (see replay_stream).
class ReplaySource {
 public:
  virtual ~ReplaySource() = default;
  // The next block of input u and output y (equal lengths); returns its length, 0 at the end.
  virtual std::size_t next(std::vector<double>& u, std::vector<double>& y) = 0;
  virtual double rate_hz() const = 0;  // final once next() has returned 0
};

struct StreamReplayOptions {
  // Records up to this many samples are read whole and replayed by replay(),
  // so their figures are exactly replay()'s; longer ones are streamed.
  std::size_t in_memory_limit = std::size_t{1} << 22;
  // Streamed "as measured": the model's response becomes an FIR filter of at
  // most this many taps (doubled from 4096 until the discarded part of the
  // impulse response holds less than 1e-7 of its energy, 3e-4 of its
  // amplitude); where more than 1e-5 is left out, `note` says so. A fractional delay's band-limited
  // interpolation decays slowly, so a model with one takes the most taps.
  std::size_t max_taps = std::size_t{1} << 20;
};

// Receives the record in order as it is replayed: index of the block's first
// sample, measured and simulated output (means restored).
using ReplaySink = std::function<void(std::size_t first, const std::vector<double>& y, const std::vector<double>& y_sim)>;

// replay() of a record of any length in bounded memory: a first pass over
// open() finds the length, rate and means (and keeps a short record, which
// goes to replay() without a second pass); a second simulates and
// accumulates match % and the correlation sums as the samples go by. The
// figures equal replay()'s to rounding (zoh: the same recursion; as
// measured: the response as a long FIR, see max_taps).
ReplayResult replay_stream(const RationalModel& m, const std::function<std::unique_ptr<ReplaySource>()>& open,
                           const ReplayOptions& o = {}, const StreamReplayOptions& so = {},
                           const ReplaySink& sink = {});

}  // namespace benchid::fit
