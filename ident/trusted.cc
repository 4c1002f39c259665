#include "ident/trusted.h"

#include <algorithm>
#include <cmath>
#include <functional>

#include "ident/error.h"

namespace benchid::ident {

void validate(const TrustOptions& o) {
  if (!(o.max_rel_err > 0 && o.max_rel_err <= 10))
    throw InputError("max rel_err = " + fmt_num(o.max_rel_err) + ": must be in (0, 10]");
  if (!(o.local_drop_db > 0 && o.local_drop_db <= 300) ||
      !(o.global_drop_db > 0 && o.global_drop_db <= 300))
    throw InputError("excitation drop = " + fmt_num(o.local_drop_db) + " / " +
                     fmt_num(o.global_drop_db) + " dB: each must be in (0, 300] dB");
}

std::vector<std::uint8_t> excited_lines(const std::vector<double>& freq_hz,
                                        const std::vector<double>& g, const TrustOptions& o) {
  const std::size_t n = g.size();
  std::vector<std::uint8_t> out(n, 1);
  if (n < 3 || freq_hz.size() != n) return out;
  // 3-line running median: one line of leakage or hum sets no level
  std::vector<double> med(n);
  for (std::size_t k = 0; k < n; ++k) {
    const std::size_t a = k == 0 ? 0 : k - 1, b = std::min(n - 1, k + 1);
    if (b - a == 2) {
      double v[3] = {g[a], g[k], g[b]};
      std::sort(v, v + 3);
      med[k] = v[1];
    } else {
      med[k] = std::min(g[a], g[b]);  // an end line: the lower of it and its neighbour
    }
    if (!std::isfinite(med[k])) med[k] = 0;
  }
  const double strongest = *std::max_element(med.begin(), med.end());
  if (!(strongest > 0)) return std::vector<std::uint8_t>(n, 0);
  const double global_floor = strongest * std::pow(10.0, -o.global_drop_db / 10);
  const double local_ratio = std::pow(10.0, -o.local_drop_db / 10);
  // the level within an octave on either side: a sliding maximum over
  // [f/2, 2f], kept with a monotone deque of indices (lines ascend)
  std::vector<std::size_t> dq(n);
  std::size_t head = 0, tail = 0, hi = 0;
  for (std::size_t k = 0; k < n; ++k) {
    while (hi < n && freq_hz[hi] <= 2 * freq_hz[k]) {
      while (tail > head && med[dq[tail - 1]] <= med[hi]) --tail;
      dq[tail++] = hi++;
    }
    while (head < tail && freq_hz[dq[head]] < 0.5 * freq_hz[k]) ++head;
    const double local = head < tail ? med[dq[head]] : med[k];
    const double gk = std::isfinite(g[k]) ? g[k] : 0;
    out[k] = gk >= global_floor && gk >= local * local_ratio;
  }
  return out;
}

LineSpectrum line_spectrum(const std::vector<double>& freq_hz, const std::vector<double>& g) {
  LineSpectrum ls;
  const std::size_t n = g.size();
  if (n < 17 || freq_hz.size() != n) return ls;
  double total = 0;
  for (double v : g) total += std::isfinite(v) && v > 0 ? v : 0;
  if (!(total > 0)) return ls;
  std::vector<double> win;
  for (std::size_t k = 0; k < n; ++k) {
    if (!(std::isfinite(g[k]) && g[k] > 0)) continue;
    const std::size_t a = k >= 8 ? k - 8 : 0, b = std::min(n, k + 9);
    bool peak = true;
    win.clear();
    for (std::size_t j = a; j < b; ++j) {
      const double v = std::isfinite(g[j]) ? g[j] : 0;
      win.push_back(v);
      if (j != k && v > g[k]) peak = false;
    }
    if (!peak) continue;
    std::nth_element(win.begin(), win.begin() + static_cast<long>(win.size() / 2), win.end());
    if (!(g[k] >= 100 * win[win.size() / 2])) continue;
    ++ls.tones;
    if (ls.tones == 1) ls.lo_hz = freq_hz[k];
    ls.hi_hz = freq_hz[k];
  }
  // the band: from the first to the last line within 30 dB of the strongest;
  // the fewest lines that hold 90 % of the power in it
  const double top = *std::max_element(g.begin(), g.end(), [](double x, double y) {
    return (std::isfinite(x) ? x : 0) < (std::isfinite(y) ? y : 0);
  });
  std::size_t first = n, last = 0;
  for (std::size_t k = 0; k < n; ++k)
    if (std::isfinite(g[k]) && g[k] >= 1e-3 * top) first = std::min(first, k), last = k;
  std::vector<double> band;
  double in_band = 0;
  for (std::size_t k = first; k <= last && first < n; ++k) {
    const double v = std::isfinite(g[k]) && g[k] > 0 ? g[k] : 0;
    band.push_back(v);
    in_band += v;
  }
  std::sort(band.begin(), band.end(), std::greater<double>());
  double acc = 0;
  for (double v : band) {
    if (acc >= 0.9 * in_band) break;
    acc += v;
    ++ls.lines_90;
  }
  ls.band_lines = band.size();
  ls.found = ls.tones >= 5 && ls.band_lines > 0 &&
             static_cast<double>(ls.lines_90) <= 0.25 * static_cast<double>(ls.band_lines);
  return ls;
}

bool trusted_by_error(double coherence, double coherence_bound, double rel_err,
                      const TrustOptions& o) {
  const bool coh_known = !std::isnan(coherence), err_known = !std::isnan(rel_err);
  if (coh_known && !(coherence > coherence_bound)) return false;
  if (err_known) return rel_err <= o.max_rel_err;
  return !coh_known;  // coherence known but no error: coherence <= 0 or one average
}

void mark_trusted(Frf& f, const std::vector<std::uint8_t>& excited, const TrustOptions& o) {
  f.reliable.assign(f.size(), 0);
  for (std::size_t k = 0; k < f.size(); ++k) {
    const bool coh = f.effective_averages > 1 && f.coherence[k] > f.coherence_bound;
    const bool err = std::isfinite(f.rel_err[k]) && f.rel_err[k] <= o.max_rel_err;
    const bool exc = excited.empty() || excited[k];
    f.reliable[k] = coh && err && exc;
  }
}

bool is_trusted(const Frf& f, std::size_t k) {
  if (f.reliable.size() == f.size()) return f.reliable[k] != 0;
  const double c = k < f.coherence.size() ? f.coherence[k] : NAN;
  const double e = k < f.rel_err.size() ? f.rel_err[k] : NAN;
  return trusted_by_error(c, f.coherence_bound, e);
}

TrustedBand trusted_band(const Frf& f) {
  TrustedBand b;
  std::vector<std::uint8_t> ok;  // trusted, line by line from the first trusted one
  std::size_t good = 0, recent_good = 0, good_at_hi = 0;  // in all of ok, and in its last 16
  for (std::size_t i = 0; i < f.size(); ++i) {
    const bool t = is_trusted(f, i);
    if (ok.empty() && !t) continue;
    if (ok.empty()) b.lo_hz = f.freq_hz[i];
    ok.push_back(t);
    good += t, recent_good += t;
    if (ok.size() > 16) recent_good -= ok[ok.size() - 17];
    const std::size_t recent = std::min<std::size_t>(ok.size(), 16);
    if (t && good >= 0.9 * static_cast<double>(ok.size()) && 4 * recent_good >= 3 * recent) {
      b.hi_hz = f.freq_hz[i];
      good_at_hi = good;
    }
  }
  b.lines = good_at_hi;
  return b;
}

std::string trusted_band_rule() {
  return "from the first trusted line (coherence above its zero-coherence bound, excited, random "
         "error of |H| at "
         "most " +
         fmt_num(100 * TrustOptions{}.max_rel_err) +
         " %) to the last one below which 90 % of the lines, "
         "and 12 of the last 16, are trusted";
}

ChosenBand choose_band(const Frf& f, bool given, double lo_hz, double hi_hz) {
  ChosenBand c;
  if (f.size() == 0) return c;
  if (given) {
    c.given = true;
    c.lo_hz = lo_hz;
    c.hi_hz = hi_hz > 0 ? hi_hz : f.freq_hz.back();
    bool any = false;
    for (double fr : f.freq_hz) any |= fr >= c.lo_hz && fr <= c.hi_hz;
    if (!any)
      throw InputError("band " + fmt_num(lo_hz) + ":" +
                       (hi_hz > 0 ? fmt_num(hi_hz) : std::string()) +
                       " Hz holds no line of the FRF (" + fmt_num(f.freq_hz.front()) + " to " +
                       fmt_num(f.freq_hz.back()) + " Hz)");
    if (c.hi_hz == c.lo_hz) c.hi_hz = c.lo_hz * (1 + 1e-12);  // one line given exactly
    c.note = fmt_num(c.lo_hz) + " to " + fmt_num(c.hi_hz) + " Hz (given)";
    return c;
  }
  const TrustedBand b = trusted_band(f);
  c.lo_hz = b.lo_hz;
  c.hi_hz = b.hi_hz;
  if (b.found())
    c.note = fmt_num(b.lo_hz) + " to " + fmt_num(b.hi_hz) + " Hz, the trusted band (" +
             std::to_string(b.lines) + " trusted lines; " + trusted_band_rule() +
             "; --band LO:HI to choose)";
  else
    c.note = "no trusted band: " + std::to_string(b.lines) + " lines pass " + trusted_band_rule();
  return c;
}

}  // namespace benchid::ident
