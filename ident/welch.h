// Welch-averaged auto- and cross-spectra of several channels, streamed.
//
// Conventions (as scipy.signal.welch / csd with scaling='density',
// average='mean', one-sided, return_onesided=True):
//  - segment k: X_k = FFT(w * detrend(x_k)), periodic window w of N samples,
//    hop D = N - noverlap, trailing samples that do not fill a segment dropped;
//  - G_ab[m] = c_m * mean_k conj(X_a,k[m]) X_b,k[m] / (fs * sum w^2), bins
//    m = 0..N/2 at m*fs/N Hz, c_m = 2 except DC and (even N) Nyquist where 1;
//  - units: (unit_a * unit_b)/Hz; H1 = G_uy / G_uu.
#pragma once

#include <complex>
#include <cstddef>
#include <memory>
#include <vector>

#include "ident/window.h"

namespace benchid::ident {

enum class Detrend { none, mean, linear };
Detrend parse_detrend(const std::string& name);  // "none" | "mean" (or "constant") | "linear"
const char* detrend_name(Detrend d);

struct WelchOptions {
  std::size_t segment = 4096;  // samples per segment, >= 8; a power of two is fastest
  double overlap = 0.5;        // fraction of a segment shared with the next, in [0, 0.95];
                               // 0.5 suits Hann, 0.67-0.75 flat-top
  Window window = Window::hann;
  Detrend detrend = Detrend::mean;  // removed from each segment before windowing
};
// Throws InputError "overlap = 1.2: must be in [0, 0.95]" naming field, value and rule.
void validate(const WelchOptions& o);
// Overlap in samples: round(overlap * segment), at most segment - 1.
std::size_t overlap_samples(const WelchOptions& o);

// Averaged spectra of C channels: pair (a, b), a <= b, one-sided density.
struct CrossSpectra {
  std::size_t channels = 0;
  std::size_t segment = 0;       // N
  std::size_t hop = 0;           // D
  std::size_t segments = 0;      // K, segments averaged
  double effective_averages = 0; // n_eff (Welch 1967), see window.h
  double rate_hz = 0;
  std::vector<std::vector<std::complex<double>>> pairs;  // index pair_index(a, b), bins 0..N/2

  std::size_t bins() const { return segment / 2 + 1; }
  double freq_hz(std::size_t bin) const { return static_cast<double>(bin) * rate_hz / static_cast<double>(segment); }
  // G_ab; for a > b returns conj(G_ba).
  std::complex<double> g(std::size_t a, std::size_t b, std::size_t bin) const;
  std::size_t pair_index(std::size_t a, std::size_t b) const;  // a <= b
};

// Streams blocks of C channels through Welch segmentation.
class WelchAccumulator {
 public:
  WelchAccumulator(const WelchOptions& opts, std::size_t channels);
  ~WelchAccumulator();
  WelchAccumulator(const WelchAccumulator&) = delete;
  WelchAccumulator& operator=(const WelchAccumulator&) = delete;

  // block[c][n], all channels of equal length (any length, including 0).
  void push(const std::vector<std::vector<double>>& block);
  // The end of one record of several averaged together: the samples short of
  // a segment are dropped (no segment spans two records), and the effective
  // number of averages counts the overlap correlation within each record only.
  void end_record();
  std::size_t samples() const { return samples_; }
  std::size_t segments() const { return segments_; }
  // Scaled averages; rate_hz > 0.
  CrossSpectra finish(double rate_hz) const;

 private:
  void process_segment(std::size_t offset);
  struct Fft;
  WelchOptions opts_;
  std::size_t channels_, hop_;
  std::vector<double> window_;
  std::vector<std::vector<double>> pending_;
  std::vector<std::vector<std::complex<double>>> sums_;
  std::unique_ptr<Fft> fft_;
  std::size_t samples_ = 0, segments_ = 0;
  std::vector<std::size_t> record_segments_;  // segments of each ended record
  std::size_t segments_at_record_start_ = 0;
};

// Synchronous averaging of whole periods of a periodic excitation
// (rectangular window, no overlap): per bin the mean spectrum of each channel
// and the sample covariance between channels over the periods.
struct PeriodicSpectra {
  std::size_t channels = 0;
  std::size_t period = 0;   // samples per period
  std::size_t periods = 0;  // M, periods averaged
  double rate_hz = 0;
  std::vector<std::vector<std::complex<double>>> mean;  // mean[c][bin]: mean DFT over periods
  // cov[pair(a,b)][bin]: sum_m conj(X_a,m - mean_a)(X_b,m - mean_b) / (M - 1), 0 if M = 1
  std::vector<std::vector<std::complex<double>>> cov;
  // power[pair(a,b)][bin]: mean_m conj(X_a,m) X_b,m (for the ordinary coherence over periods)
  std::vector<std::vector<std::complex<double>>> power;
  std::size_t bins() const { return period / 2 + 1; }
  double freq_hz(std::size_t bin) const { return static_cast<double>(bin) * rate_hz / static_cast<double>(period); }
  std::size_t pair_index(std::size_t a, std::size_t b) const;
};

class PeriodicAccumulator {
 public:
  // skip: whole periods at the start left out (the transient before steady state)
  PeriodicAccumulator(std::size_t period, std::size_t channels, std::size_t skip = 0);
  ~PeriodicAccumulator();
  PeriodicAccumulator(const PeriodicAccumulator&) = delete;
  PeriodicAccumulator& operator=(const PeriodicAccumulator&) = delete;
  void push(const std::vector<std::vector<double>>& block);
  // The end of one record of several: a part period is dropped and the next
  // record skips its own `skip` leading periods.
  void end_record();
  std::size_t periods() const { return periods_; }
  PeriodicSpectra finish(double rate_hz) const;

 private:
  struct Fft;
  std::size_t period_, channels_;
  std::vector<std::vector<double>> pending_;
  std::vector<std::vector<std::complex<double>>> sum_, sum_prod_;
  std::unique_ptr<Fft> fft_;
  std::size_t periods_ = 0;
  std::size_t skip_ = 0, skip_each_ = 0;
};

}  // namespace benchid::ident
