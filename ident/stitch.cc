#include "ident/stitch.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "ident/error.h"

namespace benchid::ident {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

double line_error(const Frf& f, std::size_t k) {
  if (k < f.reliable.size() && !f.reliable[k]) return kInf;
  const double e = k < f.rel_err.size() ? f.rel_err[k] : kInf;
  return std::isfinite(e) && e >= 0 ? e : kInf;
}

// The source's error at f_hz: NaN when f lies outside its lines (it does
// not compete there), else the larger error of the lines either side.
double error_at(const Frf& f, double f_hz) {
  if (f.size() == 0 || f_hz < f.freq_hz.front() || f_hz > f.freq_hz.back()) return std::nan("");
  const auto it = std::lower_bound(f.freq_hz.begin(), f.freq_hz.end(), f_hz);
  const std::size_t hi = static_cast<std::size_t>(it - f.freq_hz.begin());
  if (*it == f_hz) return line_error(f, hi);
  return std::max(line_error(f, hi - 1), line_error(f, hi));
}

}  // namespace

StitchResult stitch(const std::vector<StitchSource>& sources) {
  if (sources.size() < 2) throw InputError("stitching needs at least two FRFs; expected two or more files");
  const Frf& first = *sources.front().frf;
  for (std::size_t s = 1; s < sources.size(); ++s) {
    const Frf& f = *sources[s].frf;
    if (f.input_unit != first.input_unit || f.output_unit != first.output_unit)
      throw InputError(sources[s].name + ": units " + f.output_unit + "/" + f.input_unit + ", but " + sources[0].name +
                       " has " + first.output_unit + "/" + first.input_unit + "; expected FRFs of the same quantities");
    if (f.loop_gain != first.loop_gain)
      throw InputError(sources[s].name + ": " + (f.loop_gain ? "a loop gain" : "a plant FRF") + ", but " +
                       sources[0].name + " is " + (first.loop_gain ? "a loop gain" : "a plant FRF") +
                       "; expected FRFs of the same quantity");
  }
  struct Pick {
    double f;
    std::size_t src, k;
  };
  std::vector<Pick> picks;
  StitchResult out;
  out.lines_from.assign(sources.size(), 0);
  for (std::size_t s = 0; s < sources.size(); ++s) {
    const Frf& f = *sources[s].frf;
    for (std::size_t k = 0; k < f.size(); ++k) {
      const double e = line_error(f, k);
      bool keep = true;
      for (std::size_t t = 0; t < sources.size() && keep; ++t) {
        if (t == s) continue;
        const double et = error_at(*sources[t].frf, f.freq_hz[k]);
        if (std::isnan(et)) continue;  // t does not reach this frequency
        keep = t > s ? e <= et : e < et;
      }
      if (keep) picks.push_back({f.freq_hz[k], s, k});
    }
  }
  std::stable_sort(picks.begin(), picks.end(), [](const Pick& a, const Pick& b) { return a.f < b.f; });
  Frf& r = out.frf;
  r = first;  // metadata of the first source
  r.freq_hz.clear(), r.h.clear(), r.coherence.clear(), r.rel_err.clear(), r.reliable.clear();
  r.guu.clear(), r.gyy.clear(), r.guy.clear(), r.distortion_pct.clear();
  r.harmonics.reset();
  r.nonexcited_lines = 0;
  r.warnings.clear();
  r.corrections.clear();
  r.samples = 0;
  const double nan = std::nan("");
  for (std::size_t i = 0; i < picks.size(); ++i) {
    const Pick& p = picks[i];
    if (!r.freq_hz.empty() && !(p.f > r.freq_hz.back())) continue;  // the same frequency from a later source
    const Frf& f = *sources[p.src].frf;
    r.freq_hz.push_back(p.f);
    r.h.push_back(f.h[p.k]);
    r.coherence.push_back(p.k < f.coherence.size() ? f.coherence[p.k] : nan);
    r.rel_err.push_back(p.k < f.rel_err.size() ? f.rel_err[p.k] : nan);
    r.reliable.push_back(p.k < f.reliable.size() ? f.reliable[p.k] : 1);
    ++out.lines_from[p.src];
    if (i > 0 && picks[i - 1].src != p.src) out.seams_hz.push_back(0.5 * (picks[i - 1].f + p.f));
  }
  std::size_t total_samples = 0;
  std::string what = "stitched from";
  for (std::size_t s = 0; s < sources.size(); ++s) {
    total_samples += sources[s].frf->samples;
    double lo = kInf, hi = 0;
    for (const Pick& p : picks)
      if (p.src == s) lo = std::min(lo, p.f), hi = std::max(hi, p.f);
    what += (s ? ", " : " ") + sources[s].name + " (" + std::to_string(out.lines_from[s]) + " lines" +
            (out.lines_from[s] ? ", " + fmt_num(lo) + " to " + fmt_num(hi) + " Hz" : std::string()) + ")";
    for (const auto& c : sources[s].frf->corrections) r.corrections.push_back(sources[s].name + ": " + c);
  }
  r.samples = total_samples;
  r.corrections.push_back(what);
  if (!out.seams_hz.empty()) {
    std::string seams = "seams at";
    for (std::size_t i = 0; i < out.seams_hz.size(); ++i) seams += (i ? ", " : " ") + fmt_num(out.seams_hz[i]);
    r.corrections.push_back(seams + " Hz");
  }
  for (std::size_t s = 0; s < sources.size(); ++s)
    if (out.lines_from[s] == 0)
      r.warnings.push_back(sources[s].name + " gives no line: another source is better everywhere it reaches");
  return out;
}

}  // namespace benchid::ident
