// Excitation signals for bench measurements.
//
// Conventions: time t = n / rate_hz, n = 0..N-1; frequencies in Hz; levels in
// the output's unit (full scale = 1.0 for sound files); phases in radians
// unless a name says _deg.
//   chirp      x = A cos(2 pi (f0 t + (f1 - f0) t^2 / (2 T)) + phi) + offset
//   logchirp   x = A cos(2 pi f0 T / ln(f1/f0) ((f1/f0)^(t/T) - 1) + phi) + offset
//              (exponential sweep, Farina, AES 108th Conv., 2000; the same
//              form as scipy.signal.chirp(method='logarithmic'))
//   multisine  x = sum_k a cos(2 pi k n / P + phi_k), k on the DFT grid of a
//              period of P samples; Schroeder phases phi_i = -pi i (i-1) / F for
//              the i-th of F lines (Schroeder, IEEE Trans. Inf. Theory 16(1), 1970)
//   prbs       maximum-length sequence of order n, levels +-A, each bit held for
//              `divider` samples; period (2^n - 1) * divider samples
//   steps      a stepped-sine plan: per step a raised-cosine fade-in over the
//              first settle cycle, settle cycles, measure cycles, one fade-out cycle
// A raised-cosine fade multiplies the start and end of a sweep by
// (1 - cos(pi t / fade)) / 2 over `fade_s` seconds.
#pragma once

#include <cstddef>
#include <cstdint>
#include <complex>
#include <functional>
#include <string>
#include <vector>

namespace benchid::ident {

enum class Spacing { lin, log };
Spacing parse_spacing(const std::string& s);  // "lin" | "log"

struct SweepOptions {
  double rate_hz = 48000;    // samples per second
  double f0_hz = 10;         // start frequency, > 0 (log sweeps) and < Nyquist
  double f1_hz = 1000;       // stop frequency, != f0, < Nyquist
  double duration_s = 10;    // length of one sweep
  bool logarithmic = false;  // exponential (true) or linear sweep
  double amplitude = 0.5;    // peak, output unit
  double offset = 0;         // added after fading
  double phase_deg = -90;    // phi: -90 starts the sweep at zero as a sine
  double fade_s = 0;         // raised-cosine fade-in and fade-out time, < duration/2
  std::size_t repeats = 1;   // sweeps back to back (periodic when > 1)
};
void validate(const SweepOptions& o);
// Instantaneous frequency of the sweep at time t (Hz).
double sweep_frequency_hz(const SweepOptions& o, double t_s);
// The sweep's value at time t before fading and offset (unit amplitude).
double sweep_value(const SweepOptions& o, double t_s);

enum class Phases { schroeder, random };
Phases parse_phases(const std::string& s);  // "schroeder" | "random"

struct MultisineOptions {
  double rate_hz = 48000;
  std::size_t period = 0;      // samples per period; 0: rate/resolution_hz (must be a whole number)
  double resolution_hz = 1;    // line spacing when period = 0
  double f0_hz = 10;           // lowest excited frequency (rounded up to the grid)
  double f1_hz = 1000;         // highest (rounded down), < Nyquist
  Spacing spacing = Spacing::log;
  double lines_per_decade = 30;  // log spacing: target density (lines are unique grid lines)
  std::size_t every = 1;       // lin spacing: every k-th grid line
  Phases phases = Phases::schroeder;
  std::uint64_t seed = 1;      // random phases
  std::size_t crest_iterations = 0;  // iterative clipping passes to lower the crest factor
  double amplitude = 0.5;      // peak of the whole signal, output unit
  double offset = 0;
  std::size_t repeats = 4;     // periods written
  std::vector<std::pair<double, double>> profile;  // (freq_hz, relative line amplitude), log-log
                                                   // interpolated, held flat beyond its ends; empty:
                                                   // equal amplitudes. Schroeder phases then follow
                                                   // the line powers (Schroeder 1970).
};
void validate(const MultisineOptions& o);

struct PrbsOptions {
  double rate_hz = 48000;
  int order = 12;              // n, 2..32: sequence length 2^n - 1
  std::size_t divider = 1;     // samples per bit (clock = rate/divider)
  double amplitude = 0.5;      // levels +-amplitude around offset
  double offset = 0;
  std::size_t repeats = 4;
};
void validate(const PrbsOptions& o);
// The maximum-length sequence of order n (0/1), feedback taps as tabulated
// in scipy.signal.max_len_seq (SciPy 1.10.1), register started all ones.
std::vector<std::uint8_t> max_length_sequence(int order);

struct StepsOptions {
  double rate_hz = 48000;
  double f0_hz = 10, f1_hz = 1000;
  std::size_t count = 20;        // number of steps, >= 1
  Spacing spacing = Spacing::log;
  double settle_cycles = 10;     // cycles before measuring (the first is a fade-in)
  double measure_cycles = 20;    // cycles measured
  double min_settle_s = 0;       // at least this settling time per step
  double amplitude = 0.5;        // peak, when no profile is given
  std::vector<std::pair<double, double>> profile;  // (freq_hz, amplitude), log-log interpolated
  double offset = 0;
};
void validate(const StepsOptions& o);

struct Step {
  double freq_hz = 0;
  double amplitude = 0;
  std::size_t start = 0;          // first sample of the step
  std::size_t measure_start = 0;  // first sample of the measuring window
  std::size_t measure_samples = 0;
  std::size_t end = 0;            // one past the last sample (after the fade-out)
};

// A generated excitation and what a later analysis needs to know about it.
struct Excitation {
  std::string kind;            // chirp, logchirp, multisine, prbs, steps
  double rate_hz = 0;
  std::vector<double> samples;
  std::size_t period = 0;      // samples per period (0: not periodic)
  std::size_t repeats = 1;
  double band_lo_hz = 0, band_hi_hz = 0;
  std::vector<std::size_t> lines;  // excited DFT lines of one period (multisine, prbs)
  std::vector<Step> steps;         // stepped sine
  std::uint64_t seed = 0;
  double amplitude = 0, offset = 0;
  double crest_factor = 0;     // peak / rms of the AC part
  double crest_factor_initial = 0;  // before crest-factor reduction (multisine)
  double rms = 0;              // of the AC part
  std::string description;     // one line: what was made
  std::vector<double> levels;  // two-level linearity check: the first half of the periods at
                               // levels[0] times the AC part, the second half at levels[1]; else empty
};

Excitation make_sweep(const SweepOptions& o);
Excitation make_multisine(const MultisineOptions& o);
Excitation make_prbs(const PrbsOptions& o);
Excitation make_steps(const StepsOptions& o);

// peak / rms of x about its mean
double crest_factor(const std::vector<double>& x);

// One period of the steady-state response of a plant to a periodic
// excitation (its AC part): sum over the excited lines of H(f_k) U_k.
// For the peak travel, speed or current an earlier FRF predicts before the
// signal is played.
std::vector<double> predicted_response(const Excitation& e, const std::function<std::complex<double>(double)>& h);

}  // namespace benchid::ident
