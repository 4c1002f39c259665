#include "ident/fftw_lock.h"
#include "ident/welch.h"

#include <fftw3.h>

#include <cmath>
#include <cstring>
#include <string>

#include "ident/error.h"

namespace benchid::ident {

Detrend parse_detrend(const std::string& name) {
  if (name == "none") return Detrend::none;
  if (name == "mean" || name == "constant") return Detrend::mean;
  if (name == "linear") return Detrend::linear;
  throw InputError("detrend '" + name + "' is unknown; expected none, mean or linear");
}

const char* detrend_name(Detrend d) {
  switch (d) {
    case Detrend::none: return "none";
    case Detrend::mean: return "mean";
    case Detrend::linear: return "linear";
  }
  return "?";
}

void validate(const WelchOptions& o) {
  if (o.segment < 8 || o.segment > (std::size_t{1} << 26))
    throw InputError("segment = " + std::to_string(o.segment) + ": must be in [8, 67108864] samples");
  if (!(o.overlap >= 0.0 && o.overlap <= 0.95))
    throw InputError("overlap = " + fmt_num(o.overlap) + ": must be in [0, 0.95]");
}

std::size_t overlap_samples(const WelchOptions& o) {
  auto n = static_cast<std::size_t>(std::llround(o.overlap * static_cast<double>(o.segment)));
  return std::min(n, o.segment - 1);
}

namespace {
// Upper triangle, row-major: (0,0) (0,1) ... (0,C-1) (1,1) ... ; requires a <= b.
std::size_t tri_index(std::size_t channels, std::size_t a, std::size_t b) {
  std::size_t idx = 0;
  for (std::size_t i = 0; i < a; ++i) idx += channels - i;
  return idx + (b - a);
}
}  // namespace

std::size_t CrossSpectra::pair_index(std::size_t a, std::size_t b) const {
  return tri_index(channels, a, b);
}

std::complex<double> CrossSpectra::g(std::size_t a, std::size_t b, std::size_t bin) const {
  if (a <= b) return pairs[tri_index(channels, a, b)][bin];
  return std::conj(pairs[tri_index(channels, b, a)][bin]);
}

std::size_t PeriodicSpectra::pair_index(std::size_t a, std::size_t b) const {
  return tri_index(channels, a, b);
}

// One r2c plan of size N, made once; executed on per-channel aligned buffers.
struct WelchAccumulator::Fft {
  explicit Fft(std::size_t n, std::size_t channels) : n(n) {
    in = fftw_alloc_real(n);
    for (std::size_t c = 0; c < channels; ++c) out.push_back(fftw_alloc_complex(n / 2 + 1));
    plan = locked_plan_dft_r2c_1d(static_cast<int>(n), in, out[0], FFTW_ESTIMATE);
  }
  ~Fft() {
    locked_destroy_plan(plan);
    fftw_free(in);
    for (auto* o : out) fftw_free(o);
  }
  std::size_t n;
  double* in;
  std::vector<fftw_complex*> out;
  fftw_plan plan;
};

WelchAccumulator::WelchAccumulator(const WelchOptions& opts, std::size_t channels)
    : opts_(opts), channels_(channels) {
  validate(opts_);
  hop_ = opts_.segment - overlap_samples(opts_);
  window_ = make_window(opts_.window, opts_.segment);
  pending_.resize(channels_);
  sums_.assign(channels_ * (channels_ + 1) / 2,
               std::vector<std::complex<double>>(opts_.segment / 2 + 1));
  fft_ = std::make_unique<Fft>(opts_.segment, channels_);
}

WelchAccumulator::~WelchAccumulator() = default;

void WelchAccumulator::push(const std::vector<std::vector<double>>& block) {
  if (channels_ == 0 || block.size() != channels_) return;
  const std::size_t n = block[0].size();
  for (std::size_t c = 0; c < channels_; ++c)
    pending_[c].insert(pending_[c].end(), block[c].begin(), block[c].begin() + static_cast<std::ptrdiff_t>(n));
  samples_ += n;
  std::size_t offset = 0;
  const std::size_t seg = opts_.segment;
  while (offset + seg <= pending_[0].size()) {
    process_segment(offset);
    offset += hop_;
  }
  if (offset > 0)
    for (auto& p : pending_) p.erase(p.begin(), p.begin() + static_cast<std::ptrdiff_t>(std::min(offset, p.size())));
}

void WelchAccumulator::end_record() {
  for (auto& p : pending_) p.clear();
  record_segments_.push_back(segments_ - segments_at_record_start_);
  segments_at_record_start_ = segments_;
}

void WelchAccumulator::process_segment(std::size_t offset) {
  const std::size_t n = opts_.segment;
  const double nd = static_cast<double>(n);
  for (std::size_t c = 0; c < channels_; ++c) {
    const double* x = pending_[c].data() + offset;
    double* in = fft_->in;
    double a = 0, b = 0;  // detrend line a + b*(i - (n-1)/2)
    if (opts_.detrend != Detrend::none) {
      double s = 0;
      for (std::size_t i = 0; i < n; ++i) s += x[i];
      a = s / nd;
      if (opts_.detrend == Detrend::linear) {
        // least-squares slope over centred sample indices
        const double mid = (nd - 1.0) / 2.0;
        double sxy = 0;
        for (std::size_t i = 0; i < n; ++i) sxy += (static_cast<double>(i) - mid) * (x[i] - a);
        const double sxx = nd * (nd * nd - 1.0) / 12.0;
        b = sxy / sxx;
        for (std::size_t i = 0; i < n; ++i)
          in[i] = window_[i] * (x[i] - a - b * (static_cast<double>(i) - mid));
        fftw_execute_dft_r2c(fft_->plan, in, fft_->out[c]);
        continue;
      }
    }
    for (std::size_t i = 0; i < n; ++i) in[i] = window_[i] * (x[i] - a);
    fftw_execute_dft_r2c(fft_->plan, in, fft_->out[c]);
  }
  const std::size_t bins = n / 2 + 1;
  std::size_t p = 0;
  for (std::size_t a = 0; a < channels_; ++a) {
    const auto* xa = reinterpret_cast<const std::complex<double>*>(fft_->out[a]);
    for (std::size_t b = a; b < channels_; ++b, ++p) {
      const auto* xb = reinterpret_cast<const std::complex<double>*>(fft_->out[b]);
      auto* s = sums_[p].data();
      for (std::size_t k = 0; k < bins; ++k) s[k] += std::conj(xa[k]) * xb[k];
    }
  }
  ++segments_;
}

CrossSpectra WelchAccumulator::finish(double rate_hz) const {
  CrossSpectra cs;
  cs.channels = channels_;
  cs.segment = opts_.segment;
  cs.hop = hop_;
  cs.segments = segments_;
  cs.rate_hz = rate_hz;
  // n_eff per record (overlap correlates segments within one record only), summed
  cs.effective_averages = 0;
  for (std::size_t k : record_segments_) cs.effective_averages += effective_averages(window_, hop_, k);
  cs.effective_averages += effective_averages(window_, hop_, segments_ - segments_at_record_start_);
  const WindowFigures wf = window_figures(window_);
  const std::size_t bins = cs.bins();
  cs.pairs = sums_;
  if (segments_ == 0) return cs;
  const double base = 1.0 / (static_cast<double>(segments_) * rate_hz * wf.sum_w2);
  for (auto& v : cs.pairs)
    for (std::size_t k = 0; k < bins; ++k) {
      const bool single = k == 0 || (opts_.segment % 2 == 0 && k == bins - 1);
      v[k] *= single ? base : 2.0 * base;
    }
  return cs;
}

struct PeriodicAccumulator::Fft {
  explicit Fft(std::size_t n) {
    in = fftw_alloc_real(n);
    out = fftw_alloc_complex(n / 2 + 1);
    plan = locked_plan_dft_r2c_1d(static_cast<int>(n), in, out, FFTW_ESTIMATE);
  }
  ~Fft() {
    locked_destroy_plan(plan);
    fftw_free(in);
    fftw_free(out);
  }
  double* in;
  fftw_complex* out;
  fftw_plan plan;
};

PeriodicAccumulator::PeriodicAccumulator(std::size_t period, std::size_t channels, std::size_t skip)
    : period_(period), channels_(channels), skip_(skip), skip_each_(skip) {
  if (period < 2) throw InputError("period = " + std::to_string(period) + ": must be at least 2 samples");
  pending_.resize(channels);
  const std::size_t bins = period / 2 + 1;
  sum_.assign(channels, std::vector<std::complex<double>>(bins));
  sum_prod_.assign(channels * (channels + 1) / 2, std::vector<std::complex<double>>(bins));
  fft_ = std::make_unique<Fft>(period);
}

PeriodicAccumulator::~PeriodicAccumulator() = default;

void PeriodicAccumulator::end_record() {
  for (auto& p : pending_) p.clear();
  skip_ = skip_each_;
}

void PeriodicAccumulator::push(const std::vector<std::vector<double>>& block) {
  if (channels_ == 0 || block.size() != channels_) return;
  for (std::size_t c = 0; c < channels_; ++c) pending_[c].insert(pending_[c].end(), block[c].begin(), block[c].end());
  const std::size_t bins = period_ / 2 + 1;
  std::size_t offset = 0;
  std::vector<std::vector<std::complex<double>>> x(channels_, std::vector<std::complex<double>>(bins));
  while (offset + period_ <= pending_[0].size()) {
    if (skip_ > 0) {
      --skip_;
      offset += period_;
      continue;
    }
    for (std::size_t c = 0; c < channels_; ++c) {
      std::memcpy(fft_->in, pending_[c].data() + offset, period_ * sizeof(double));
      fftw_execute(fft_->plan);
      const auto* o = reinterpret_cast<const std::complex<double>*>(fft_->out);
      for (std::size_t k = 0; k < bins; ++k) {
        x[c][k] = o[k];
        sum_[c][k] += o[k];
      }
    }
    std::size_t p = 0;
    for (std::size_t a = 0; a < channels_; ++a)
      for (std::size_t b = a; b < channels_; ++b, ++p)
        for (std::size_t k = 0; k < bins; ++k) sum_prod_[p][k] += std::conj(x[a][k]) * x[b][k];
    ++periods_;
    offset += period_;
  }
  for (auto& p : pending_) p.erase(p.begin(), p.begin() + static_cast<std::ptrdiff_t>(offset));
}

PeriodicSpectra PeriodicAccumulator::finish(double rate_hz) const {
  PeriodicSpectra ps;
  ps.channels = channels_;
  ps.period = period_;
  ps.periods = periods_;
  ps.rate_hz = rate_hz;
  const std::size_t bins = period_ / 2 + 1;
  const double m = static_cast<double>(periods_);
  ps.mean = sum_;
  for (auto& v : ps.mean)
    for (auto& z : v) z /= m;
  ps.power = sum_prod_;
  ps.cov = sum_prod_;
  std::size_t p = 0;
  for (std::size_t a = 0; a < channels_; ++a)
    for (std::size_t b = a; b < channels_; ++b, ++p)
      for (std::size_t k = 0; k < bins; ++k) {
        ps.power[p][k] /= m;
        ps.cov[p][k] = periods_ > 1
                           ? (sum_prod_[p][k] - m * std::conj(ps.mean[a][k]) * ps.mean[b][k]) / (m - 1.0)
                           : std::complex<double>(0.0);
      }
  return ps;
}

}  // namespace benchid::ident
