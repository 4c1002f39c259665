#include "cli/html_report.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdio>
#include <functional>
#include <limits>
#include <memory>
#include <numbers>
#include <sstream>

#include "cli/svg_plot.h"
#include "cli/text_report.h"
#include "loop/controller.h"

namespace benchid::cli {

namespace {

using cplx = std::complex<double>;
constexpr double kPi = std::numbers::pi;

std::string fmt(const char* f, double v) {
  if (std::isinf(v)) return v > 0 ? "&infin;" : "&minus;&infin;";
  if (std::isnan(v)) return "&ndash;";
  char b[64];
  std::snprintf(b, sizeof b, f, v);
  return b;
}

std::string esc(const std::string& s) { return svg::xml_escape(s); }

std::vector<double> log_grid(double lo, double hi, std::size_t n) {
  std::vector<double> f(n);
  for (std::size_t i = 0; i < n; ++i)
    f[i] = lo * std::pow(hi / lo, static_cast<double>(i) / static_cast<double>(n - 1));
  return f;
}

// arg in degrees, unwrapped along the sequence
std::vector<double> unwrapped_deg(const std::vector<cplx>& h) {
  std::vector<double> p(h.size());
  double prev = 0;
  for (std::size_t i = 0; i < h.size(); ++i) {
    double a = std::arg(h[i]) * 180 / kPi;
    if (i > 0) a += 360 * std::round((prev - a) / 360);
    p[i] = prev = a;
  }
  return p;
}

// Moves a curve by whole turns so that it lies nearest `target` at index i.
void align_turns(std::vector<double>& p, std::size_t i, double target) {
  if (i >= p.size() || !std::isfinite(target)) return;
  const double k = 360 * std::round((target - p[i]) / 360);
  for (double& v : p) v += k;
}

const char* kCss = R"(
:root{--ink:#111;--muted:#555;--rule:#bbb;--accent:#0a4a7a;--pass:#0b6b3a;--fail:#9c2a00}
*{box-sizing:border-box}
body{margin:0 auto;max-width:1000px;padding:14px;font:15px/1.45 "DejaVu Sans",Verdana,sans-serif;color:var(--ink);background:#fff}
h1{font-size:1.5em;margin:.2em 0 .1em;color:var(--accent)}
h2{font-size:1.2em;margin:1.4em 0 .4em;padding-bottom:.15em;border-bottom:2px solid var(--accent);color:var(--accent)}
.sub{color:var(--muted);margin:0 0 .8em}
table{border-collapse:collapse;margin:.4em 0 .8em;font-size:.93em;max-width:100%}
th,td{border:1px solid var(--rule);padding:3px 8px;text-align:left;vertical-align:top;overflow-wrap:anywhere}
td:first-child,th{overflow-wrap:normal}
th{background:#eef2f5}
td.n{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
.caution{border:2px solid #000;background:#fff7d6;padding:8px 12px;margin:.8em 0}
.caution strong{display:block;margin-bottom:.2em}
figure.plot-box{margin:.6em 0 1em;border:1px solid var(--rule);padding:4px}
figure.plot-box figcaption{font-size:.88em;color:var(--muted);padding:2px 4px}
svg.plot{display:block;width:100%;height:auto;background:#fff}
svg.plot .frame{fill:none;stroke:#000;stroke-width:1}
svg.plot .grid{stroke:#d6d6d6;stroke-width:.8}
svg.plot .grid.minor{stroke:#ececec}
svg.plot .tick,svg.plot .legend{font-size:11px;fill:#222}
svg.plot .label{font-size:12px;fill:#000}
svg.plot .title{font-size:13px;font-weight:bold;fill:#000}
svg.plot .mlabel{font-size:11px;fill:#000;paint-order:stroke;stroke:#fff;stroke-width:3px}
svg.plot .series{fill:none;stroke-linejoin:round}
svg.plot .band{opacity:.35}
svg.plot .circle{fill:none;stroke-width:1.3}
svg.plot .guide{stroke-width:1.2;stroke-dasharray:2 3}
.pass{color:var(--pass);font-weight:bold}.fail{color:var(--fail);font-weight:bold}
.two{display:grid;grid-template-columns:1fr 1fr;gap:10px}
@media (max-width:700px){.two{grid-template-columns:1fr}body{font-size:14px}}
@media print{figure.plot-box,table{break-inside:avoid}body{max-width:none}}
pre{white-space:pre-wrap;font-size:.85em;background:#f4f4f4;padding:6px}
)";

// Log frequency axis from the plot's series, labelled; dotted verticals at the
// fitted band's edges when band_hi_hz > 0.
void frequency_axis(svg::Plot& p, double band_lo_hz, double band_hi_hz) {
  if (band_hi_hz > 0) {
    p.guides.push_back({true, band_lo_hz, "fit band start"});
    p.guides.push_back({true, band_hi_hz, "fit band end"});
  }
  p.fit_x(true);
  p.x.label = "frequency (Hz)";
}

// The range a Bode plot must show: the measured values inside the fitted band
// and the model's over the plot. Lines outside the band may be far off (an
// H1 estimate where the input has no energy) and must not squash the rest.
std::pair<double, double> must_show(const std::vector<double>& f, const std::vector<double>& v, double band_lo_hz,
                                    double band_hi_hz, const std::vector<double>& model) {
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (std::size_t i = 0; i < f.size(); ++i)
    if (f[i] >= band_lo_hz && f[i] <= band_hi_hz && std::isfinite(v[i])) lo = std::min(lo, v[i]), hi = std::max(hi, v[i]);
  for (double m : model)
    if (std::isfinite(m)) lo = std::min(lo, m), hi = std::max(hi, m);
  return {lo, hi};
}

std::string figure(const svg::Plot& p, const std::string& caption) {
  return "<figure class=\"plot-box\">\n" + p.render() + "<figcaption>" + caption + "</figcaption>\n</figure>\n";
}

std::string row(std::initializer_list<std::string> cells, bool numeric_after_first = true) {
  std::string r = "<tr>";
  bool first = true;
  for (const auto& c : cells) {
    r += (first || !numeric_after_first) ? "<td>" : "<td class=\"n\">";
    r += c + "</td>";
    first = false;
  }
  return r + "</tr>\n";
}

struct Mode {
  std::string kind;
  double freq_hz, damping;
};

std::vector<Mode> modes(const std::vector<cplx>& roots, const fit::RationalModel& m) {
  std::vector<Mode> out;
  for (const cplx& q : roots) {
    if (q.imag() < -1e-12 * std::abs(q)) continue;  // one of each conjugate pair
    cplx s = q;
    if (m.domain == fit::Domain::z) s = std::log(q) / m.sample_time_s;
    if (std::abs(s) < 1e-12) {
      out.push_back({"at the origin", 0, std::numeric_limits<double>::quiet_NaN()});
      continue;
    }
    const fit::Mode md = fit::mode_of(s);
    const bool rhp = s.real() > 0;
    out.push_back({std::string(md.real ? "real" : "complex pair") + (rhp ? ", right half plane" : ""), md.freq_hz,
                   md.real ? std::numeric_limits<double>::quiet_NaN() : md.damping});
  }
  std::sort(out.begin(), out.end(), [](const Mode& a, const Mode& b) { return a.freq_hz < b.freq_hz; });
  return out;
}

std::string modes_table(const fit::RationalModel& m) {
  const fit::Zpk z = m.zpk();
  std::ostringstream o;
  o << "<table><tr><th>kind</th><th>root</th><th>frequency (Hz)</th><th>damping &zeta;</th></tr>\n";
  for (const auto& [what, roots] : {std::pair{"pole", &z.poles}, std::pair{"zero", &z.zeros}})
    for (const Mode& md : modes(*roots, m))
      o << "<tr><td>" << what << "</td><td>" << md.kind << "</td><td class=\"n\">" << fmt("%.5g", md.freq_hz)
        << "</td><td class=\"n\">" << fmt("%.4f", md.damping) << "</td></tr>\n";
  o << "</table>\n";
  return o.str();
}

}  // namespace

std::string html_report(const ReportData& d) {
  const ident::Frf& frf = *d.frf;
  const fit::FrfFit& ft = *d.fit;
  const fit::RationalModel& model = ft.result.model;
  std::ostringstream o;
  const std::string title = d.title.empty() ? d.record : d.title;
  o << "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n"
       "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>benchid report: "
    << esc(title) << "</title>\n<style>" << kCss << "</style></head>\n<body>\n";
  o << "<h1>benchid report: " << esc(title) << "</h1>\n<p class=\"sub\">" << esc(d.record) << " &middot; made "
    << esc(d.created_utc) << " by benchid 0.1.0</p>\n";

  // ---- caution ----
  o << "<div class=\"caution\" id=\"caution\"><strong>Caution</strong>A fitted model and every margin taken from it "
       "hold only in the measured band (here " << fmt("%.4g", ft.data.freq_hz.front()) << " to "
    << fmt("%.4g", ft.data.freq_hz.back())
    << " Hz) and where the coherence is high. Injecting excitation into a running machine can damage it or hurt "
       "people: limit the level, keep a way to stop, and follow the machine's safety rules and licensed practice. "
       "benchid recommends nothing it has not computed; changing a controller on live machinery is at the user's "
       "own risk.</div>\n";

  // ---- what was measured ----
  o << "<h2>Measurement</h2>\n<table>\n";
  const double length_s = frf.rate_hz > 0 ? static_cast<double>(frf.samples) / frf.rate_hz : 0;
  o << row({"recording", esc(frf.source)}, false)
    << row({"input", esc(frf.input) + (frf.input_unit.empty() ? "" : " [" + esc(frf.input_unit) + "]")}, false)
    << row({"output", esc(frf.output) + (frf.output_unit.empty() ? "" : " [" + esc(frf.output_unit) + "]")}, false);
  if (!frf.reference.empty()) o << row({"reference", esc(frf.reference) + " (indirect estimate through it)"}, false);
  o << row({"sampling rate", fmt("%.6g", frf.rate_hz) + " Hz"}, false)
    << row({"length used", std::to_string(frf.samples) + " samples, " + fmt("%.4g", length_s) + " s"}, false)
    << row({"excitation", frf.excitation.empty() ? "not stated" : esc(frf.excitation)}, false)
    << row({"estimator", esc(ident::estimator_name(frf.estimator)) + ", " + esc(ident::window_name(frf.window)) +
                             " window, " + std::to_string(frf.segment) + "-sample segments (" +
                             fmt("%.4g", frf.resolution_hz()) + " Hz lines), " + std::to_string(frf.averages) +
                             " averages (" + fmt("%.3g", frf.effective_averages) + " effective)"},
           false);
  for (const auto& [k, v] : d.settings) o << row({esc(k), esc(v)}, false);
  o << row({"command", "<code>" + esc(d.command_line) + "</code>"}, false);
  o << "</table>\n";

  // ---- FRF and model ----
  // measured curves at the reliable lines (NaN elsewhere breaks the line); the
  // lines under the coherence bound are drawn as dots and do not set the scale
  constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  std::vector<double> mag = frf.mag_db(), ph = frf.phase_deg(), lo_db, hi_db, f_low, mag_low, ph_low, coh_low;
  for (std::size_t i = 0; i < frf.size(); ++i) {
    const double e = frf.rel_err[i];
    const double a = std::abs(frf.h[i]);
    const bool have = std::isfinite(e) && frf.reliable[i];
    lo_db.push_back(have ? 20 * std::log10(a * std::max(1e-3, 1 - e)) : kNaN);
    hi_db.push_back(have ? 20 * std::log10(a * (1 + e)) : kNaN);
    if (!frf.reliable[i]) {
      f_low.push_back(frf.freq_hz[i]);
      mag_low.push_back(mag[i]);
      ph_low.push_back(ph[i]);
      coh_low.push_back(frf.coherence[i]);
      mag[i] = ph[i] = kNaN;
    }
  }
  const double f_lo = frf.freq_hz.front(), f_hi = frf.freq_hz.back();
  const std::vector<double> fg = log_grid(f_lo, f_hi, 600);
  std::vector<cplx> hm;
  for (double f : fg) hm.push_back(model.response(f));
  std::vector<double> mmag, mph = unwrapped_deg(hm);
  for (const cplx& v : hm) mmag.push_back(20 * std::log10(std::abs(v)));
  {  // align the model's phase with the measurement at the fit band's first line
    const double f0 = ft.data.freq_hz.front();
    const auto it = std::lower_bound(frf.freq_hz.begin(), frf.freq_hz.end(), f0);
    const std::size_t i = static_cast<std::size_t>(it - frf.freq_hz.begin());
    const auto jt = std::lower_bound(fg.begin(), fg.end(), f0);
    if (i < ph.size() && jt != fg.end()) align_turns(mph, static_cast<std::size_t>(jt - fg.begin()), ph[i]);
  }
  const std::string ou = frf.output_unit.empty() ? "output" : frf.output_unit, iu = frf.input_unit.empty() ? "input" : frf.input_unit;
  o << "<h2>Frequency response and model</h2>\n";
  {
    svg::Plot p("Magnitude of H = " + frf.output + " / " + frf.input);
    p.bands.push_back({"measured \xC2\xB1 1 s.d.", frf.freq_hz, lo_db, hi_db, svg::sky});
    p.series.push_back({"measured", frf.freq_hz, mag, svg::blue, 1.6});
    p.series.push_back({"model", fg, mmag, svg::vermillion, 1.8, true});
    p.series.push_back({"low coherence", f_low, mag_low, svg::orange, 1, false, true, false});
    frequency_axis(p, ft.data.freq_hz.front(), ft.data.freq_hz.back());
    p.y.label = "magnitude (dB re 1 " + ou + "/" + iu + ")";
    const auto [lo, hi] = must_show(frf.freq_hz, mag, ft.data.freq_hz.front(), ft.data.freq_hz.back(), mmag);
    p.fit_y_range(lo, hi, 0.08);
    o << figure(p, "Measured FRF with its 1-standard-deviation random error (shaded), the fitted model (dashed), "
                   "lines below the zero-coherence bound as dots; dotted verticals bound the fitted band. The scale "
                   "shows the fitted band and the model; lines beyond it are cut off at the frame.");
  }
  {
    svg::Plot p("Phase of H");
    p.series.push_back({"measured", frf.freq_hz, ph, svg::blue, 1.6});
    p.series.push_back({"model", fg, mph, svg::vermillion, 1.8, true});
    p.series.push_back({"low coherence", f_low, ph_low, svg::orange, 1, false, true, false});
    frequency_axis(p, ft.data.freq_hz.front(), ft.data.freq_hz.back());
    p.y.label = "phase (deg)";
    p.y.tick_step = 45;
    const auto [lo, hi] = must_show(frf.freq_hz, ph, ft.data.freq_hz.front(), ft.data.freq_hz.back(), mph);
    p.fit_y_range(lo, hi, 0.02);
    o << figure(p, "Phase unwrapped along frequency; the model's phase is shifted by whole turns to meet the "
                   "measurement at the fitted band's first line.");
  }
  {
    svg::Plot p("Coherence", 720, 220);
    p.series.push_back({"coherence", frf.freq_hz, frf.coherence, svg::blue, 1.4});
    p.series.push_back({"below the bound", f_low, coh_low, svg::orange, 1, false, true});
    frequency_axis(p, 0, 0);
    p.y.label = "coherence";
    p.y.lo = 0, p.y.hi = 1, p.y.tick_step = 0.25;
    p.guides.push_back({false, frf.coherence_bound, "zero-coherence bound", svg::vermillion});
    o << figure(p, "Coherence &gamma;&sup2;; the red dotted line is the zero-coherence bound at " +
                       fmt("%.0f", 100 * frf.confidence) + " % for " + fmt("%.3g", frf.effective_averages) +
                       " effective averages (" + fmt("%.3g", frf.coherence_bound) +
                       "): lines under it (dots) cannot be told from noise and are left out of the fit.");
  }

  // ---- fit ----
  o << "<h2>Fitted model</h2>\n";
  std::vector<double> res_db, res_deg, sd_db_lo, sd_db_hi;
  for (std::size_t k = 0; k < ft.data.freq_hz.size(); ++k) {
    const cplx q = model.response(ft.data.freq_hz[k]) / ft.data.h[k];
    res_db.push_back(20 * std::log10(std::abs(q)));
    res_deg.push_back(std::arg(q) * 180 / kPi);
    const auto it = std::lower_bound(frf.freq_hz.begin(), frf.freq_hz.end(), ft.data.freq_hz[k] * (1 - 1e-12));
    const std::size_t i = static_cast<std::size_t>(it - frf.freq_hz.begin());
    const double e = i < frf.rel_err.size() ? frf.rel_err[i] : std::numeric_limits<double>::quiet_NaN();
    sd_db_hi.push_back(std::isfinite(e) ? 20 * std::log10(1 + e) : std::numeric_limits<double>::quiet_NaN());
    sd_db_lo.push_back(std::isfinite(e) ? 20 * std::log10(std::max(1e-3, 1 - e)) : std::numeric_limits<double>::quiet_NaN());
  }
  o << "<div class=\"two\">\n";
  {
    svg::Plot p("Fit residual, magnitude", 480, 260);
    p.bands.push_back({"\xC2\xB1 1 s.d.", ft.data.freq_hz, sd_db_lo, sd_db_hi, svg::sky});
    p.series.push_back({"model / measured", ft.data.freq_hz, res_db, svg::vermillion, 1.4});
    frequency_axis(p, 0, 0);
    p.y.label = "residual (dB)";
    p.fit_y();
    o << figure(p, "20 log10 |model / measured| at the fitted lines, against the measurement's random error.");
  }
  {
    svg::Plot p("Fit residual, phase", 480, 260);
    p.series.push_back({"model \xE2\x88\x92 measured", ft.data.freq_hz, res_deg, svg::vermillion, 1.4});
    frequency_axis(p, 0, 0);
    p.y.label = "residual (deg)";
    p.fit_y();
    o << figure(p, "arg(model / measured) at the fitted lines.");
  }
  o << "</div>\n";
  o << "<h3>Poles and zeros</h3>\n" << modes_table(model);
  o << "<p>Gain k = " << fmt("%.6g", model.zpk().gain) << "; DC gain " << fmt("%.6g", model.dc_gain()) << " " << esc(ou) << "/"
    << esc(iu) << "; delay " << fmt("%.4g", model.delay_s * 1e3) << " ms; " << model.integrators << " integrator(s)"
    << (model.reflected ? "; <strong>" + std::to_string(model.reflected) +
                              " unstable pole(s) were reflected into the left half plane, which changes the phase</strong>"
                        : std::string())
    << ". The pole-residue form in the model JSON is the authoritative model.</p>\n";
  o << "<h3>Fit quality</h3>\n<table>\n"
    << row({"order (poles)", std::to_string(model.order())}) << row({"how the order was chosen", esc(ft.order_reason)}, false)
    << row({"fitted band", fmt("%.4g", ft.data.freq_hz.front()) + " to " + fmt("%.4g", ft.data.freq_hz.back()) + " Hz"})
    << row({"lines fitted", std::to_string(ft.data.freq_hz.size())})
    << row({"lines left out", std::to_string(ft.left_out_unreliable) + " below the coherence bound, " +
                                  std::to_string(ft.left_out_band) + " outside the band"})
    << row({"weighting", esc(fit::weighting_name(ft.weighting))}, false)
    << row({"normalised RMS error ||H &minus; H&#770;|| / ||H||", fmt("%.4g", ft.result.nrmse)})
    << row({"largest magnitude error", fmt("%.3g", ft.result.max_err_db) + " dB at " + fmt("%.4g", ft.result.max_err_db_hz) + " Hz"})
    << row({"largest phase error", fmt("%.3g", ft.result.max_err_deg) + " deg at " + fmt("%.4g", ft.result.max_err_deg_hz) + " Hz"})
    << row({"&chi;&sup2; / degrees of freedom", fmt("%.4g", ft.result.chi2) + " / " + std::to_string(ft.result.dof) +
                                                   " = " + fmt("%.3g", ft.result.dof > 0 ? ft.result.chi2 / ft.result.dof : NAN)})
    << row({"iterations", std::to_string(ft.result.iterations) + (ft.result.converged ? " (converged)" : " (NOT converged)")})
    << "</table>\n";

  // ---- replay ----
  if (d.replay && d.y_measured && d.rate_hz > 0) {
    const fit::ReplayResult& r = *d.replay;
    const std::vector<double>& y = *d.y_measured;
    o << "<h2>Time-domain check (replay)</h2>\n";
    const std::size_t n = y.size();
    // a window of about 10 periods of the fitted band's middle frequency (its
    // geometric mean), at least 400 samples, from the middle of the scored part
    const double f_mid = std::sqrt(ft.data.freq_hz.front() * ft.data.freq_hz.back());
    const std::size_t want = std::max<std::size_t>(400, static_cast<std::size_t>(10 / f_mid * d.rate_hz));
    const std::size_t start0 = std::min(n, r.settle + (n - std::min(n, r.settle)) / 2);
    const std::size_t len = std::min(n - start0, want);
    // at most about 1600 points a curve: beyond that, each bucket of samples
    // gives its smallest and largest value in time order (the envelope stays)
    const std::size_t bucket = std::max<std::size_t>(1, len / 800);
    std::vector<double> ym, ys, yr, tm, ts, tr;
    const auto take = [&](const std::function<double(std::size_t)>& v, std::vector<double>& tt, std::vector<double>& out) {
      for (std::size_t k = start0; k < start0 + len; k += bucket) {
        const std::size_t e = std::min(start0 + len, k + bucket);
        std::size_t lo = k, hi = k;
        for (std::size_t j = k; j < e; ++j) {
          if (v(j) < v(lo)) lo = j;
          if (v(j) > v(hi)) hi = j;
        }
        for (std::size_t j : {std::min(lo, hi), std::max(lo, hi)}) {
          if (bucket == 1 && j != k) continue;
          tt.push_back(static_cast<double>(j) / d.rate_hz);
          out.push_back(v(j));
        }
      }
    };
    take([&](std::size_t j) { return y[j]; }, tm, ym);
    take([&](std::size_t j) { return r.simulated[j]; }, ts, ys);
    take([&](std::size_t j) { return y[j] - r.simulated[j]; }, tr, yr);
    if (len >= 2) {
      svg::Plot p("Measured and simulated output");
      p.series.push_back({"measured", tm, ym, svg::blue, 1.3});
      p.series.push_back({"simulated", ts, ys, svg::vermillion, 1.5, true});
      p.series.push_back({"residual", tr, yr, svg::green, 1.0});
      p.x.label = "time (s)";
      p.x.lo = static_cast<double>(start0) / d.rate_hz, p.x.hi = static_cast<double>(start0 + len - 1) / d.rate_hz;
      p.y.label = d.frf->output + " (" + ou + ")";
      p.fit_y();
      o << figure(p, "A window of " + fmt("%.4g", static_cast<double>(len) / d.rate_hz) +
                         " s from the middle of the record (about ten periods of the fitted band's middle "
                         "frequency): the recorded input run through the model (delay exact) against the recorded "
                         "output" + (bucket > 1 ? "; each curve drawn as the smallest and largest sample of every " +
                                                      std::to_string(bucket) + " samples" : std::string()) + ".");
    }
    o << "<table><tr><th>check</th><th>value</th><th>rule</th><th>result</th></tr>\n"
      << "<tr><td>match % = 100 (1 &minus; ||y &minus; y&#770;|| / ||y &minus; mean y||)</td><td class=\"n\">"
      << fmt("%.2f", r.match_pct) << "</td><td>" << r.samples << " samples after " << r.settle
      << " left out while the model settles</td><td>&ndash;</td></tr>\n";
    for (const auto& [name, test] : {std::pair{"residual whiteness (lags 1.." + std::to_string(r.whiteness.rho.size()) + ")", &r.whiteness},
                                     std::pair{std::string("residual vs input (cross-correlation)"), &r.cross}})
      o << "<tr><td>" << name << "</td><td class=\"n\">" << test->failing << " lags over "
        << fmt("%.3g", test->threshold) << "</td><td>99 % bound " << fmt("%.3g", test->bound)
        << "; a lag fails above max(bound, practical); " << test->allowed << " failing lag(s) allowed</td><td class=\""
        << (test->pass ? "pass\">pass" : "fail\">fail") << "</td></tr>\n";
    o << "</table>\n<p>" << esc(r.verdict) << "</p>\n";
  }

  // ---- loop ----
  if (d.loop) {
    const LoopAnalysis& la = *d.loop;
    const loop::Margins& m = la.m;
    o << "<h2>Loop gain L = C &middot; P</h2>\n<p>Controller <code>" << esc(la.controller)
      << "</code> on the fitted model (negative feedback).</p>\n";
    // L = C P on the fitted model (the report's loop is always on the model)
    const loop::Controller c = loop::parse_controller(la.controller);
    const auto loop_at = [&](double f) { return model.response(f) * c.model.response(f); };
    const double lo = std::max(f_lo, m.f_lo_hz), hi = std::min(f_hi, m.f_hi_hz);
    struct {
      std::vector<double> f_hz;
      std::vector<cplx> l;
    } lc;
    lc.f_hz = log_grid(lo, hi, 2000);  // dense enough for a lightly damped mode on the Nyquist plot
    for (double f : lc.f_hz) lc.l.push_back(loop_at(f));
    std::vector<double> lmag, lph = unwrapped_deg(lc.l), smag, tmag, re, im;
    for (const cplx& v : lc.l) {
      lmag.push_back(20 * std::log10(std::abs(v)));
      smag.push_back(-20 * std::log10(std::abs(1.0 + v)));
      tmag.push_back(20 * std::log10(std::abs(v / (1.0 + v))));
      re.push_back(v.real());
      im.push_back(v.imag());
    }
    // phase shown in (-360, 0] at the crossover where there is one
    if (std::isfinite(m.crossover_hz)) {
      const auto it = std::lower_bound(lc.f_hz.begin(), lc.f_hz.end(), m.crossover_hz);
      const std::size_t i = std::min(lc.l.size() - 1, static_cast<std::size_t>(it - lc.f_hz.begin()));
      align_turns(lph, i, std::arg(lc.l[i]) * 180 / kPi > 0 ? std::arg(lc.l[i]) * 180 / kPi - 360 : std::arg(lc.l[i]) * 180 / kPi);
    }
    // L from the measured FRF lines (reliable only)
    std::vector<double> fl, lmag_meas, lph_meas;
    {
      std::vector<cplx> lm;
      for (std::size_t i = 0; i < frf.size(); ++i)
        if (frf.reliable[i] && frf.freq_hz[i] >= lo && frf.freq_hz[i] <= hi) {
          fl.push_back(frf.freq_hz[i]);
          lm.push_back(frf.h[i] * c.model.response(frf.freq_hz[i]));
        }
      lph_meas = unwrapped_deg(lm);
      for (const cplx& v : lm) lmag_meas.push_back(20 * std::log10(std::abs(v)));
      if (!lm.empty() && !lph.empty()) {
        const auto it = std::lower_bound(lc.f_hz.begin(), lc.f_hz.end(), fl.front());
        const std::size_t j = std::min(lph.size() - 1, static_cast<std::size_t>(it - lc.f_hz.begin()));
        align_turns(lph_meas, 0, lph[j]);
      }
    }
    {
      svg::Plot p("Loop gain magnitude |L|");
      p.series.push_back({"L on the measured FRF", fl, lmag_meas, svg::blue, 1, false, true, false});
      p.series.push_back({"L on the model", lc.f_hz, lmag, svg::vermillion, 1.8});
      frequency_axis(p, ft.data.freq_hz.front(), ft.data.freq_hz.back());
      p.y.label = "|L| (dB)";
      p.guides.push_back({false, 0, "0 dB"});
      for (const auto& x : m.crossings)
        if (x.kind == loop::Crossing::Kind::gain)
          p.markers.push_back({"crossover " + svg::si_quantity(x.freq_hz, "Hz") + ", PM " + fmt("%.1f", x.margin) + "\xC2\xB0", x.freq_hz, 0.0, svg::black});
        else if (std::fabs(x.margin) < 60 && p.markers.size() < 6)
          p.markers.push_back({"GM " + fmt("%.1f", x.margin) + " dB", x.freq_hz, -x.margin, svg::vermillion});
      p.fit_y();
      o << figure(p, "Loop gain on the fitted model (line) and on the measured FRF (dots, reliable lines only); "
                     "markers at the gain crossover (phase margin) and at the phase crossovers (gain margin); "
                     "dotted verticals bound the fitted band.");
    }
    {
      svg::Plot p("Loop gain phase arg L");
      p.series.push_back({"L on the measured FRF", fl, lph_meas, svg::blue, 1, false, true, false});
      p.series.push_back({"L on the model", lc.f_hz, lph, svg::vermillion, 1.8});
      frequency_axis(p, ft.data.freq_hz.front(), ft.data.freq_hz.back());
      p.y.label = "arg L (deg)";
      p.y.tick_step = 45;
      for (const auto& x : m.crossings) {
        const auto it = std::lower_bound(lc.f_hz.begin(), lc.f_hz.end(), x.freq_hz);
        const std::size_t i = std::min(lph.size() - 1, static_cast<std::size_t>(it - lc.f_hz.begin()));
        // the level of -180 (mod 360) nearest the curve there
        const double m180 = -180 + 360 * std::round((lph[i] + 180) / 360);
        if (x.kind == loop::Crossing::Kind::gain)
          p.markers.push_back({"PM " + fmt("%.1f", x.margin) + "\xC2\xB0", x.freq_hz, m180 + x.margin * (lph[i] >= m180 ? 1 : -1), svg::black});
        else if (std::fabs(x.margin) < 60 && p.markers.size() < 6)
          p.markers.push_back({"GM " + fmt("%.1f", x.margin) + " dB", x.freq_hz, m180, svg::vermillion});
      }
      p.fit_y(0.02);
      p.guides.push_back({false, -180, "-180 deg", svg::vermillion});
      o << figure(p, "Phase of L; the red dotted line is &minus;180&deg;.");
    }
    {
      svg::Plot p("Nyquist plot of L", 720, 460);
      p.series.push_back({"L (positive frequencies)", re, im, svg::vermillion, 1.6});
      p.circles.push_back({"unit circle", 0, 0, 1, svg::grey, true});
      if (m.ms > 0) p.circles.push_back({"Ms circle", -1, 0, 1 / m.ms, svg::purple, true});
      p.markers.push_back({"\xE2\x88\x92" "1", -1, 0, svg::black});
      p.x.lo = -3, p.x.hi = 1.5, p.y.lo = -2, p.y.hi = 2;
      p.equal_aspect();
      p.x.label = "Re L";
      p.y.label = "Im L";
      o << figure(p, "Near the critical point &minus;1: the unit circle (dashed grey) and the circle of centre "
                     "&minus;1 and radius 1/Ms = " + fmt("%.3g", 1 / m.ms) +
                     " (purple), which L touches at the peak sensitivity; the curve is broken where it leaves the view.");
    }
    {
      svg::Plot p("Sensitivity |S| and complementary sensitivity |T|");
      p.series.push_back({"|S| = |1/(1+L)|", lc.f_hz, smag, svg::blue, 1.6});
      p.series.push_back({"|T| = |L/(1+L)|", lc.f_hz, tmag, svg::green, 1.6, true});
      frequency_axis(p, 0, 0);
      p.y.label = "magnitude (dB)";
      if (m.ms > 0 && p.x.contains(m.ms_hz)) p.markers.push_back({"Ms " + fmt("%.2f", 20 * std::log10(m.ms)) + " dB", m.ms_hz, 20 * std::log10(m.ms), svg::blue});
      if (std::isfinite(m.bandwidth_hz) && p.x.contains(m.bandwidth_hz)) {
        const cplx lb = loop_at(m.bandwidth_hz);
        p.markers.push_back({"bandwidth " + svg::si_quantity(m.bandwidth_hz, "Hz"), m.bandwidth_hz, 20 * std::log10(std::abs(lb / (1.0 + lb))), svg::green});
      }
      p.fit_y();
      p.guides.push_back({false, la.checks.size() > 2 ? la.checks[2].threshold : 6, "Ms limit", svg::vermillion});
      o << figure(p, "Disturbance (|S|) and reference (|T|) response of the closed loop; the red dotted line is the "
                     "peak-sensitivity limit.");
    }
    if (la.step) {
      const loop::StepMetrics& s = *la.step;
      svg::Plot p("Closed-loop step response (reference to output)");
      p.series.push_back({"step response", s.t, s.y, svg::blue, 1.8});
      p.x.label = "time (s)";
      p.x.lo = 0, p.x.hi = s.t.empty() ? 1 : s.t.back();
      const double final = 1 - s.steady_state_error;
      p.guides.push_back({false, final * 1.02, "+2 %"});
      p.guides.push_back({false, final * 0.98, "-2 %"});
      double t10 = NAN, t90 = NAN, y10 = NAN, y90 = NAN;
      std::size_t ipk = 0;
      for (std::size_t k = 0; k < s.y.size(); ++k) {
        if (std::isnan(t10) && s.y[k] >= 0.1 * final) t10 = s.t[k], y10 = s.y[k];
        if (std::isnan(t90) && s.y[k] >= 0.9 * final) t90 = s.t[k], y90 = s.y[k];
        if (s.y[k] > s.y[ipk]) ipk = k;
      }
      if (std::isfinite(t90)) p.markers.push_back({"90 %: rise " + svg::si_quantity(s.rise_time_s, "s"), t90, y90, svg::green});
      if (std::isfinite(t10)) p.markers.push_back({"10 %", t10, y10, svg::green});
      if (s.overshoot_pct > 0.05 && !s.y.empty())
        p.markers.push_back({"overshoot " + fmt("%.1f", s.overshoot_pct) + " %", s.t[ipk], s.y[ipk], svg::vermillion});
      if (std::isfinite(s.settling_time_s) && s.settling_time_s <= p.x.hi) {
        const auto it = std::lower_bound(s.t.begin(), s.t.end(), s.settling_time_s);
        const std::size_t k = std::min(s.y.size() - 1, static_cast<std::size_t>(it - s.t.begin()));
        p.markers.push_back({"settled (2 %) " + svg::si_quantity(s.settling_time_s, "s"), s.t[k], s.y[k], svg::black});
      }
      p.y.label = "output / reference step";
      p.fit_y();
      o << figure(p, "Unit reference step through the closed loop on the model (delay exact); rise 10&ndash;90 %, "
                     "settling to within 2 % of the final value (dotted lines).");
    } else {
      o << "<p>No step response: " << esc(la.step_note) << ".</p>\n";
    }
    // margins table, model and FRF side by side
    const LoopAnalysis* lf = d.loop_frf;
    const auto pm_row = [&](const std::string& name, double v_model, double v_frf, double sd, const char* f, const std::string& unit) {
      std::string c2 = fmt(f, v_model), c3 = lf ? fmt(f, v_frf) : "&ndash;";
      if (lf && lf->crossover_above_band && !std::isfinite(v_frf)) c3 = "unknown (|L| &ge; 1 at the top of the band)";
      if (lf && std::isfinite(sd)) c3 += " &plusmn; " + fmt(f, sd);
      return row({name + " (" + unit + ")", c2, c3});
    };
    o << "<h3>Margins</h3>\n<table><tr><th>figure</th><th>on the model</th><th>on the measured FRF (&plusmn; 1 s.d. "
         "from its random error)</th></tr>\n"
      << pm_row("phase margin", m.phase_margin_deg, lf ? lf->m.phase_margin_deg : NAN, lf ? lf->fm.pm_sd_deg : NAN, "%.2f", "deg")
      << pm_row("gain crossover", m.crossover_hz, lf ? lf->m.crossover_hz : NAN, lf ? lf->fm.crossover_sd_hz : NAN, "%.4g", "Hz")
      << pm_row("gain margin", m.gain_margin_db, lf ? lf->m.gain_margin_db : NAN, lf ? lf->fm.gm_sd_db : NAN, "%.2f", "dB")
      << pm_row("phase crossover", m.gain_margin_hz, lf ? lf->m.gain_margin_hz : NAN, NAN, "%.4g", "Hz")
      << pm_row("delay margin", m.delay_margin_s * 1e3, lf ? lf->m.delay_margin_s * 1e3 : NAN, NAN, "%.4g", "ms")
      << pm_row("peak sensitivity Ms", 20 * std::log10(m.ms), lf ? 20 * std::log10(lf->m.ms) : NAN, lf ? lf->fm.ms_sd_db : NAN, "%.2f", "dB")
      << pm_row("peak |T|", 20 * std::log10(m.mt), lf ? 20 * std::log10(lf->m.mt) : NAN, NAN, "%.2f", "dB")
      << pm_row("closed-loop bandwidth (|T| &minus;3 dB)", m.bandwidth_hz, lf ? lf->m.bandwidth_hz : NAN, NAN, "%.4g", "Hz");
    if (la.step)
      o << row({"step: rise 10&ndash;90 % / overshoot / settling 2 %",
                (std::isfinite(la.step->rise_time_s) ? fmt("%.4g", la.step->rise_time_s * 1e3) + " ms" : std::string("none")) + " / " + fmt("%.3g", la.step->overshoot_pct) + " % / " +
                    fmt("%.4g", la.step->settling_time_s * 1e3) + " ms",
                "&ndash;"});
    o << row({"closed loop stable", la.st.judged ? (la.st.stable ? "yes" : "<span class=\"fail\">NO</span>") : "not judged",
              lf ? (lf->st.judged ? (lf->st.stable ? "yes" : "<span class=\"fail\">NO</span>") : "not judged") : "&ndash;"});
    o << "</table>\n<p>" << esc(la.st.reason) << "</p>\n";
    if (lf) {
      o << "<p>On the measured FRF: " << lf->fm.lines << " lines used, " << lf->fm.left_out
        << " left out (random error above 25 % or low coherence); spreads from " << lf->fm.draws
        << " Monte Carlo draws of the FRF within its random error.</p>\n";
    }
    o << "<h3>Verdict</h3>\n<table><tr><th>check</th><th>threshold</th><th>value</th><th>result</th></tr>\n";
    for (const auto& k : la.checks)
      o << "<tr><td>" << esc(k.name) << "</td><td class=\"n\">" << fmt("%.4g", k.threshold) << "</td><td class=\"n\">"
        << fmt("%.4g", k.value) << "</td><td class=\"" << (k.pass ? "pass\">pass" : "fail\">fail") << "</td></tr>\n";
    o << "<tr><td>closed loop stable</td><td>&ndash;</td><td>" << (la.st.judged ? (la.st.stable ? "yes" : "no") : "not judged")
      << "</td><td class=\"" << (la.st.judged && la.st.stable ? "pass\">pass" : "fail\">fail") << "</td></tr>\n";
    o << "<tr><th colspan=\"3\">overall</th><th class=\"" << (la.pass ? "pass\">PASS" : "fail\">FAIL") << "</th></tr></table>\n";
    o << "<p>" << esc(kLoopCaution) << "</p>\n";
  }

  // ---- proposed tuning (report --tune) ----
  if (d.tune || !d.tune_note.empty()) {
    o << "<h2>Proposed tuning</h2>\n";
    if (!d.tune) {
      o << "<p class=\"fail\">No proposal: " << esc(d.tune_note) << "</p>\n";
    } else {
      const loop::TuneResult& r = d.tune->r;
      const LoopAnalysis& a = *d.tuned;
      o << "<p>" << esc(r.method) << ". Proposal: <code>" << esc(r.spec) << "</code>";
      for (const std::string& n : r.notes) o << "; " << esc(n);
      o << ".</p>\n";
      const LoopAnalysis* b = d.loop;
      const auto cell = [](double v, const char* f) { return std::isfinite(v) ? fmt(f, v) : std::string("none"); };
      o << "<table><tr><th>figure</th><th>before" << (b ? " (<code>" + esc(b->controller) + "</code>)" : std::string(" (no controller given)"))
        << "</th><th>after (proposal)</th></tr>\n";
      const auto both = [&](const std::string& name, double vb, double va, const char* f) {
        o << row({name, b ? cell(vb, f) : std::string("&ndash;"), cell(va, f)});
      };
      both("phase margin (deg)", b ? b->m.phase_margin_deg : NAN, a.m.phase_margin_deg, "%.2f");
      both("gain crossover (Hz)", b ? b->m.crossover_hz : NAN, a.m.crossover_hz, "%.4g");
      both("gain margin (dB)", b ? b->m.gain_margin_db : NAN, a.m.gain_margin_db, "%.2f");
      both("delay margin (ms)", b ? b->m.delay_margin_s * 1e3 : NAN, a.m.delay_margin_s * 1e3, "%.4g");
      both("peak sensitivity Ms (dB)", b ? 20 * std::log10(b->m.ms) : NAN, 20 * std::log10(a.m.ms), "%.2f");
      both("closed-loop bandwidth (Hz)", b ? b->m.bandwidth_hz : NAN, a.m.bandwidth_hz, "%.4g");
      if (a.step)
        both("step overshoot (%)", b && b->step ? b->step->overshoot_pct : NAN, a.step->overshoot_pct, "%.3g");
      const auto verdict = [](const LoopAnalysis* x) {
        return x ? std::string(x->pass ? "<span class=\"pass\">pass</span>" : "<span class=\"fail\">FAIL</span>") : std::string("&ndash;");
      };
      o << row({"verdict", verdict(b), verdict(&a)}, false);
      o << "</table>\n";
      if (d.tune->json.value("objective", "") == "integral")
        o << "<p class=\"sub\">The integral objective tunes for load disturbances, not for the reference step: its "
             "overshoot is usually shaped afterwards by set-point weighting or a reference prefilter, which leave "
             "these margins unchanged (Astrom &amp; Hagglund, Advanced PID Control, 2006).</p>\n";
      // |L| and the step response, before and after, on the fitted model
      {
        const loop::Controller ca = loop::parse_controller(r.spec);
        const std::vector<double> fg = log_grid(f_lo, f_hi, 1000);
        std::vector<double> mag_after, mag_before;
        std::unique_ptr<loop::Controller> cb;
        if (b) cb = std::make_unique<loop::Controller>(loop::parse_controller(b->controller));
        for (double f : fg) {
          mag_after.push_back(20 * std::log10(std::abs(model.response(f) * ca.model.response(f))));
          if (cb) mag_before.push_back(20 * std::log10(std::abs(model.response(f) * cb->model.response(f))));
        }
        svg::Plot p("Tuning: loop gain |L| before and after");
        if (cb) p.series.push_back({"before", fg, mag_before, svg::blue, 1.6, true});
        p.series.push_back({"after (proposal)", fg, mag_after, svg::vermillion, 1.8});
        frequency_axis(p, ft.data.freq_hz.front(), ft.data.freq_hz.back());
        p.y.label = "|L| (dB)";
        p.guides.push_back({false, 0, "0 dB"});
        if (std::isfinite(a.m.crossover_hz))
          p.markers.push_back({"after: crossover " + svg::si_quantity(a.m.crossover_hz, "Hz") + ", PM " +
                                   fmt("%.1f", a.m.phase_margin_deg) + "\xC2\xB0", a.m.crossover_hz, 0.0, svg::black});
        if (b && std::isfinite(b->m.crossover_hz))
          p.markers.push_back({"before: crossover " + svg::si_quantity(b->m.crossover_hz, "Hz"), b->m.crossover_hz, 0.0, svg::blue});
        p.fit_y();
        o << figure(p, "Loop gain on the fitted model with the controller given (dashed) and with the proposal (line); "
                       "dotted verticals bound the fitted band, where the model is evidence.");
      }
      if (a.step) {
        svg::Plot p("Tuning: closed-loop step before and after");
        if (b && b->step) p.series.push_back({"before", b->step->t, b->step->y, svg::blue, 1.6, true});
        p.series.push_back({"after (proposal)", a.step->t, a.step->y, svg::vermillion, 1.8});
        p.x.label = "time (s)";
        p.x.lo = 0;
        p.x.hi = a.step->t.empty() ? 1 : a.step->t.back();
        if (b && b->step && !b->step->t.empty()) p.x.hi = std::max(p.x.hi, b->step->t.back());
        p.y.label = "output / reference step";
        p.fit_y();
        o << figure(p, "Unit reference step through the closed loop on the model, before (dashed) and after (line); "
                       "each is simulated until it has settled.");
      }
      if (!a.outside_band.empty()) {
        o << "<p>Outside the fitted band:";
        for (const auto& w : a.outside_band) o << " " << esc(w) << ";";
        o << " the model is not evidence there.</p>\n";
      }
      o << "<p><strong>Caution:</strong> " << esc(kTuneCaution) << "</p>\n";
    }
  }

  // ---- limits ----
  o << "<h2>Limits of validity</h2>\n<ul>\n";
  o << "<li>The model was fitted between " << fmt("%.4g", ft.data.freq_hz.front()) << " and "
    << fmt("%.4g", ft.data.freq_hz.back()) << " Hz; outside that band it is an extrapolation.</li>\n";
  std::size_t low = 0;
  for (std::uint8_t r : frf.reliable) low += r ? 0 : 1;
  o << "<li>" << low << " of " << frf.size() << " lines have coherence below the zero-coherence bound ("
    << fmt("%.3g", frf.coherence_bound) << ") and were not fitted.</li>\n";
  if (d.loop)
    for (const auto& s : d.loop->outside_band) o << "<li>" << esc(s) << "</li>\n";
  for (const auto& w : frf.warnings) o << "<li>" << esc(w) << "</li>\n";
  for (const auto& w : ft.warnings) o << "<li>" << esc(w) << "</li>\n";
  o << "</ul>\n";
  if (!d.files.empty()) {
    o << "<h2>Files</h2>\n<table>\n";
    for (const auto& [path, what] : d.files) o << row({"<code>" + esc(path) + "</code>", esc(what)}, false);
    o << "</table>\n";
  }
  o << "<p class=\"sub\">Made by benchid. Demo recordings are invented and labelled as such.</p>\n</body></html>\n";
  return o.str();
}

}  // namespace benchid::cli
