// Frequency response estimation from a recording.
//
// Estimators (u input, y output, r reference; G one-sided density spectra,
// Welch-averaged, see welch.h):
//   h1        H = G_uy / G_uu            unbiased by output noise (default)
//   h2        H = G_yy / G_yu            unbiased by input noise
//   hv        |H| = sqrt(|H1| |H2|), phase of H1 (total least squares for a
//             single input; between H1 and H2)
//   indirect  H = G_ry / G_ru            joint input-output method for closed-loop
//             data: unbiased when the loop feeds output noise back to the input
//   periodic  H = mean(Y) / mean(U)      synchronous averaging of whole periods,
//             rectangular window (leakage-free for periodic excitation)
// Coherence gamma^2 = |G_uy|^2 / (G_uu G_yy). Normalized random error of |H|
// (Bendat & Piersol, Random Data, 4th ed., 2010, ch. 9):
//   rel_err = sqrt(1 - gamma^2) / (|gamma| sqrt(2 n_d)),
// with n_d the effective number of averages (Welch 1967 overlap correction).
// For the indirect estimate the first-order error of G_ry/G_ru is
//   rel_err = sqrt(G_rr G_ee / (2 n_d |G_ru|^2 |H|^2)),  G_ee the output residual
//   spectrum of y - H u; "coherence" is then the equivalent coherence that gives the
//   same rel_err through the formula above (it reduces to gamma^2 when r = u).
// For periodic data the error is taken from the period-to-period variance:
//   var(H)/|H|^2 = (s_yy/|Y|^2 + s_uu/|U|^2 - 2 Re(s_uy / (conj(U) Y))) / M,
//   rel_err = sqrt(var/2) (half of a circular complex error lies along |H|).
// Frequencies in Hz; H in output unit per input unit; the DC line is left out.
#pragma once

#include <complex>
#include <cstddef>
#include <cstdint>
#include <limits>
#include <string>
#include <vector>

#include <optional>

#include "ident/record.h"
#include "ident/sweep_distortion.h"
#include "ident/welch.h"

namespace benchid::ident {

enum class Estimator { h1, h2, hv, indirect, periodic, stepped };
Estimator parse_estimator(const std::string& name);  // h1 | h2 | hv
const char* estimator_name(Estimator e);

// What makes a line trusted (the rule is in trusted.h).
struct TrustOptions {
  double max_rel_err = 0.2;   // largest random error of |H| of a trusted line (phase s.d. ~11 deg)
  double local_drop_db = 40;  // Welch: a line whose excitation is further below its level within an
                              // octave on either side is not excited
  double global_drop_db = 60;  // Welch: ... or further below the excitation's strongest level
};

struct FrfOptions {
  WelchOptions welch;           // segmentation, window, detrend (not used in periodic mode)
  double resolution_hz = 0;     // > 0: segment = smallest power of two with rate/segment <= this
  Estimator estimator = Estimator::h1;  // h1, h2 or hv; a reference channel selects indirect
  std::size_t period = 0;       // > 0: periodic mode with this many samples per period
  std::size_t periods = 0;      // > 0: periodic mode, the record holds this many periods
  std::size_t skip_periods = 0; // periodic mode: leading periods left out (transient)
  std::vector<std::size_t> lines;  // periodic mode: the excited DFT lines of a period (from an
                                   // excitation sidecar); empty: lines with input are detected
  std::optional<SweepOptions> log_sweep;  // periodic mode over exponential sweeps: also measure
                                          // harmonic distortion on the first averaged period
  double band_lo_hz = 0;        // lines below are left out
  double band_hi_hz = 0;        // lines above are left out; 0 = up to Nyquist
  double confidence = 0.95;     // level of the zero-coherence bound, in [0.5, 0.9999]
  TrustOptions trust;           // what makes a line trusted (trusted.h)
  bool loop_gain = false;       // injection measurement: report L = -G_ry/G_ru (needs reference)
  std::size_t block_frames = 65536;  // frames read at a time (memory, not results)
  bool prefetch = true;         // read the record on a background thread while the spectra are
                                // computed (speed, not results: the same blocks in the same order)
  double holdout_fraction = 0;  // in [0, 0.9]: the last part of the record is left out (for validation
                                // with replay --split)
  double from_s = 0;            // >= 0: samples before this time (s from the first sample) are left out
  double to_s = 0;              // > from_s: samples from this time on are left out; 0 = to the end.
                                // A hold-out is then a fraction of the kept span.
};
void validate(const FrfOptions& o);

struct Frf {
  // how it was measured
  std::string source;              // recording path
  std::string input, input_unit, output, output_unit, reference;
  double rate_hz = 0;
  std::size_t samples = 0;         // frames used
  Estimator estimator = Estimator::h1;
  Window window = Window::hann;
  Detrend detrend = Detrend::mean;
  std::size_t segment = 0;         // samples per segment (periodic: per period)
  double overlap = 0;              // fraction
  std::size_t averages = 0;        // segments (periodic: periods)
  double effective_averages = 0;   // n_d
  double confidence = 0.95;
  double coherence_bound = 1.0;    // zero-coherence bound at `confidence` for n_d averages
  bool loop_gain = false;

  // one entry per line, ascending frequency, DC left out
  std::vector<double> freq_hz;
  std::vector<std::complex<double>> h;
  std::vector<double> coherence;   // NaN where undefined
  std::vector<double> rel_err;     // NaN where undefined (no averages, zero coherence)
  std::vector<double> guu, gyy;    // one-sided density, unit^2/Hz
  std::vector<std::complex<double>> guy;
  std::vector<std::uint8_t> reliable;  // 1: a trusted line (trusted.h: coherence above the
                                       // zero-coherence bound, excited, rel_err within the limit)
  std::vector<double> distortion_pct;  // stepped sine: output THD+N per point, % (else empty)

  // Nonlinearity hint from the lines a periodic excitation leaves out (NaN
  // when not measured): output power at the non-excited lines within the
  // band, and its noise level (period-to-period), both in dB relative to the
  // mean output power at the excited lines.
  double nonexcited_db = std::numeric_limits<double>::quiet_NaN();
  double nonexcited_noise_db = std::numeric_limits<double>::quiet_NaN();
  std::size_t nonexcited_lines = 0;
  std::string excitation;              // description of the excitation, when known
  std::optional<SweepHarmonics> harmonics;  // from an exponential-sweep record

  std::vector<std::string> warnings;   // e.g. resolution bias at a resonance
  std::vector<std::string> corrections;  // what was done to the measurement, one item each
                                         // ("samples 0.5 to 10 s", "output lag 0.00125 s", ...)

  std::size_t size() const { return freq_hz.size(); }
  double resolution_hz() const { return segment ? rate_hz / static_cast<double>(segment) : 0; }
  // 20 log10 |H|, dB
  std::vector<double> mag_db() const;
  // arg H in degrees, unwrapped along the lines whose phase is trusted
  // (reliable, phase s.d. <= 0.25 rad), starting in (-180, 180]; other lines
  // lie within 180 deg of the last trusted one
  std::vector<double> phase_deg() const;
};

// Normalized random error of |H| for coherence gamma2 and n_d averages
// (Bendat & Piersol); 0 at gamma2 = 1, NaN for gamma2 <= 0 or n_d <= 0.
double frf_magnitude_error(double gamma2, double n_d);
// Zero-coherence bound: P(gamma2_hat > x | gamma2 = 0) = (1 - x)^(n_d - 1)
// (Carter, Knapp & Nuttall 1973), so x = 1 - alpha^(1/(n_d - 1)); 1 for n_d <= 1.
double zero_coherence_bound(double n_d, double confidence);

// Estimates from already averaged spectra. Channels: u, y, and r (or -1).
Frf frf_from_spectra(const CrossSpectra& cs, std::size_t u, std::size_t y, int r,
                     const FrfOptions& o);
Frf frf_from_periodic(const PeriodicSpectra& ps, std::size_t u, std::size_t y, const FrfOptions& o);

// The whole estimate from a recording in one streaming pass.
struct FrfChannels {
  std::string input, output, reference;  // names or 1-based numbers; reference may be empty
};
Frf estimate_frf(RecordReader& reader, const FrfChannels& ch, const FrfOptions& o);
// Several records of the same run repeated (same rate, channels and
// excitation), averaged into one estimate: no segment or period spans two
// records, each record is trimmed (from_s/to_s) and skips its transient
// periods on its own, and the random error comes from all of them.
Frf estimate_frf(const std::vector<RecordReader*>& readers, const FrfChannels& ch, const FrfOptions& o);

// Short human summary (a few lines, no trailing newline).
std::string summary(const Frf& f);

}  // namespace benchid::ident
