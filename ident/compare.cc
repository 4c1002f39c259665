#include "ident/compare.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "ident/error.h"

namespace benchid::ident {

namespace {

double wrap180(double d) {  // into (-180, 180]
  d = std::fmod(d, 360.0);
  if (d <= -180) d += 360;
  if (d > 180) d -= 360;
  return d;
}

// A reference's magnitude (dB) and unwrapped phase (deg) at f, linear in log
// frequency between its two neighbouring lines; false when f lies outside
// its lines or a neighbour is unreliable.
// and its relative random error there (0 where not stated)
bool at(const Frf& r, const std::vector<double>& mag_db, const std::vector<double>& ph_deg, double f, double& m,
        double& p, double& e) {
  if (r.size() == 0 || f < r.freq_hz.front() || f > r.freq_hz.back()) return false;
  const auto err = [&](std::size_t k) {
    return k < r.rel_err.size() && std::isfinite(r.rel_err[k]) ? r.rel_err[k] : 0.0;
  };
  const auto it = std::lower_bound(r.freq_hz.begin(), r.freq_hz.end(), f);
  const std::size_t hi = static_cast<std::size_t>(it - r.freq_hz.begin());
  if (*it == f) {
    if (!r.reliable[hi]) return false;
    m = mag_db[hi], p = ph_deg[hi], e = err(hi);
    return true;
  }
  const std::size_t lo = hi - 1;
  if (!r.reliable[lo] || !r.reliable[hi]) return false;
  const double f0 = r.freq_hz[lo], f1 = r.freq_hz[hi];
  const double t = f0 > 0 ? std::log(f / f0) / std::log(f1 / f0) : (f - f0) / (f1 - f0);
  m = mag_db[lo] + t * (mag_db[hi] - mag_db[lo]);
  p = ph_deg[lo] + t * (ph_deg[hi] - ph_deg[lo]);
  e = std::max(err(lo), err(hi));
  return true;
}

}  // namespace

CompareResult compare_frf(const Frf& frf, const std::vector<const Frf*>& refs, const std::vector<std::string>& names,
                          const CompareOptions& o) {
  if (refs.empty()) throw InputError("no reference FRF; expected one reference or several good units");
  if (!(o.tolerance_db >= 0) || !(o.tolerance_deg >= 0) || !(o.sigmas >= 0))
    throw InputError("tolerances and sigmas must be >= 0");
  for (std::size_t i = 0; i < refs.size(); ++i)
    if (refs[i]->output_unit != frf.output_unit || refs[i]->input_unit != frf.input_unit)
      throw InputError(names[i] + ": units " + refs[i]->output_unit + "/" + refs[i]->input_unit + ", the FRF's " +
                       frf.output_unit + "/" + frf.input_unit + "; expected FRFs of the same quantities");
  std::vector<std::vector<double>> mags, phases;
  for (const Frf* r : refs) {
    mags.push_back(r->mag_db());
    phases.push_back(r->phase_deg());
  }
  const std::vector<double> mag = frf.mag_db(), ph = frf.phase_deg();
  CompareResult out;
  for (std::size_t k = 0; k < frf.size(); ++k) {
    if (k < frf.reliable.size() && !frf.reliable[k]) {
      ++out.unreliable;
      continue;
    }
    CompareLine c;
    c.freq_hz = frf.freq_hz[k];
    bool any = false;
    double first_p = 0;
    for (std::size_t i = 0; i < refs.size(); ++i) {
      double m, p, e;
      if (!at(*refs[i], mags[i], phases[i], c.freq_hz, m, p, e)) continue;
      // each reference stands for its unit within its own random error
      const double wm = o.sigmas * 20 * std::log10(1 + e), wp = o.sigmas * e * 180 / M_PI;
      if (!any) {
        first_p = p;
        c.lo_db = m - wm, c.hi_db = m + wm;
        c.lo_deg = p - wp, c.hi_deg = p + wp;
        any = true;
        continue;
      }
      p = first_p + wrap180(p - first_p);  // the same turn as the first reference
      c.lo_db = std::min(c.lo_db, m - wm), c.hi_db = std::max(c.hi_db, m + wm);
      c.lo_deg = std::min(c.lo_deg, p - wp), c.hi_deg = std::max(c.hi_deg, p + wp);
    }
    if (!any) {
      ++out.not_covered;
      continue;
    }
    const double mid = 0.5 * (c.lo_deg + c.hi_deg);
    c.mag_db = mag[k];
    c.phase_deg = mid + wrap180(ph[k] - mid);
    const double e = k < frf.rel_err.size() && std::isfinite(frf.rel_err[k]) ? frf.rel_err[k] : 0.0;
    const double allow_db = o.tolerance_db + o.sigmas * 20 * std::log10(1 + e);
    const double allow_deg = o.tolerance_deg + o.sigmas * e * 180 / M_PI;
    c.excess_db = std::max({0.0, c.lo_db - allow_db - c.mag_db, c.mag_db - c.hi_db - allow_db});
    c.excess_deg = std::max({0.0, c.lo_deg - allow_deg - c.phase_deg, c.phase_deg - c.hi_deg - allow_deg});
    c.outside = c.excess_db > 0 || c.excess_deg > 0;
    out.outside += c.outside;
    out.lines.push_back(c);
  }
  return out;
}

}  // namespace benchid::ident
