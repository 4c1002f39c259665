#include "ident/fftw_lock.h"
#include "ident/excite.h"

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <map>
#include <numbers>
#include <random>

#include "ident/error.h"

namespace benchid::ident {

namespace {
constexpr double kPi = std::numbers::pi;

void require(bool ok, const std::string& what) {
  if (!ok) throw InputError(what);
}

void check_rate(double rate_hz) {
  require(std::isfinite(rate_hz) && rate_hz > 0 && rate_hz <= 10e6,
          "rate = " + fmt_num(rate_hz) + " Hz: must be in (0, 1e7] Hz");
}

void check_level(double amplitude, double offset) {
  require(std::isfinite(amplitude) && amplitude > 0, "amplitude = " + fmt_num(amplitude) + ": must be positive");
  require(std::isfinite(offset), "offset = " + fmt_num(offset) + ": must be finite");
}

void check_band(double f0, double f1, double rate, bool need_order) {
  const double nyq = rate / 2;
  require(std::isfinite(f0) && f0 > 0, "f0 = " + fmt_num(f0) + " Hz: must be a positive frequency");
  require(std::isfinite(f1) && f1 > 0, "f1 = " + fmt_num(f1) + " Hz: must be a positive frequency");
  require(f0 < nyq, "f0 = " + fmt_num(f0) + " Hz: must be below Nyquist (" + fmt_num(nyq) + " Hz)");
  require(f1 < nyq, "f1 = " + fmt_num(f1) + " Hz: must be below Nyquist (" + fmt_num(nyq) + " Hz)");
  if (need_order)
    require(f1 > f0, "band " + fmt_num(f0) + " to " + fmt_num(f1) + " Hz: the stop frequency must be above the start");
}

void fill_stats(Excitation& e) {
  double mean = 0;
  for (double v : e.samples) mean += v;
  mean /= static_cast<double>(std::max<std::size_t>(1, e.samples.size()));
  double ss = 0, peak = 0;
  for (double v : e.samples) {
    ss += (v - mean) * (v - mean);
    peak = std::max(peak, std::fabs(v - mean));
  }
  e.rms = std::sqrt(ss / static_cast<double>(std::max<std::size_t>(1, e.samples.size())));
  e.crest_factor = e.rms > 0 ? peak / e.rms : 0;
}
}  // namespace

Spacing parse_spacing(const std::string& s) {
  if (s == "lin") return Spacing::lin;
  if (s == "log") return Spacing::log;
  throw InputError("spacing '" + s + "' is unknown; expected lin or log");
}

Phases parse_phases(const std::string& s) {
  if (s == "schroeder") return Phases::schroeder;
  if (s == "random") return Phases::random;
  throw InputError("phases '" + s + "' is unknown; expected schroeder or random");
}

double crest_factor(const std::vector<double>& x) {
  Excitation e;
  e.samples = x;
  fill_stats(e);
  return e.crest_factor;
}

// ---------------------------------------------------------------- sweeps

void validate(const SweepOptions& o) {
  check_rate(o.rate_hz);
  check_band(o.f0_hz, o.f1_hz, o.rate_hz, false);
  require(o.f0_hz != o.f1_hz, "f0 = f1 = " + fmt_num(o.f0_hz) + " Hz: a sweep needs two different frequencies");
  require(std::isfinite(o.duration_s) && o.duration_s > 0 && o.duration_s * o.rate_hz >= 16 &&
              o.duration_s * o.rate_hz <= 2e9,
          "duration = " + fmt_num(o.duration_s) + " s: must hold 16 to 2e9 samples");
  require(std::isfinite(o.fade_s) && o.fade_s >= 0 && o.fade_s < o.duration_s / 2,
          "fade = " + fmt_num(o.fade_s) + " s: must be in [0, duration/2)");
  require(std::isfinite(o.phase_deg), "phase must be finite");
  require(o.repeats >= 1 && o.repeats <= 100000, "repeat = " + std::to_string(o.repeats) + ": must be in [1, 100000]");
  check_level(o.amplitude, o.offset);
}

double sweep_frequency_hz(const SweepOptions& o, double t) {
  const double T = o.duration_s;
  if (o.logarithmic) return o.f0_hz * std::pow(o.f1_hz / o.f0_hz, t / T);
  return o.f0_hz + (o.f1_hz - o.f0_hz) * t / T;
}

double sweep_value(const SweepOptions& o, double t) {
  const double T = o.duration_s, phi = o.phase_deg * kPi / 180.0;
  double theta;
  if (o.logarithmic) {
    const double k = std::log(o.f1_hz / o.f0_hz);
    theta = 2 * kPi * o.f0_hz * T / k * (std::exp(k * t / T) - 1.0);
  } else {
    theta = 2 * kPi * (o.f0_hz * t + 0.5 * (o.f1_hz - o.f0_hz) * t * t / T);
  }
  return std::cos(theta + phi);
}

Excitation make_sweep(const SweepOptions& o) {
  validate(o);
  Excitation e;
  e.kind = o.logarithmic ? "logchirp" : "chirp";
  e.rate_hz = o.rate_hz;
  const auto n = static_cast<std::size_t>(std::llround(o.duration_s * o.rate_hz));
  std::vector<double> one(n);
  const auto fade_n = static_cast<std::size_t>(std::llround(o.fade_s * o.rate_hz));
  for (std::size_t i = 0; i < n; ++i) {
    const double t = static_cast<double>(i) / o.rate_hz;
    double w = 1.0;
    if (fade_n > 0 && i < fade_n) w = 0.5 * (1 - std::cos(kPi * static_cast<double>(i) / static_cast<double>(fade_n)));
    if (fade_n > 0 && n - 1 - i < fade_n)
      w = 0.5 * (1 - std::cos(kPi * static_cast<double>(n - 1 - i) / static_cast<double>(fade_n)));
    one[i] = o.amplitude * w * sweep_value(o, t);
  }
  e.samples.reserve(n * o.repeats);
  for (std::size_t r = 0; r < o.repeats; ++r)
    for (double v : one) e.samples.push_back(v + o.offset);
  e.period = n;
  e.repeats = o.repeats;
  e.band_lo_hz = std::min(o.f0_hz, o.f1_hz);
  e.band_hi_hz = std::max(o.f0_hz, o.f1_hz);
  e.amplitude = o.amplitude;
  e.offset = o.offset;
  fill_stats(e);
  e.description = std::string(o.logarithmic ? "exponential" : "linear") + " sweep " + fmt_num(o.f0_hz) + " to " +
                  fmt_num(o.f1_hz) + " Hz in " + fmt_num(o.duration_s) + " s, " + std::to_string(o.repeats) +
                  (o.repeats == 1 ? " sweep" : " sweeps back to back");
  return e;
}

// ------------------------------------------------------------- multisine

namespace {
std::size_t multisine_period(const MultisineOptions& o) {
  if (o.period > 0) return o.period;
  const double p = o.rate_hz / o.resolution_hz;
  require(std::fabs(p - std::round(p)) < 1e-9 * p,
          "resolution = " + fmt_num(o.resolution_hz) + " Hz gives a period of " + fmt_num(p) +
              " samples at " + fmt_num(o.rate_hz) + " Hz; expected a whole number of samples (choose a resolution "
              "that divides the rate, or give --period)");
  return static_cast<std::size_t>(std::llround(p));
}

// One period of sum_k amp_k cos(2 pi k n/P + phi_k) by an inverse real FFT.
std::vector<double> synthesize(std::size_t period, const std::vector<std::size_t>& lines,
                               const std::vector<std::complex<double>>& coef) {
  std::vector<std::complex<double>> spec(period / 2 + 1);
  for (std::size_t i = 0; i < lines.size(); ++i) spec[lines[i]] = 0.5 * coef[i];
  std::vector<double> x(period);
  fftw_plan p = locked_plan_dft_c2r_1d(static_cast<int>(period), reinterpret_cast<fftw_complex*>(spec.data()),
                                     x.data(), FFTW_ESTIMATE);
  fftw_execute(p);
  locked_destroy_plan(p);
  return x;
}

std::vector<std::complex<double>> analyse(const std::vector<double>& x, const std::vector<std::size_t>& lines) {
  std::vector<double> in(x);
  std::vector<std::complex<double>> spec(x.size() / 2 + 1);
  fftw_plan p = locked_plan_dft_r2c_1d(static_cast<int>(x.size()), in.data(),
                                     reinterpret_cast<fftw_complex*>(spec.data()), FFTW_ESTIMATE);
  fftw_execute(p);
  locked_destroy_plan(p);
  std::vector<std::complex<double>> c(lines.size());
  for (std::size_t i = 0; i < lines.size(); ++i) c[i] = spec[lines[i]];
  return c;
}
}  // namespace

void validate(const MultisineOptions& o) {
  check_rate(o.rate_hz);
  for (const auto& [f, a] : o.profile)
    require(std::isfinite(f) && f > 0 && std::isfinite(a) && a > 0,
            "profile point " + fmt_num(f) + ":" + fmt_num(a) + ": expected positive FREQ_HZ:AMPLITUDE");
  require(o.period > 0 || (std::isfinite(o.resolution_hz) && o.resolution_hz > 0),
          "resolution = " + fmt_num(o.resolution_hz) + " Hz: must be positive");
  const std::size_t p = multisine_period(o);
  require(p >= 4 && p <= (std::size_t{1} << 28), "period = " + std::to_string(p) + " samples: must be in [4, 2^28]");
  check_band(o.f0_hz, o.f1_hz, o.rate_hz, true);
  const double res = o.rate_hz / static_cast<double>(p);
  require(std::ceil(o.f0_hz / res - 1e-9) <= std::floor(o.f1_hz / res + 1e-9),
          "band " + fmt_num(o.f0_hz) + " to " + fmt_num(o.f1_hz) + " Hz holds no line of the " + fmt_num(res) +
              " Hz grid; expected a wider band or a finer resolution");
  require(std::isfinite(o.lines_per_decade) && o.lines_per_decade > 0,
          "lines per decade = " + fmt_num(o.lines_per_decade) + ": must be positive");
  require(o.every >= 1, "every = 0: must be at least 1");
  require(o.crest_iterations <= 10000, "crest iterations = " + std::to_string(o.crest_iterations) + ": at most 10000");
  require(o.repeats >= 1 && o.repeats <= 100000, "repeat = " + std::to_string(o.repeats) + ": must be in [1, 100000]");
  check_level(o.amplitude, o.offset);
}

Excitation make_multisine(const MultisineOptions& o) {
  validate(o);
  const std::size_t period = multisine_period(o);
  const double res = o.rate_hz / static_cast<double>(period);
  auto k_lo = static_cast<std::size_t>(std::ceil(o.f0_hz / res - 1e-9));
  const auto k_hi = static_cast<std::size_t>(std::floor(o.f1_hz / res + 1e-9));
  k_lo = std::max<std::size_t>(k_lo, 1);
  std::vector<std::size_t> lines;
  if (o.spacing == Spacing::lin) {
    for (std::size_t k = k_lo; k <= k_hi; k += o.every) lines.push_back(k);
  } else {
    const double decades = std::log10(static_cast<double>(k_hi) / static_cast<double>(k_lo));
    const auto n = static_cast<std::size_t>(std::max(1.0, std::round(o.lines_per_decade * decades) + 1));
    for (std::size_t i = 0; i < n; ++i) {
      const double k = n == 1 ? static_cast<double>(k_lo)
                              : static_cast<double>(k_lo) * std::pow(static_cast<double>(k_hi) / static_cast<double>(k_lo),
                                                                     static_cast<double>(i) / static_cast<double>(n - 1));
      const auto kk = static_cast<std::size_t>(std::llround(k));
      if (lines.empty() || kk > lines.back()) lines.push_back(kk);
    }
  }
  const double f = static_cast<double>(lines.size());
  // line amplitudes: equal, or from the profile (log-log between its points, flat beyond)
  std::vector<double> amp(lines.size(), 1.0);
  if (!o.profile.empty()) {
    auto prof = o.profile;
    std::sort(prof.begin(), prof.end());
    for (std::size_t i = 0; i < lines.size(); ++i) {
      const double fk = static_cast<double>(lines[i]) * res;
      if (fk <= prof.front().first) amp[i] = prof.front().second;
      else if (fk >= prof.back().first) amp[i] = prof.back().second;
      else {
        const auto it = std::upper_bound(prof.begin(), prof.end(), std::make_pair(fk, 0.0));
        const auto& [f0, a0] = *(it - 1);
        const auto& [f1, a1] = *it;
        const double t = std::log(fk / f0) / std::log(f1 / f0);
        amp[i] = std::exp(std::log(a0) + t * (std::log(a1) - std::log(a0)));
      }
    }
  }
  double power = 0;
  for (double a : amp) power += a * a;
  std::vector<std::complex<double>> coef(lines.size());
  std::mt19937_64 gen(o.seed);
  std::uniform_real_distribution<double> uni(0.0, 2 * kPi);
  double acc = 0, sum_p = 0;  // running sums of the general Schroeder formula
  for (std::size_t i = 0; i < lines.size(); ++i) {
    // Schroeder 1970 for equal powers: phi_i = -pi i (i - 1) / F, i = 1..F; for
    // powers p_l (sum 1): phi_i = -2 pi sum_{l < i} (i - l) p_l
    const double ii = static_cast<double>(i + 1);
    double phi;
    if (o.phases != Phases::schroeder) phi = uni(gen);
    else if (o.profile.empty()) phi = -kPi * ii * (ii - 1) / f;
    else {
      acc += sum_p;  // sum_{l < i} (i - l) p_l grows by sum_{l < i} p_l at each step
      phi = -2 * kPi * acc;
      sum_p += amp[i] * amp[i] / power;
    }
    coef[i] = std::polar(amp[i], phi);
  }
  std::vector<double> x = synthesize(period, lines, coef);
  Excitation e;
  e.crest_factor_initial = crest_factor(x);
  // Crest-factor reduction by iterative clipping: clip the peaks, restore the
  // line amplitudes keeping the new phases, drop what clipping put elsewhere;
  // the best period seen is kept.
  std::vector<double> best = x;
  double best_cf = e.crest_factor_initial;
  for (std::size_t it = 0; it < o.crest_iterations; ++it) {
    double ss = 0;
    for (double v : x) ss += v * v;
    const double rms = std::sqrt(ss / static_cast<double>(period));
    const double clip = 0.9 * best_cf * rms;
    for (double& v : x) v = std::clamp(v, -clip, clip);
    auto c = analyse(x, lines);
    for (std::size_t i = 0; i < c.size(); ++i)
      c[i] = amp[i] * (std::abs(c[i]) > 0 ? c[i] / std::abs(c[i]) : std::complex<double>(1.0));
    x = synthesize(period, lines, c);
    const double cf = crest_factor(x);
    if (cf < best_cf) best_cf = cf, best = x;
  }
  x = best;
  double peak = 0;
  for (double v : x) peak = std::max(peak, std::fabs(v));
  for (double& v : x) v *= o.amplitude / peak;
  e.kind = "multisine";
  e.rate_hz = o.rate_hz;
  e.period = period;
  e.repeats = o.repeats;
  e.lines = lines;
  e.band_lo_hz = static_cast<double>(lines.front()) * res;
  e.band_hi_hz = static_cast<double>(lines.back()) * res;
  e.seed = o.phases == Phases::random ? o.seed : 0;
  e.amplitude = o.amplitude;
  e.offset = o.offset;
  e.samples.reserve(period * o.repeats);
  for (std::size_t r = 0; r < o.repeats; ++r)
    for (double v : x) e.samples.push_back(v + o.offset);
  fill_stats(e);
  e.description = "multisine of " + std::to_string(lines.size()) + " lines (" +
                  (o.spacing == Spacing::log ? "log" : "lin") + "-spaced) " + fmt_num(e.band_lo_hz) + " to " +
                  fmt_num(e.band_hi_hz) + " Hz, period " + std::to_string(period) + " samples (" + fmt_num(res) +
                  " Hz), " + (o.phases == Phases::schroeder ? "Schroeder" : "random") + " phases, crest factor " +
                  fmt_num(e.crest_factor) + (o.crest_iterations ? " (from " + fmt_num(e.crest_factor_initial) + ")" : "") +
                  ", " + std::to_string(o.repeats) + " periods";
  return e;
}

// ------------------------------------------------------------------ PRBS

std::vector<std::uint8_t> max_length_sequence(int order) {
  // Feedback taps, the first option for each order in scipy.signal.max_len_seq
  // (SciPy 1.10.1); the register runs as scipy's ring buffer, started all ones.
  static const std::map<int, std::vector<int>> kTaps = {
      {2, {1}},          {3, {2}},          {4, {3}},          {5, {3}},           {6, {5}},
      {7, {6}},          {8, {7, 6, 1}},    {9, {5}},          {10, {7}},          {11, {9}},
      {12, {11, 10, 4}}, {13, {12, 11, 8}}, {14, {13, 12, 2}}, {15, {14}},         {16, {15, 13, 4}},
      {17, {14}},        {18, {11}},        {19, {18, 17, 14}}, {20, {17}},        {21, {19}},
      {22, {21}},        {23, {18}},        {24, {23, 22, 17}}, {25, {22}},        {26, {25, 24, 20}},
      {27, {26, 25, 22}}, {28, {25}},       {29, {27}},        {30, {29, 28, 7}}, {31, {28}},
      {32, {31, 30, 10}}};
  const auto it = kTaps.find(order);
  require(it != kTaps.end(), "order = " + std::to_string(order) + ": must be in [2, 32]");
  const auto n = static_cast<std::size_t>(order);
  const std::size_t length = (std::size_t{1} << n) - 1;
  std::vector<std::uint8_t> state(n, 1), seq(length);
  std::size_t idx = 0;
  for (std::size_t i = 0; i < length; ++i) {
    std::uint8_t feedback = state[idx];
    seq[i] = feedback;
    for (int t : it->second) feedback ^= state[(static_cast<std::size_t>(t) + idx) % n];
    state[idx] = feedback;
    idx = (idx + 1) % n;
  }
  return seq;
}

void validate(const PrbsOptions& o) {
  check_rate(o.rate_hz);
  require(o.order >= 2 && o.order <= 24, "order = " + std::to_string(o.order) + ": must be in [2, 24]");
  require(o.divider >= 1 && o.divider <= 1000000, "divider = " + std::to_string(o.divider) + ": must be in [1, 1e6]");
  require(o.repeats >= 1 && o.repeats <= 100000, "repeat = " + std::to_string(o.repeats) + ": must be in [1, 100000]");
  const double period = static_cast<double>((std::size_t{1} << o.order) - 1) * static_cast<double>(o.divider);
  require(period * static_cast<double>(o.repeats) <= 2e9, "prbs of " + fmt_num(period * static_cast<double>(o.repeats)) +
                                                            " samples: at most 2e9 (lower order, divider or repeat)");
  check_level(o.amplitude, o.offset);
}

Excitation make_prbs(const PrbsOptions& o) {
  validate(o);
  const auto seq = max_length_sequence(o.order);
  const std::size_t len = seq.size(), d = o.divider, period = len * d;
  Excitation e;
  e.kind = "prbs";
  e.rate_hz = o.rate_hz;
  e.period = period;
  e.repeats = o.repeats;
  e.amplitude = o.amplitude;
  e.offset = o.offset;
  e.samples.reserve(period * o.repeats);
  for (std::size_t r = 0; r < o.repeats; ++r)
    for (std::uint8_t b : seq)
      for (std::size_t k = 0; k < d; ++k) e.samples.push_back(o.offset + (b ? o.amplitude : -o.amplitude));
  // Power of line k relative to a flat sequence: the hold of d samples
  // shapes it by [sin(pi k d/P) / (d sin(pi k/P))]^2 (nulls at multiples of
  // the clock rate/d); the lines within 3 dB of flat are the useful band.
  for (std::size_t k = 1; 2 * k < period; ++k) {
    const double a = kPi * static_cast<double>(k) / static_cast<double>(period);
    const double env = d == 1 ? 1.0 : std::pow(std::sin(a * static_cast<double>(d)) / (static_cast<double>(d) * std::sin(a)), 2);
    if (env < 0.5) break;
    e.lines.push_back(k);
  }
  const double res = o.rate_hz / static_cast<double>(period);
  e.band_lo_hz = res;
  e.band_hi_hz = static_cast<double>(e.lines.empty() ? 1 : e.lines.back()) * res;
  fill_stats(e);
  e.description = "maximum-length sequence of order " + std::to_string(o.order) + " (" + std::to_string(len) +
                  " bits), clock " + fmt_num(o.rate_hz / static_cast<double>(d)) + " Hz, useful band " +
                  fmt_num(e.band_lo_hz) + " to " + fmt_num(e.band_hi_hz) + " Hz (within 3 dB), " +
                  std::to_string(o.repeats) + " periods";
  return e;
}

// ----------------------------------------------------------------- steps

void validate(const StepsOptions& o) {
  check_rate(o.rate_hz);
  check_band(o.f0_hz, o.f1_hz, o.rate_hz, o.count > 1);
  require(o.count >= 1 && o.count <= 100000, "count = " + std::to_string(o.count) + ": must be in [1, 100000]");
  require(std::isfinite(o.settle_cycles) && o.settle_cycles >= 1,
          "settle cycles = " + fmt_num(o.settle_cycles) + ": must be at least 1 (the fade-in)");
  require(std::isfinite(o.measure_cycles) && o.measure_cycles >= 1,
          "measure cycles = " + fmt_num(o.measure_cycles) + ": must be at least 1");
  require(std::isfinite(o.min_settle_s) && o.min_settle_s >= 0, "minimum settle time must be >= 0 s");
  if (o.profile.empty()) check_level(o.amplitude, o.offset);
  for (const auto& [f, a] : o.profile)
    require(std::isfinite(f) && f > 0 && std::isfinite(a) && a > 0,
            "profile point " + fmt_num(f) + ":" + fmt_num(a) + ": expected positive FREQ_HZ:AMPLITUDE");
  require(o.measure_cycles / o.f1_hz * o.rate_hz >= 8 || o.measure_cycles / o.f0_hz * o.rate_hz >= 8,
          "measure window shorter than 8 samples: more measure cycles needed");
}

namespace {
double profile_amplitude(const StepsOptions& o, double f) {
  if (o.profile.empty()) return o.amplitude;
  auto p = o.profile;
  std::sort(p.begin(), p.end());
  if (f <= p.front().first) return p.front().second;
  if (f >= p.back().first) return p.back().second;
  for (std::size_t i = 1; i < p.size(); ++i)
    if (f <= p[i].first) {
      const double t = std::log(f / p[i - 1].first) / std::log(p[i].first / p[i - 1].first);
      return std::exp(std::log(p[i - 1].second) + t * std::log(p[i].second / p[i - 1].second));
    }
  return p.back().second;
}
}  // namespace

Excitation make_steps(const StepsOptions& o) {
  validate(o);
  Excitation e;
  e.kind = "steps";
  e.rate_hz = o.rate_hz;
  e.offset = o.offset;
  std::size_t pos = 0;
  for (std::size_t i = 0; i < o.count; ++i) {
    const double t = o.count == 1 ? 0.0 : static_cast<double>(i) / static_cast<double>(o.count - 1);
    const double f = o.spacing == Spacing::log ? o.f0_hz * std::pow(o.f1_hz / o.f0_hz, t) : o.f0_hz + (o.f1_hz - o.f0_hz) * t;
    Step s;
    s.freq_hz = f;
    s.amplitude = profile_amplitude(o, f);
    const double cycle = o.rate_hz / f;  // samples per cycle
    const auto fade = static_cast<std::size_t>(std::llround(cycle));
    const auto settle = static_cast<std::size_t>(std::llround(std::max(o.settle_cycles * cycle, o.min_settle_s * o.rate_hz)));
    s.start = pos;
    s.measure_start = pos + std::max(settle, fade);
    s.measure_samples = static_cast<std::size_t>(std::llround(o.measure_cycles * cycle));
    s.end = s.measure_start + s.measure_samples + fade;
    const std::size_t n = s.end - s.start;
    for (std::size_t k = 0; k < n; ++k) {
      double w = 1.0;
      if (k < fade) w = 0.5 * (1 - std::cos(kPi * static_cast<double>(k) / static_cast<double>(fade)));
      if (n - 1 - k < fade) w = 0.5 * (1 - std::cos(kPi * static_cast<double>(n - 1 - k) / static_cast<double>(fade)));
      e.samples.push_back(o.offset + s.amplitude * w * std::sin(2 * kPi * f * static_cast<double>(k) / o.rate_hz));
    }
    pos = s.end;
    e.steps.push_back(s);
    e.amplitude = std::max(e.amplitude, s.amplitude);
  }
  e.band_lo_hz = std::min(o.f0_hz, o.f1_hz);
  e.band_hi_hz = std::max(o.f0_hz, o.f1_hz);
  fill_stats(e);
  e.description = "stepped sine, " + std::to_string(o.count) + " steps " + fmt_num(o.f0_hz) + " to " +
                  fmt_num(o.f1_hz) + " Hz, " + fmt_num(o.settle_cycles) + " settle + " + fmt_num(o.measure_cycles) +
                  " measure cycles, " + fmt_num(static_cast<double>(pos) / o.rate_hz) + " s in all";
  return e;
}

std::vector<double> predicted_response(const Excitation& e, const std::function<std::complex<double>(double)>& h) {
  if (e.period == 0 || e.lines.empty() || e.samples.size() < e.period)
    throw InputError("a predicted response needs a periodic excitation with known lines (multisine, prbs)");
  const std::vector<double> one(e.samples.end() - static_cast<long>(e.period), e.samples.end());  // a steady period
  std::vector<std::complex<double>> u = analyse(one, e.lines);
  const double res = e.rate_hz / static_cast<double>(e.period);
  for (std::size_t i = 0; i < u.size(); ++i) u[i] *= 2.0 / static_cast<double>(e.period) * h(static_cast<double>(e.lines[i]) * res);
  return synthesize(e.period, e.lines, u);
}

}  // namespace benchid::ident
