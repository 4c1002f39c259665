#include "ident/frf_csv.h"

#include <charconv>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <limits>
#include <map>
#include <numbers>
#include <sstream>

#include "ident/error.h"
#include "ident/trusted.h"

namespace benchid::ident {

namespace {
std::string label(const std::string& name, const std::string& unit) {
  return unit.empty() ? name : name + " [" + unit + "]";
}
}  // namespace

void write_frf_csv(std::ostream& out, const Frf& f) {
  out << "# benchid frf 1\n";
  char b[512];
  std::snprintf(b, sizeof b, "# rate_hz=%.10g\n", f.rate_hz);
  out << b;
  out << "# estimator=" << estimator_name(f.estimator) << "\n";
  out << "# window=" << window_name(f.window) << "\n";
  out << "# detrend=" << detrend_name(f.detrend) << "\n";
  out << "# segment=" << f.segment << "\n";
  std::snprintf(b, sizeof b, "# overlap=%.6g\n", f.overlap);
  out << b;
  out << "# averages=" << f.averages << "\n";
  std::snprintf(b, sizeof b, "# effective_averages=%.6g\n", f.effective_averages);
  out << b;
  std::snprintf(b, sizeof b, "# coherence_bound=%.6g\n# confidence=%.6g\n", f.coherence_bound, f.confidence);
  out << b;
  out << "# samples=" << f.samples << "\n";
  out << "# input=" << label(f.input, f.input_unit) << "\n";
  out << "# output=" << label(f.output, f.output_unit) << "\n";
  if (!f.reference.empty()) out << "# reference=" << f.reference << "\n";
  if (f.loop_gain) out << "# quantity=loop_gain\n";
  if (!f.excitation.empty()) out << "# excitation=" << f.excitation << "\n";
  if (!f.corrections.empty()) {
    out << "# corrections=";
    for (std::size_t i = 0; i < f.corrections.size(); ++i) out << (i ? "; " : "") << f.corrections[i];
    out << "\n";
  }
  if (f.nonexcited_lines > 0) {
    out << "# nonexcited_lines=" << f.nonexcited_lines << "\n";
    std::snprintf(b, sizeof b, "# nonexcited_db=%.4g\n", f.nonexcited_db);
    out << b;
    if (std::isfinite(f.nonexcited_noise_db)) {
      std::snprintf(b, sizeof b, "# nonexcited_noise_db=%.4g\n", f.nonexcited_noise_db);
      out << b;
    }
  }
  if (f.harmonics) {
    out << "# harmonic_db=";
    for (std::size_t i = 0; i < f.harmonics->overall_db.size(); ++i)
      out << (i ? "," : "") << "H" << i + 2 << ":" << fmt_num(f.harmonics->overall_db[i]);
    out << "\n";
    for (const auto& b : f.harmonics->bands) {
      out << "# harmonic_band_db=" << fmt_num(b.f_lo_hz) << "-" << fmt_num(b.f_hi_hz) << " Hz:";
      for (std::size_t i = 0; i < b.ratio_db.size(); ++i) out << (i ? "," : "") << fmt_num(b.ratio_db[i]);
      out << "\n";
    }
  }
  for (const auto& w : f.warnings) out << "# warning=" << w << "\n";
  out << "# source=" << f.source << "\n";
  const bool dist = f.distortion_pct.size() == f.size();
  out << "freq_hz,re,im,mag_db,phase_deg,coherence,rel_err,reliable" << (dist ? ",distortion_pct" : "") << "\n";
  const auto mag = f.mag_db();
  const auto ph = f.phase_deg();
  for (std::size_t i = 0; i < f.size(); ++i) {
    int n = std::snprintf(b, sizeof b, "%.10g,%.12g,%.12g,%.6f,%.5f,", f.freq_hz[i], f.h[i].real(),
                          f.h[i].imag(), mag[i], ph[i]);
    out.write(b, n);
    if (std::isfinite(f.coherence[i])) {
      n = std::snprintf(b, sizeof b, "%.8f", f.coherence[i]);
      out.write(b, n);
    }
    out << ',';
    if (std::isfinite(f.rel_err[i])) {
      n = std::snprintf(b, sizeof b, "%.6g", f.rel_err[i]);
      out.write(b, n);
    }
    out << ',' << (f.reliable[i] ? '1' : '0');
    if (dist) {
      out << ',';
      if (std::isfinite(f.distortion_pct[i])) {
        n = std::snprintf(b, sizeof b, "%.4g", f.distortion_pct[i]);
        out.write(b, n);
      }
    }
    out << '\n';
  }
}

Frf read_frf_csv(const std::string& path) {
  std::ifstream in(path);
  if (!in) throw InputError("cannot open '" + path + "': no such file or not readable");
  Frf f;
  f.source = path;
  std::map<std::string, std::string> meta;
  std::string line;
  long ln = 0;
  std::vector<std::string> cols;
  while (std::getline(in, line)) {
    ++ln;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.empty()) continue;
    if (line[0] == '#') {
      const auto eq = line.find('=');
      if (eq != std::string::npos) {
        std::string k = line.substr(1, eq - 1);
        while (!k.empty() && k.front() == ' ') k.erase(0, 1);
        meta[k] = line.substr(eq + 1);
      }
      continue;
    }
    std::stringstream ss(line);
    std::string c;
    while (std::getline(ss, c, ',')) cols.push_back(c);
    break;
  }
  if (cols.empty()) throw InputError(where(path, ln) + "no header row; expected an FRF CSV from 'benchid frf'");
  auto col = [&](const std::string& name) -> int {
    for (std::size_t i = 0; i < cols.size(); ++i)
      if (cols[i] == name) return static_cast<int>(i);
    return -1;
  };
  const int cf = col("freq_hz"), cre = col("re"), cim = col("im"), cm = col("mag_db"), cp = col("phase_deg"),
            cc = col("coherence"), ce = col("rel_err"), cr = col("reliable"), cd = col("distortion_pct");
  if (cf < 0 || !((cre >= 0 && cim >= 0) || (cm >= 0 && cp >= 0)))
    throw InputError(where(path, ln) + "header lacks freq_hz and re,im (or mag_db,phase_deg); expected " +
                     "freq_hz,re,im,mag_db,phase_deg,coherence,rel_err");
  const double nan = std::numeric_limits<double>::quiet_NaN();
  // a metadata number: absent -> d; present -> a finite number in [lo, hi], else refused
  auto getd = [&](const std::string& k, double d, double lo = -std::numeric_limits<double>::max(),
                  double hi = std::numeric_limits<double>::max()) {
    auto it = meta.find(k);
    if (it == meta.end()) return d;
    const std::string& t = it->second;
    double v = nan;
    const auto r = std::from_chars(t.data(), t.data() + t.size(), v);
    if (r.ec != std::errc() || r.ptr != t.data() + t.size() || !std::isfinite(v) || v < lo || v > hi)
      throw InputError(where(path) + "metadata " + k + "=" + t.substr(0, 40) + "; expected a number" +
                       (hi < std::numeric_limits<double>::max() ? " from " + fmt_num(lo) + " to " + fmt_num(hi)
                                                                : " >= " + fmt_num(lo)));
    return v;
  };
  auto getn = [&](const std::string& k) {  // a count
    const double v = getd(k, 0, 0, 1e15);
    if (v != std::floor(v))
      throw InputError(where(path) + "metadata " + k + "=" + meta[k].substr(0, 40) + "; expected a whole number");
    return static_cast<std::size_t>(v);
  };
  f.rate_hz = getd("rate_hz", 0, 0);
  f.segment = getn("segment");
  f.overlap = getd("overlap", 0, 0, 0.99);
  f.averages = getn("averages");
  f.samples = getn("samples");
  f.effective_averages = getd("effective_averages", static_cast<double>(f.averages), 0);
  f.coherence_bound = getd("coherence_bound", 1.0, 0, 1);
  const bool bound_given = meta.count("coherence_bound") > 0;
  f.confidence = getd("confidence", 0.95, 0.5, 0.9999);
  if (meta.count("estimator")) {
    const std::string e = meta["estimator"];
    f.estimator = e == "h2" ? Estimator::h2 : e == "hv" ? Estimator::hv : e == "indirect" ? Estimator::indirect
                : e == "periodic" ? Estimator::periodic : e == "stepped" ? Estimator::stepped : Estimator::h1;
  }
  auto split_label = [](const std::string& s, std::string& name, std::string& unit) {
    const auto o = s.rfind(" [");
    if (o != std::string::npos && s.back() == ']') {
      name = s.substr(0, o);
      unit = s.substr(o + 2, s.size() - o - 3);
    } else {
      name = s;
    }
  };
  split_label(meta["input"], f.input, f.input_unit);
  split_label(meta["output"], f.output, f.output_unit);
  f.reference = meta["reference"];
  f.loop_gain = meta["quantity"] == "loop_gain";
  f.excitation = meta["excitation"];
  if (meta.count("corrections")) {
    const std::string& c = meta["corrections"];
    for (std::size_t p = 0; p <= c.size();) {
      const std::size_t q = std::min(c.find("; ", p), c.size());
      if (q > p) f.corrections.push_back(c.substr(p, q - p));
      p = q + 2;
    }
  }
  f.nonexcited_lines = getn("nonexcited_lines");
  f.nonexcited_db = getd("nonexcited_db", nan);
  f.nonexcited_noise_db = getd("nonexcited_noise_db", nan);
  if (meta.count("harmonic_db")) {  // "H2:-28,H3:-55.8"
    SweepHarmonics hh;
    std::stringstream hs(meta["harmonic_db"]);
    std::string item;
    while (std::getline(hs, item, ',')) {
      const auto c = item.find(':');
      double v = nan;
      if (c != std::string::npos) std::from_chars(item.data() + c + 1, item.data() + item.size(), v);
      hh.overall_db.push_back(v);
    }
    hh.max_order = static_cast<int>(hh.overall_db.size()) + 1;
    f.harmonics = hh;
  }

  std::vector<double> v;
  while (std::getline(in, line)) {
    ++ln;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.empty() || line[0] == '#') continue;
    v.assign(cols.size(), nan);
    std::size_t i = 0, p = 0;
    for (;;) {
      std::size_t q = line.find(',', p);
      if (q == std::string::npos) q = line.size();
      if (i >= cols.size())
        throw InputError(where(path, ln) + "more fields than the " + std::to_string(cols.size()) + " header columns");
      if (q > p) {
        double x;
        auto r = std::from_chars(line.data() + p, line.data() + q, x);
        if (r.ec != std::errc() || r.ptr != line.data() + q || !std::isfinite(x))
          throw InputError(where(path, ln) + "column '" + cols[i] + "' value '" + line.substr(p, q - p) +
                           "' is not a finite number");
        v[i] = x;
      }
      ++i;
      if (q == line.size()) break;
      p = q + 1;
    }
    if (i != cols.size())
      throw InputError(where(path, ln) + std::to_string(i) + " fields; expected " + std::to_string(cols.size()));
    if (std::isnan(v[static_cast<std::size_t>(cf)]))
      throw InputError(where(path, ln) + "empty freq_hz; expected a frequency in Hz");
    const double fr = v[static_cast<std::size_t>(cf)];
    if (fr < 0)
      throw InputError(where(path, ln) + "freq_hz " + line.substr(0, line.find(',')) + " is negative; expected >= 0 Hz");
    if (cc >= 0 && !std::isnan(v[static_cast<std::size_t>(cc)]) &&
        !(v[static_cast<std::size_t>(cc)] >= 0 && v[static_cast<std::size_t>(cc)] <= 1))
      throw InputError(where(path, ln) + "coherence " + fmt_num(v[static_cast<std::size_t>(cc)]) + "; expected 0 to 1");
    if (ce >= 0 && v[static_cast<std::size_t>(ce)] < 0)
      throw InputError(where(path, ln) + "rel_err " + fmt_num(v[static_cast<std::size_t>(ce)]) + "; expected >= 0");
    if (cr >= 0 && !std::isnan(v[static_cast<std::size_t>(cr)]) && v[static_cast<std::size_t>(cr)] != 0 &&
        v[static_cast<std::size_t>(cr)] != 1)
      throw InputError(where(path, ln) + "reliable " + fmt_num(v[static_cast<std::size_t>(cr)]) + "; expected 0 or 1");
    if (!f.freq_hz.empty() && !(fr > f.freq_hz.back()))
      throw InputError(where(path, ln) + "freq_hz " + line.substr(0, line.find(',')) +
                       " does not increase; expected ascending frequencies");
    // the response from re,im when both are given, else from mag_db,phase_deg (NaN: missing)
    const auto at = [&](int c) { return c >= 0 ? v[static_cast<std::size_t>(c)] : nan; };
    std::complex<double> h(nan, nan);
    if (!std::isnan(at(cre)) && !std::isnan(at(cim))) {
      h = {at(cre), at(cim)};
    } else if (!std::isnan(at(cm)) && !std::isnan(at(cp))) {
      if (std::fabs(at(cm)) > 6000)  // 10^300: beyond any measurement, and near the end of double range
        throw InputError(where(path, ln) + "mag_db " + fmt_num(at(cm)) + "; expected -6000 to 6000 dB");
      h = std::polar(std::pow(10.0, at(cm) / 20.0), at(cp) * std::numbers::pi / 180.0);
    }
    if (!std::isfinite(h.real()) || !std::isfinite(h.imag()))
      throw InputError(where(path, ln) + "response is missing; expected re,im or mag_db,phase_deg");
    f.freq_hz.push_back(fr);
    f.h.push_back(h);
    f.coherence.push_back(cc >= 0 ? v[static_cast<std::size_t>(cc)] : nan);
    f.rel_err.push_back(ce >= 0 ? v[static_cast<std::size_t>(ce)] : nan);
    // a file without the column: the coherence and error rule (trusted.h)
    f.reliable.push_back(cr >= 0 ? v[static_cast<std::size_t>(cr)] == 1.0
                                 : trusted_by_error(f.coherence.back(),
                                                    bound_given ? f.coherence_bound : 0.0,
                                                    f.rel_err.back()));
    if (cd >= 0) f.distortion_pct.push_back(v[static_cast<std::size_t>(cd)]);
  }
  if (f.freq_hz.empty()) throw InputError(where(path, ln) + "no data rows; expected one row per frequency line");
  return f;
}

}  // namespace benchid::ident
