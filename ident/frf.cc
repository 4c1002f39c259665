#include "ident/frf.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <functional>
#include <limits>
#include <memory>
#include <numbers>
#include <sstream>

#include "ident/error.h"
#include "ident/trusted.h"

namespace benchid::ident {

namespace {
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

std::string num(double v, int prec = 4) {
  std::ostringstream s;
  s.precision(prec);
  s << v;
  return s.str();
}
}  // namespace

Estimator parse_estimator(const std::string& name) {
  if (name == "h1") return Estimator::h1;
  if (name == "h2") return Estimator::h2;
  if (name == "hv") return Estimator::hv;
  throw InputError("estimator '" + name + "' is unknown; expected h1, h2 or hv " +
                   "(indirect is chosen by --reference, periodic by --periods or --period)");
}

const char* estimator_name(Estimator e) {
  switch (e) {
    case Estimator::h1: return "h1";
    case Estimator::h2: return "h2";
    case Estimator::hv: return "hv";
    case Estimator::indirect: return "indirect";
    case Estimator::periodic: return "periodic";
    case Estimator::stepped: return "stepped";
  }
  return "?";
}

void validate(const FrfOptions& o) {
  validate(o.welch);
  validate(o.trust);
  if (!(o.resolution_hz >= 0) || !std::isfinite(o.resolution_hz))
    throw InputError("resolution = " + num(o.resolution_hz) + " Hz: must be a positive frequency");
  if (!(o.band_lo_hz >= 0) || !(o.band_hi_hz >= 0) || !std::isfinite(o.band_lo_hz) || !std::isfinite(o.band_hi_hz))
    throw InputError("band = " + num(o.band_lo_hz) + ":" + num(o.band_hi_hz) + " Hz: must be non-negative");
  if (o.band_hi_hz > 0 && o.band_hi_hz <= o.band_lo_hz)
    throw InputError("band = " + num(o.band_lo_hz) + ":" + num(o.band_hi_hz) + " Hz: LO must be below HI");
  if (!(o.confidence >= 0.5 && o.confidence <= 0.9999))
    throw InputError("confidence = " + num(o.confidence) + ": must be in [0.5, 0.9999]");
  if (o.period == 1) throw InputError("period = 1: must be at least 2 samples");
  if (o.block_frames < 1) throw InputError("block_frames = 0: must be at least 1");
  if (!(o.from_s >= 0) || !std::isfinite(o.from_s) || !(o.to_s >= 0) || !std::isfinite(o.to_s) ||
      (o.to_s > 0 && !(o.to_s > o.from_s)))
    throw InputError("from " + num(o.from_s) + " s to " + num(o.to_s) + " s: expected 0 <= from < to (to 0: the end)");
  if (!(o.holdout_fraction >= 0 && o.holdout_fraction <= 0.9))
    throw InputError("split = " + num(o.holdout_fraction) + ": the held-out fraction must be in [0, 0.9]");
}

double frf_magnitude_error(double gamma2, double n_d) {
  if (!(gamma2 > 0) || !(n_d > 0)) return kNaN;
  if (gamma2 >= 1) return 0.0;
  return std::sqrt(1.0 - gamma2) / (std::sqrt(gamma2) * std::sqrt(2.0 * n_d));
}

double zero_coherence_bound(double n_d, double confidence) {
  if (!(n_d > 1)) return 1.0;
  return 1.0 - std::pow(1.0 - confidence, 1.0 / (n_d - 1.0));
}

std::vector<double> Frf::mag_db() const {
  std::vector<double> m(h.size());
  for (std::size_t i = 0; i < h.size(); ++i) m[i] = 20.0 * std::log10(std::abs(h[i]));
  return m;
}

std::vector<double> Frf::phase_deg() const {
  // Unwrapped along the trusted lines: reliable, with a phase s.d. (= rel_err
  // in rad, Bendat & Piersol) of at most 0.25 rad, so a 180 deg ambiguity is
  // beyond 12 sigma. Other lines take the branch nearest the last trusted
  // phase without moving the reference, so noise cannot wind it off by turns.
  constexpr double kMaxPhaseSdRad = 0.25;
  std::vector<double> p(h.size());
  const bool flags = reliable.size() == h.size() && rel_err.size() == h.size() && effective_averages > 1;
  double ref = 0;
  bool have_ref = false;
  for (std::size_t i = 0; i < h.size(); ++i) {
    double a = std::arg(h[i]) * 180.0 / std::numbers::pi;
    if (have_ref) a -= 360.0 * std::round((a - ref) / 360.0);
    p[i] = a;
    const bool trusted = !flags || (reliable[i] && !(rel_err[i] > kMaxPhaseSdRad));
    if (trusted || !have_ref) {
      ref = a;
      have_ref = true;
    }
  }
  return p;
}

namespace {

bool in_band(double f, const FrfOptions& o) {
  return f > 0 && f >= o.band_lo_hz && (o.band_hi_hz <= 0 || f <= o.band_hi_hz);
}

// Warns where a resonance is narrower than a few lines: its peak is flattened
// and its damping reads high when the half-power width 2*zeta*f_n is not much
// wider than the resolution (Bendat & Piersol, bias error of resonant peaks).
void check_resolution_bias(Frf& f) {
  const std::size_t n = f.size();
  if (n < 5) return;
  std::vector<double> m(n);
  for (std::size_t i = 0; i < n; ++i) m[i] = std::abs(f.h[i]);
  const double df = f.freq_hz[1] - f.freq_hz[0];
  int warned = 0;
  for (std::size_t k = 1; k + 1 < n && warned < 3; ++k) {
    if (!(m[k] > m[k - 1] && m[k] >= m[k + 1])) continue;
    // only where the line-to-line wiggle of noise cannot fake a 3 dB drop:
    // a 5 % magnitude error makes a 29 % (3 dB) drop a > 5 sigma event
    constexpr double kMaxRelErr = 0.05;
    auto trusted = [&](std::size_t i) { return f.reliable[i] && f.rel_err[i] <= kMaxRelErr; };
    if (!trusted(k)) continue;
    const double half = m[k] / std::numbers::sqrt2;
    // walk down each side to the half-power level; a higher line first means no isolated peak
    auto edge = [&](int dir) -> double {
      std::size_t i = k;
      for (;;) {
        if ((dir < 0 && i == 0) || (dir > 0 && i + 1 >= n)) return kNaN;
        const std::size_t j = dir < 0 ? i - 1 : i + 1;
        if (m[j] > m[k] || !trusted(j)) return kNaN;
        if (m[j] <= half) {
          const double t = (m[i] - half) / (m[i] - m[j]);
          return f.freq_hz[i] + t * (f.freq_hz[j] - f.freq_hz[i]);
        }
        i = j;
      }
    };
    const double lo = edge(-1), hi = edge(+1);
    if (std::isnan(lo) || std::isnan(hi)) continue;
    const double width = hi - lo;
    if (width < 4.0 * df) {
      f.warnings.push_back("resonance near " + num(f.freq_hz[k]) + " Hz is " + num(width / df, 2) +
                           " lines wide at half power: its peak is flattened and its damping "
                           "reads high; a resolution of " + num(width / 5.0, 2) +
                           " Hz or finer (a longer segment) would resolve it");
      ++warned;
    }
  }
}

// `excited`: the lines the excitation reached (empty: all of them), see trusted.h
void finish_common(Frf& f, const std::vector<std::uint8_t>& excited, const TrustOptions& trust) {
  f.coherence_bound = zero_coherence_bound(f.effective_averages, f.confidence);
  mark_trusted(f, excited, trust);
  if (f.effective_averages <= 1)
    f.warnings.push_back("only one average: coherence is 1 by construction and the error is "
                         "unknown; use a shorter segment or more periods");
  // Window smearing flattens peaks in Welch estimates only: synchronous
  // averaging of whole periods reads each line without leakage.
  if (f.estimator != Estimator::periodic) check_resolution_bias(f);
}

}  // namespace

Frf frf_from_spectra(const CrossSpectra& cs, std::size_t u, std::size_t y, int r, const FrfOptions& o) {
  Frf f;
  f.rate_hz = cs.rate_hz;
  f.estimator = r >= 0 ? Estimator::indirect : o.estimator;
  f.window = o.welch.window;
  f.detrend = o.welch.detrend;
  f.segment = cs.segment;
  f.overlap = static_cast<double>(cs.segment - cs.hop) / static_cast<double>(cs.segment);
  f.averages = cs.segments;
  f.effective_averages = cs.effective_averages;
  f.confidence = o.confidence;
  f.loop_gain = o.loop_gain;
  const double nd = cs.effective_averages;
  std::vector<double> g_exc;  // autospectrum of the exciting signal, per line
  for (std::size_t k = 1; k < cs.bins(); ++k) {
    const double fr = cs.freq_hz(k);
    if (!in_band(fr, o)) continue;
    const double guu = cs.g(u, u, k).real(), gyy = cs.g(y, y, k).real();
    const std::complex<double> guy = cs.g(u, y, k);
    const double g2 = std::norm(guy) / (guu * gyy);
    std::complex<double> h;
    double coh = g2;
    switch (f.estimator) {
      case Estimator::h1: h = guy / guu; break;
      case Estimator::h2: h = gyy / std::conj(guy); break;
      case Estimator::hv: {
        const std::complex<double> h1 = guy / guu;
        h = h1 / std::sqrt(g2);  // |Hv| = sqrt(|H1||H2|) = |H1|/|gamma|, same phase
        break;
      }
      case Estimator::indirect: {
        const auto ri = static_cast<std::size_t>(r);
        const std::complex<double> gru = cs.g(ri, u, k), gry = cs.g(ri, y, k);
        const double grr = cs.g(ri, ri, k).real();
        h = gry / gru;
        const double gee = std::max(0.0, gyy - 2.0 * std::real(std::conj(h) * guy) + std::norm(h) * guu);
        const double explained = std::norm(gru) * std::norm(h);
        coh = explained / (explained + grr * gee);
        if (o.loop_gain) h = -h;
        break;
      }
      case Estimator::periodic:
      case Estimator::stepped: break;
    }
    if (!std::isfinite(coh)) coh = kNaN;
    f.freq_hz.push_back(fr);
    f.h.push_back(h);
    f.coherence.push_back(coh);
    f.rel_err.push_back(frf_magnitude_error(coh, nd));
    f.guu.push_back(guu);
    f.gyy.push_back(gyy);
    f.guy.push_back(guy);
    g_exc.push_back(
        r >= 0 ? cs.g(static_cast<std::size_t>(r), static_cast<std::size_t>(r), k).real() : guu);
  }
  // in a Welch estimate a line passes the coherence bound by chance where
  // nothing excited it; the exciting signal is the reference when there is one
  const std::vector<std::uint8_t> excited = excited_lines(f.freq_hz, g_exc, o.trust);
  finish_common(f, excited, o.trust);
  std::size_t not_excited = 0;
  for (std::uint8_t e : excited) not_excited += e ? 0 : 1;
  if (not_excited > 0)
    f.warnings.push_back(
        std::to_string(not_excited) + " lines not excited (the " +
        std::string(r >= 0 ? "reference" : "input") + "'s spectrum there more than " +
        fmt_num(o.trust.local_drop_db) + " dB below its level within an octave, or " +
        fmt_num(o.trust.global_drop_db) + " dB below its strongest): flagged unreliable");
  const LineSpectrum ls = line_spectrum(f.freq_hz, g_exc);
  if (ls.found)
    f.warnings.push_back(
        "the " + std::string(r >= 0 ? "reference" : "input") +
        " has a line spectrum: " + std::to_string(ls.tones) + " tones from " + fmt_num(ls.lo_hz) +
        " to " + fmt_num(ls.hi_hz) + " Hz, and 90 % of its power on " +
        std::to_string(ls.lines_90) + " of the band's " + std::to_string(ls.band_lines) +
        " lines (a multisine or another periodic signal?); Welch averaging leaves the "
        "lines between them unexcited and smears each tone over its neighbours: analyse whole "
        "periods with --excitation SIDECAR (the JSON 'benchid excite' wrote beside the signal)");
  return f;
}

Frf frf_from_periodic(const PeriodicSpectra& ps, std::size_t u, std::size_t y, const FrfOptions& o) {
  Frf f;
  f.rate_hz = ps.rate_hz;
  f.estimator = Estimator::periodic;
  f.window = Window::rect;
  f.detrend = Detrend::none;
  f.segment = ps.period;
  f.overlap = 0;
  f.averages = ps.periods;
  f.effective_averages = static_cast<double>(ps.periods);
  f.confidence = o.confidence;
  const double m = static_cast<double>(ps.periods);
  const double scale = 2.0 / (ps.rate_hz * static_cast<double>(ps.period));  // rect window density
  double max_u = 0;
  for (std::size_t k = 1; k < ps.bins(); ++k) max_u = std::max(max_u, std::norm(ps.mean[u][k]));
  std::vector<std::uint8_t> planned(ps.bins(), 0);
  for (std::size_t k : o.lines)
    if (k < ps.bins()) planned[k] = 1;
  std::size_t unexcited = 0;
  // output power at non-excited lines inside the excited span, and its noise
  std::size_t first_ex = 0, last_ex = 0;
  std::vector<std::size_t> nonexcited;
  double excited_power = 0;
  for (std::size_t k = 1; k < ps.bins(); ++k) {
    const double fr = ps.freq_hz(k);
    if (!in_band(fr, o)) continue;
    const std::complex<double> U = ps.mean[u][k], Y = ps.mean[y][k];
    const double suu = ps.cov[ps.pair_index(u, u)][k].real();
    const double syy = ps.cov[ps.pair_index(y, y)][k].real();
    const std::complex<double> suy = u <= y ? ps.cov[ps.pair_index(u, y)][k] : std::conj(ps.cov[ps.pair_index(y, u)][k]);
    // An excited line: one the excitation's sidecar names, or else one whose
    // input stands above numerical zero (-80 dB from the strongest line) and,
    // with several periods, 10 dB above its own noise.
    const bool excited = o.lines.empty()
                             ? std::norm(U) > 1e-8 * max_u && (ps.periods < 2 || std::norm(U) * m > 10.0 * suu)
                             : planned[k] != 0;
    if (!excited) {
      ++unexcited;
      nonexcited.push_back(k);
      continue;
    }
    if (first_ex == 0) first_ex = k;
    last_ex = k;
    excited_power += std::norm(Y);
    const std::complex<double> h = Y / U;
    const double puu = ps.power[ps.pair_index(u, u)][k].real();
    const double pyy = ps.power[ps.pair_index(y, y)][k].real();
    const std::complex<double> puy = u <= y ? ps.power[ps.pair_index(u, y)][k] : std::conj(ps.power[ps.pair_index(y, u)][k]);
    double coh = ps.periods > 1 ? std::norm(puy) / (puu * pyy) : 1.0;
    if (!std::isfinite(coh)) coh = kNaN;
    double err = kNaN;
    if (ps.periods > 1) {
      const double var = (syy / std::norm(Y) + suu / std::norm(U) - 2.0 * std::real(suy / (std::conj(U) * Y))) / m;
      err = std::sqrt(std::max(0.0, var) / 2.0);
    }
    f.freq_hz.push_back(fr);
    f.h.push_back(h);
    f.coherence.push_back(coh);
    f.rel_err.push_back(err);
    f.guu.push_back(puu * scale);
    f.gyy.push_back(pyy * scale);
    f.guy.push_back(puy * scale);
  }
  finish_common(f, {}, o.trust);  // every line kept is excited
  if (unexcited > 0)
    f.warnings.push_back(std::to_string(unexcited) + " lines left out as not excited" +
                         (o.lines.empty() ? " (input below -80 dB of the strongest line or within 10 dB of its noise)"
                                          : " (not among the excitation's lines)"));
  // Nonlinearity hint: a linear system puts no output at lines the input
  // does not excite; output there above its noise is distortion (or a
  // disturbance) (Pintelon & Schoukens, System Identification, 2nd ed. 2012,
  // on detecting nonlinear distortions with non-excited lines; from memory).
  double ne_power = 0, ne_noise = 0;
  std::size_t ne = 0;
  for (std::size_t k : nonexcited) {
    if (k <= first_ex || k >= last_ex) continue;
    ne_power += std::norm(ps.mean[y][k]);
    ne_noise += ps.cov[ps.pair_index(y, y)][k].real() / m;
    ++ne;
  }
  if (ne > 0 && f.size() > 0 && excited_power > 0) {
    const double ex = excited_power / static_cast<double>(f.size());
    f.nonexcited_lines = ne;
    f.nonexcited_db = 10 * std::log10(std::max(ne_power / static_cast<double>(ne), 1e-300) / ex);
    if (ps.periods > 1) {
      f.nonexcited_noise_db = 10 * std::log10(std::max(ne_noise / static_cast<double>(ne), 1e-300) / ex);
      // below -140 dB (beyond the dynamic range of a 24-bit converter) it is
      // arithmetic, not distortion: noise-free simulated records reach it
      if (f.nonexcited_db > f.nonexcited_noise_db + 6.0 && f.nonexcited_db > -140.0)
        f.warnings.push_back("output at the " + std::to_string(ne) + " non-excited lines inside the band stands " +
                             num(f.nonexcited_db - f.nonexcited_noise_db, 3) + " dB above its noise, " +
                             num(-f.nonexcited_db, 3) + " dB below the excited lines: nonlinear distortion (or a "
                             "disturbance at those frequencies); the linear FRF is in doubt at that level");
    }
  }
  return f;
}

Frf estimate_frf(RecordReader& reader, const FrfChannels& ch, const FrfOptions& o) {
  return estimate_frf(std::vector<RecordReader*>{&reader}, ch, o);
}

Frf estimate_frf(const std::vector<RecordReader*>& readers, const FrfChannels& ch, const FrfOptions& o_in) {
  if (readers.empty()) throw InputError("no record; expected at least one");
  FrfOptions o = o_in;
  validate(o);
  RecordReader& reader = *readers.front();
  const RecordInfo& info = reader.info();
  std::vector<std::size_t> sel{reader.channel_index(ch.input), reader.channel_index(ch.output)};
  const bool have_ref = !ch.reference.empty();
  if (have_ref) sel.push_back(reader.channel_index(ch.reference));
  if (sel[0] == sel[1])
    throw InputError(where(info.path) + "input and output are the same channel '" +
                     info.channels[sel[0]].name + "'; expected two different channels");
  if (have_ref && (sel[2] == sel[0] || sel[2] == sel[1]))
    throw InputError(where(info.path) + "reference channel '" + info.channels[sel[2]].name +
                     "' is also the input or output; expected a third channel");
  if (o.loop_gain && !have_ref)
    throw InputError("loop gain from an injection needs the injected signal as --reference");
  reader.select(sel);
  // further records of the same run, averaged in: the same channels by name
  for (std::size_t r = 1; r < readers.size(); ++r) {
    std::vector<std::size_t> s2{readers[r]->channel_index(ch.input), readers[r]->channel_index(ch.output)};
    if (have_ref) s2.push_back(readers[r]->channel_index(ch.reference));
    readers[r]->select(s2);
  }
  const bool periodic = o.period > 0 || o.periods > 0;
  if (periodic && have_ref)
    throw InputError("periodic averaging with a reference channel is not supported; "
                     "expected either --periods/--period or --reference");

  const double rate0 = reader.rate_hz();
  std::size_t period = o.period;
  if (periodic && period == 0) {
    const std::size_t total = reader.count_frames();
    period = total / o.periods;  // the record holds `periods` periods, skipped ones included
    if (period < 2)
      throw InputError(where(info.path) + std::to_string(total) + " samples cannot hold " +
                       std::to_string(o.periods) + " periods; expected at least 2 samples per period");
    for (std::size_t r = 1; r < readers.size(); ++r)
      if (readers[r]->count_frames() / o.periods != period)
        throw InputError(where(readers[r]->info().path) + std::to_string(readers[r]->count_frames()) + " samples give " +
                         std::to_string(readers[r]->count_frames() / o.periods) + "-sample periods, but " + info.path +
                         " gives " + std::to_string(period) + "; expected runs with the same excitation and length");
  }
  if (!periodic && o.resolution_hz > 0) {
    if (!(rate0 > 0))
      throw InputError(where(info.path) + "the rate is not known before reading; give --segment instead of --resolution");
    std::size_t seg = 8;
    while (rate0 / static_cast<double>(seg) > o.resolution_hz && seg < (std::size_t{1} << 26)) seg *= 2;
    o.welch.segment = seg;
  }

  std::vector<std::vector<double>> block;
  Frf f;
  std::size_t samples = 0;
  // --from/--to keep samples [first, end) of each record (seconds from its
  // first sample, at the rate known before reading); a hold-out then keeps
  // the first (1 - fraction) of that span. Several records are read one
  // after the other; record_end() tells the accumulator where one ends.
  std::size_t first = 0, limit = 0, dropped = 0, kept = 0, rec = 0;
  std::unique_ptr<BlockPrefetcher> prefetcher;
  std::function<void()> record_end = [] {};
  const auto open_next = [&] {
    RecordReader& rd = *readers[rec];
    const double r0 = rd.rate_hz();
    first = 0, limit = static_cast<std::size_t>(-1), dropped = 0, kept = 0;
    if (o.from_s > 0 || o.to_s > 0) {
      if (!(r0 > 0))
        throw InputError(where(rd.info().path) + "the rate is not known before reading; give --rate to use --from/--to");
      first = static_cast<std::size_t>(std::llround(o.from_s * r0));
      if (o.to_s > 0) limit = static_cast<std::size_t>(std::llround(o.to_s * r0));
    }
    if (o.holdout_fraction > 0) {
      const std::size_t end = std::min(limit, rd.count_frames());
      if (end > first)
        limit = first + static_cast<std::size_t>(std::floor((1 - o.holdout_fraction) * static_cast<double>(end - first)));
    }
    prefetcher = std::make_unique<BlockPrefetcher>(rd, o.block_frames, limit, o.prefetch);
  };
  open_next();
  // --from beyond a record: said as such, before "too few samples"
  const auto check_trim = [&] {
    if (kept == 0 && first > 0)
      throw InputError(where(readers[rec]->info().path) + "no samples from " + num(o.from_s) + " s" +
                       (o.to_s > 0 ? " to " + num(o.to_s) + " s" : std::string()) + " (the record has " +
                       std::to_string(dropped) + "); expected --from/--to within the record");
  };
  auto next_block = [&]() -> std::size_t {
    for (;;) {
      const std::size_t n = prefetcher->next(block);
      if (n == 0) {
        check_trim();
        if (rec + 1 == readers.size()) return 0;
        record_end();
        prefetcher.reset();
        ++rec;
        open_next();
        continue;
      }
      if (dropped >= first) {
        kept += n;
        return n;
      }
      const std::size_t k = std::min(first - dropped, n);
      dropped += k;
      if (k == n) continue;
      for (auto& c : block) c.erase(c.begin(), c.begin() + static_cast<long>(k));
      kept += n - k;
      return n - k;
    }
  };
  if (periodic) {
    PeriodicAccumulator acc(period, 2, o.skip_periods);
    record_end = [&] { acc.end_record(); };
    // for harmonic distortion: the first period that is averaged
    std::vector<double> hu, hy;
    const std::size_t h_from = o.skip_periods * period, h_to = h_from + period;
    while (next_block() > 0) {
      if (o.log_sweep && samples < h_to && samples + block[0].size() > h_from) {
        const std::size_t a = std::max(h_from, samples) - samples, b = std::min(h_to, samples + block[0].size()) - samples;
        hu.insert(hu.end(), block[0].begin() + static_cast<long>(a), block[0].begin() + static_cast<long>(b));
        hy.insert(hy.end(), block[1].begin() + static_cast<long>(a), block[1].begin() + static_cast<long>(b));
      }
      samples += block[0].size();
      acc.push(block);
    }
    if (acc.periods() == 0)
      throw InputError(where(info.path) + std::to_string(samples) + " samples, fewer than " +
                       std::to_string(o.skip_periods + 1) + " periods of " + std::to_string(period) +
                       " (with " + std::to_string(o.skip_periods) + " skipped); expected a record of whole periods");
    const double rate = reader.rate_hz();
    const PeriodicSpectra ps = acc.finish(rate);
    f = frf_from_periodic(ps, 0, 1, o);
    if (o.log_sweep && hu.size() == period) {
      // a single sweep starts from rest; repeated ones are periodic
      f.harmonics = sweep_harmonics(hu, hy, rate, *o.log_sweep, ps.periods > 1 || o.skip_periods > 0);
      for (std::size_t i = 0; i < f.harmonics->overall_db.size(); ++i) {
        const double db = f.harmonics->overall_db[i];
        if (db > -40.0) {  // 1 %: common practice for "not linear at this level"
          f.warnings.push_back("harmonic " + std::to_string(i + 2) + " stands at " + num(db, 3) +
                               " dB of the fundamental (log-sweep deconvolution): the plant is not linear at this "
                               "level; the FRF describes the fundamental only");
          break;
        }
      }
    }
    if (samples % period != 0)
      f.warnings.push_back(std::to_string(samples % period) + " trailing samples (less than one period) left out");
  } else {
    WelchAccumulator acc(o.welch, sel.size());
    record_end = [&] { acc.end_record(); };
    while (next_block() > 0) {
      samples += block[0].size();
      acc.push(block);
    }
    if (acc.segments() == 0)
      throw InputError(where(info.path) + std::to_string(samples) + " samples, fewer than one segment of " +
                       std::to_string(o.welch.segment) + "; expected a longer record, or a shorter --segment "
                       "(or coarser --resolution)");
    const double rate = reader.rate_hz();
    if (!(rate > 0) || !std::isfinite(rate))
      throw InputError(where(info.path) + "cannot tell the sampling rate; expected a time column or --rate HZ");
    const CrossSpectra cs = acc.finish(rate);
    // A channel with no energy after detrending cannot support an estimate.
    for (std::size_t c = 0; c < sel.size(); ++c) {
      double total = 0;
      for (std::size_t k = 1; k < cs.bins(); ++k) total += cs.g(c, c, k).real();
      if (!(total > 0))
        throw InputError(where(info.path) + "channel '" + info.channels[sel[c]].name +
                         "' has no energy (constant over the record); expected a varying signal");
    }
    f = frf_from_spectra(cs, 0, 1, have_ref ? 2 : -1, o);
  }
  if (f.size() == 0)
    throw InputError("band " + num(o.band_lo_hz) + ":" + num(o.band_hi_hz) + " Hz holds no line; expected a band "
                     "between the resolution and Nyquist (" + num(f.rate_hz / 2) + " Hz)");
  if (periodic) {
    double total = 0;
    for (double g : f.guu) total += g;
    if (!(total > 0))
      throw InputError(where(info.path) + "channel '" + info.channels[sel[0]].name +
                       "' has no energy (constant over the record); expected a varying signal");
  }
  f.source = info.path;
  f.samples = samples;
  if (readers.size() > 1) {
    // runs with the same settings: the same rate (to a part per million)
    const double rate = reader.rate_hz();
    std::string names = info.path;
    for (std::size_t r = 1; r < readers.size(); ++r) {
      const double rr = readers[r]->rate_hz();
      if (!(std::fabs(rr - rate) <= 1e-6 * rate))
        throw InputError(where(readers[r]->info().path) + "sampled at " + num(rr, 8) + " Hz, but " + info.path + " at " +
                         num(rate, 8) + " Hz; expected runs with the same settings");
      names += ", " + readers[r]->info().path;
    }
    f.corrections.push_back("averaged over " + std::to_string(readers.size()) + " records: " + names);
  }
  if ((o.from_s > 0 || o.to_s > 0) && readers.size() == 1) {
    f.corrections.push_back("samples " + std::to_string(first) + " to " + std::to_string(first + samples) + " (" +
                            num(static_cast<double>(first) / rate0) + " to " +
                            num(static_cast<double>(first + samples) / rate0) + " s) kept");
  } else if (o.from_s > 0 || o.to_s > 0) {
    f.corrections.push_back("samples from " + num(o.from_s) + " s" + (o.to_s > 0 ? " to " + num(o.to_s) + " s" : std::string()) +
                            " of each record kept");
  }
  if (o.holdout_fraction > 0)
    f.warnings.push_back("the last " + num(100 * o.holdout_fraction, 3) + " % of the record was held out (samples " +
                         std::to_string(first + samples) + " on), for validation with replay --split");
  f.input = info.channels[sel[0]].name;
  f.input_unit = info.channels[sel[0]].unit;
  f.output = info.channels[sel[1]].name;
  f.output_unit = info.channels[sel[1]].unit;
  if (have_ref) f.reference = info.channels[sel[2]].name;
  for (std::size_t r = readers.size(); r-- > 0;)  // every record's reading warnings (clipping, ...) first
    for (auto w = readers[r]->warnings().rbegin(); w != readers[r]->warnings().rend(); ++w)
      f.warnings.insert(f.warnings.begin(), *w);
  return f;
}

std::string summary(const Frf& f) {
  std::ostringstream s;
  const double dur = static_cast<double>(f.samples) / f.rate_hz;
  s << f.source << ": " << f.samples << " samples at " << num(f.rate_hz, 6) << " Hz (" << num(dur, 4)
    << " s); input '" << f.input << "'" << (f.input_unit.empty() ? "" : " [" + f.input_unit + "]")
    << ", output '" << f.output << "'" << (f.output_unit.empty() ? "" : " [" + f.output_unit + "]");
  if (!f.reference.empty()) s << ", reference '" << f.reference << "'";
  s << "\n  estimator " << estimator_name(f.estimator) << (f.loop_gain ? " (loop gain L = -G_ry/G_ru)" : "");
  if (f.estimator == Estimator::periodic) {
    s << ", " << f.averages << " periods of " << f.segment << " samples, resolution "
      << num(f.resolution_hz(), 4) << " Hz";
  } else if (f.estimator == Estimator::stepped) {
    double worst = 0;
    for (double d : f.distortion_pct)
      if (std::isfinite(d)) worst = std::max(worst, d);
    s << ", " << f.size() << " steps by least-squares sine fit; largest output THD+N " << num(worst, 3) << " %";
  } else {
    s << ", " << window_name(f.window) << " window, segment " << f.segment << " (resolution "
      << num(f.resolution_hz(), 4) << " Hz), overlap " << num(f.overlap * 100, 3) << " %, " << f.averages
      << " averages (" << num(f.effective_averages, 4) << " effective)";
  }
  std::size_t good = 0, below = 0;
  double lo = 0, hi = 0;
  const double gc = 0.9;  // "good" coherence, common practice
  for (std::size_t i = 0; i < f.size(); ++i) {
    if (f.coherence[i] >= gc) {
      if (good++ == 0) lo = f.freq_hz[i];
      hi = f.freq_hz[i];
    }
    if (!f.reliable[i]) ++below;
  }
  s << "\n  " << f.size() << " lines " << num(f.freq_hz.front(), 5) << " to " << num(f.freq_hz.back(), 6) << " Hz; ";
  if (good > 0)
    s << good << " lines with coherence >= " << gc << ", between " << num(lo, 4) << " and " << num(hi, 5)
      << " Hz; ";
  else
    s << "no line with coherence >= " << gc << "; ";
  if (f.estimator == Estimator::stepped)
    s << below << " points with rel_err above the limit (flagged unreliable)";
  else
    s << below << " lines untrusted (at or below the " << num(f.confidence * 100, 3)
      << " % zero-coherence bound " << num(f.coherence_bound, 3)
      << ", not excited, or a random error above " << num(100 * TrustOptions{}.max_rel_err, 3)
      << " %)";
  const TrustedBand tb = trusted_band(f);
  if (tb.found())
    s << "; trusted band " << num(tb.lo_hz, 5) << " to " << num(tb.hi_hz, 5) << " Hz";
  else
    s << "; no trusted band";
  if (!f.excitation.empty()) s << "\n  excitation: " << f.excitation;
  if (f.harmonics && !f.harmonics->overall_db.empty()) {
    s << "\n  harmonic distortion (log-sweep deconvolution):";
    for (std::size_t i = 0; i < f.harmonics->overall_db.size(); ++i)
      s << (i ? ", " : " ") << "H" << i + 2 << " " << num(f.harmonics->overall_db[i], 3) << " dB";
  }
  if (f.nonexcited_lines > 0)
    s << "\n  output at " << f.nonexcited_lines << " non-excited lines: " << num(f.nonexcited_db, 3)
      << " dB re the excited lines"
      << (std::isfinite(f.nonexcited_noise_db) ? " (noise " + num(f.nonexcited_noise_db, 3) + " dB)" : std::string());
  return s.str();
}

}  // namespace benchid::ident
