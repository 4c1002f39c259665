#include "cli/svg_plot.h"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <limits>
#include <sstream>

namespace benchid::cli::svg {

namespace {

constexpr double kLeftPx = 62, kRightPx = 14, kTopPx = 44, kBottomPx = 40;

std::string num(double v) {  // pixel coordinate: 2 decimals are 1/100 px
  char b[32];
  std::snprintf(b, sizeof b, "%.2f", v);
  return b;
}

std::string full(double v) {  // data value in an attribute
  char b[40];
  std::snprintf(b, sizeof b, "%.10g", v);
  return b;
}

}  // namespace

std::string xml_escape(const std::string& s) {
  std::string o;
  for (char c : s) {
    if (c == '<') o += "&lt;";
    else if (c == '>') o += "&gt;";
    else if (c == '&') o += "&amp;";
    else if (c == '"') o += "&quot;";
    else o += c;
  }
  return o;
}

namespace {

double nice_step(double span, int target) {
  const double raw = span / std::max(1, target);
  const double p = std::pow(10.0, std::floor(std::log10(raw)));
  for (double m : {1.0, 2.0, 5.0, 10.0})
    if (m * p >= raw * (1 - 1e-9)) return m * p;
  return 10 * p;
}

// A linear tick's label: as many decimals as the step needs (2.125, 2.130 for
// a step of 0.005), SI prefixes beyond 1000 and below 0.001.
std::string tick_label(double v, double step) {
  const double a = std::fabs(v);
  if (v == 0) return "0";
  if (a >= 1000 || a < 1e-3) return si_format(v);
  int decimals = 0;  // enough that every multiple of the step prints exactly (0.25 -> 2, 0.005 -> 3)
  while (decimals < 6) {
    const double scaled = step * std::pow(10.0, decimals);
    if (std::fabs(scaled - std::round(scaled)) < 1e-6 * scaled) break;
    ++decimals;
  }
  char b[32];
  std::snprintf(b, sizeof b, "%.*f", decimals, v);
  return b;
}

}  // namespace

const char* colour_hex(Colour c) {
  switch (c) {
    case black: return "#000000";
    case orange: return "#E69F00";
    case sky: return "#56B4E9";
    case green: return "#009E73";
    case yellow: return "#F0E442";
    case blue: return "#0072B2";
    case vermillion: return "#D55E00";
    case purple: return "#CC79A7";
    case grey: return "#777777";
  }
  return "#000000";
}

double Axis::to_px(double v) const {
  const double t = log ? (std::log10(v) - std::log10(lo)) / (std::log10(hi) - std::log10(lo)) : (v - lo) / (hi - lo);
  return px0 + t * (px1 - px0);
}

double Axis::from_px(double p) const {
  const double t = (p - px0) / (px1 - px0);
  return log ? std::pow(10.0, std::log10(lo) + t * (std::log10(hi) - std::log10(lo))) : lo + t * (hi - lo);
}

bool Axis::contains(double v) const {
  if (!std::isfinite(v) || (log && !(v > 0))) return false;
  const double tol = 1e-9 * (hi - lo);
  return v >= lo - tol && v <= hi + tol;
}

std::vector<double> linear_ticks(double lo, double hi, int target) {
  std::vector<double> t;
  if (!(hi > lo) || !std::isfinite(lo) || !std::isfinite(hi)) return t;
  const double step = nice_step(hi - lo, target);
  for (double k = std::ceil(lo / step - 1e-9); k * step <= hi + 1e-9 * step; k += 1) {
    const double v = k * step;
    t.push_back(std::fabs(v) < 1e-12 * step ? 0.0 : v);
  }
  return t;
}

LogTicks log_ticks(double lo, double hi) {
  LogTicks t;
  if (!(lo > 0) || !(hi > lo)) return t;
  for (int e = static_cast<int>(std::floor(std::log10(lo))); e <= static_cast<int>(std::ceil(std::log10(hi))); ++e) {
    const double d = std::pow(10.0, e);
    if (d >= lo * (1 - 1e-9) && d <= hi * (1 + 1e-9)) t.major.push_back(d);
    for (double m : {2.0, 5.0})
      if (m * d >= lo * (1 - 1e-9) && m * d <= hi * (1 + 1e-9)) t.minor.push_back(m * d);
  }
  return t;
}

void nice_range(double& lo, double& hi, bool log) {
  if (log) {  // out to the nearest 1, 2 or 5 times a power of ten
    const double dl = std::pow(10.0, std::floor(std::log10(lo) + 1e-9));
    double l = dl;
    for (double m : {2.0, 5.0})
      if (m * dl <= lo * (1 + 1e-9)) l = m * dl;
    const double dh = std::pow(10.0, std::floor(std::log10(hi) - 1e-9));
    double h = 10 * dh;
    for (double m : {5.0, 2.0, 1.0})
      if (m * dh >= hi * (1 - 1e-9)) h = m * dh;
    lo = l, hi = h;
    if (!(hi > lo)) hi = lo * 10;
    return;
  }
  if (!(hi > lo)) {
    const double w = lo == 0 ? 1 : std::fabs(lo) * 0.1;
    lo -= w, hi += w;
  }
  const double step = nice_step(hi - lo, 6);
  lo = std::floor(lo / step + 1e-9) * step;
  hi = std::ceil(hi / step - 1e-9) * step;
}

std::string si_format(double v) {
  if (v == 0 || !std::isfinite(v)) return v == 0 ? "0" : "";
  static const char* prefixes[] = {"p", "n", "\xC2\xB5", "m", "", "k", "M", "G"};
  const double a = std::fabs(v);
  int e3 = static_cast<int>(std::floor(std::log10(a) / 3 + 1e-9));
  e3 = std::clamp(e3, -4, 3);
  if (a >= 1e-3 * (1 - 1e-9) && a < 1e3) e3 = 0;
  const double m = v / std::pow(1000.0, e3);
  char b[32];
  std::snprintf(b, sizeof b, "%.3g", m);
  return std::string(b) + prefixes[e3 + 4];
}

std::string si_quantity(double v, const std::string& unit) {
  if (!std::isfinite(v)) return "";
  static const char* prefixes[] = {"p", "n", "\xC2\xB5", "m", "", "k", "M", "G"};
  const int e3 = v == 0 ? 0 : std::clamp(static_cast<int>(std::floor(std::log10(std::fabs(v)) / 3 + 1e-9)), -4, 3);
  char b[32];
  std::snprintf(b, sizeof b, "%.3g", v / std::pow(1000.0, e3));
  return std::string(b) + " " + prefixes[e3 + 4] + unit;
}

Plot::Plot(std::string title, double width_px, double height_px)
    : title_(std::move(title)), width_(width_px), height_(height_px) {
  x.px0 = kLeftPx;
  x.px1 = width_ - kRightPx;
  y.px0 = height_ - kBottomPx;
  y.px1 = kTopPx;
}

void Plot::fit_x(bool log) {
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (const auto& s : series)
    for (double v : s.x)
      if (std::isfinite(v) && (!log || v > 0)) lo = std::min(lo, v), hi = std::max(hi, v);
  if (!std::isfinite(lo)) lo = log ? 1 : 0, hi = log ? 10 : 1;
  x.log = log;
  nice_range(lo, hi, log);
  x.lo = lo, x.hi = hi;
}

void Plot::fit_y(double pad_fraction) {
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  auto take = [&](const std::vector<double>& xs, const std::vector<double>& ys) {
    for (std::size_t i = 0; i < ys.size() && i < xs.size(); ++i)
      if (std::isfinite(ys[i]) && x.contains(xs[i])) lo = std::min(lo, ys[i]), hi = std::max(hi, ys[i]);
  };
  for (const auto& s : series)
    if (s.autoscale) take(s.x, s.y);
  for (const auto& b : bands) take(b.x, b.lo), take(b.x, b.hi);
  for (const auto& m : markers)
    if (std::isfinite(m.y) && x.contains(m.x)) lo = std::min(lo, m.y), hi = std::max(hi, m.y);
  if (!std::isfinite(lo)) lo = 0, hi = 1;
  fit_y_range(lo, hi, pad_fraction);
}

void Plot::fit_y_range(double lo, double hi, double pad_fraction) {
  const double pad = (hi - lo) * pad_fraction;
  lo -= pad, hi += pad;
  if (y.tick_step > 0) {
    lo = std::floor(lo / y.tick_step) * y.tick_step;
    hi = std::ceil(hi / y.tick_step) * y.tick_step;
    if (!(hi > lo)) hi = lo + y.tick_step;
  } else {
    nice_range(lo, hi, false);
  }
  y.log = false;
  y.lo = lo, y.hi = hi;
}

void Plot::equal_aspect() {
  const double wpx = std::fabs(x.px1 - x.px0), hpx = std::fabs(y.px1 - y.px0);
  const double per_px = std::max((x.hi - x.lo) / wpx, (y.hi - y.lo) / hpx);
  const double cx = (x.lo + x.hi) / 2, cy = (y.lo + y.hi) / 2;
  x.lo = cx - per_px * wpx / 2, x.hi = cx + per_px * wpx / 2;
  y.lo = cy - per_px * hpx / 2, y.hi = cy + per_px * hpx / 2;
}

std::string Plot::render() const {
  std::ostringstream o;
  const auto axis_attr = [](const Axis& a) {
    return std::string(a.log ? "log " : "lin ") + full(a.lo) + " " + full(a.hi) + " " + full(a.px0) + " " + full(a.px1);
  };
  o << "<svg class=\"plot\" viewBox=\"0 0 " << num(width_) << " " << num(height_)
    << "\" role=\"img\" aria-label=\"" << xml_escape(title_) << "\" data-x=\"" << axis_attr(x) << "\" data-y=\""
    << axis_attr(y) << "\">\n";
  o << "<title>" << xml_escape(title_) << "</title>\n";
  const double left = x.px0, right = x.px1, top = y.px1, bottom = y.px0;
  o << "<rect class=\"frame\" x=\"" << num(left) << "\" y=\"" << num(top) << "\" width=\"" << num(right - left)
    << "\" height=\"" << num(bottom - top) << "\"/>\n";
  // grid and tick labels
  const auto vgrid = [&](double v, bool major, const std::string& text) {
    const double p = x.to_px(v);
    o << "<line class=\"" << (major ? "grid" : "grid minor") << "\" x1=\"" << num(p) << "\" y1=\"" << num(top)
      << "\" x2=\"" << num(p) << "\" y2=\"" << num(bottom) << "\"/>\n";
    if (!text.empty())
      o << "<text class=\"tick\" x=\"" << num(p) << "\" y=\"" << num(bottom + 14) << "\" text-anchor=\"middle\">"
        << text << "</text>\n";
  };
  const auto hgrid = [&](double v, const std::string& text) {
    const double p = y.to_px(v);
    o << "<line class=\"grid\" x1=\"" << num(left) << "\" y1=\"" << num(p) << "\" x2=\"" << num(right) << "\" y2=\""
      << num(p) << "\"/>\n";
    o << "<text class=\"tick\" x=\"" << num(left - 5) << "\" y=\"" << num(p + 4) << "\" text-anchor=\"end\">"
      << text << "</text>\n";
  };
  if (x.log) {
    const LogTicks t = log_ticks(x.lo, x.hi);
    const bool few = t.major.size() <= 2;  // label 2 and 5 too when there are few decades
    for (double v : t.minor) vgrid(v, false, few ? si_format(v) : std::string());
    for (double v : t.major) vgrid(v, true, si_format(v));
  } else {
    const std::vector<double> xt = linear_ticks(x.lo, x.hi, 8);
    const double step = xt.size() > 1 ? xt[1] - xt[0] : 1;
    for (double v : xt) vgrid(v, true, tick_label(v, step));
  }
  std::vector<double> yt;
  if (y.tick_step > 0) {
    double step = y.tick_step;  // doubled until the count is readable (45 -> 90 -> 180 ...)
    while ((y.hi - y.lo) / step > 9) step *= 2;
    for (double k = std::ceil(y.lo / step - 1e-9); k * step <= y.hi + 1e-9 * step; k += 1) yt.push_back(k * step);
  } else {
    yt = linear_ticks(y.lo, y.hi, 5);
  }
  const double ystep = yt.size() > 1 ? yt[1] - yt[0] : 1;
  for (double v : yt) hgrid(v, tick_label(v, ystep));
  o << "<text class=\"label\" x=\"" << num((left + right) / 2) << "\" y=\"" << num(height_ - 6)
    << "\" text-anchor=\"middle\">" << xml_escape(x.label) << "</text>\n";
  o << "<text class=\"label\" transform=\"translate(14 " << num((top + bottom) / 2)
    << ") rotate(-90)\" text-anchor=\"middle\">" << xml_escape(y.label) << "</text>\n";
  o << "<text class=\"title\" x=\"" << num(left) << "\" y=\"16\">" << xml_escape(title_) << "</text>\n";

  // data, clipped to the frame as a second guard (points outside already break lines)
  static std::atomic<int> plot_id{0};  // clip-path ids unique in a page
  const std::string clip = "clip" + std::to_string(++plot_id);
  o << "<clipPath id=\"" << clip << "\"><rect x=\"" << num(left) << "\" y=\"" << num(top) << "\" width=\""
    << num(right - left) << "\" height=\"" << num(bottom - top) << "\"/></clipPath>\n";
  o << "<g clip-path=\"url(#" << clip << ")\">\n";
  for (const auto& b : bands) {
    // one polygon per run of points where both edges are inside the axes
    std::vector<std::pair<double, double>> up, dn;
    auto flush = [&] {
      if (up.size() >= 2) {
        o << "<path class=\"band\" data-band=\"" << xml_escape(b.name) << "\" fill=\"" << colour_hex(b.colour) << "\" d=\"";
        for (std::size_t i = 0; i < up.size(); ++i) o << (i ? "L" : "M") << num(up[i].first) << " " << num(up[i].second);
        for (std::size_t i = dn.size(); i-- > 0;) o << "L" << num(dn[i].first) << " " << num(dn[i].second);
        o << "Z\"/>\n";
      }
      up.clear(), dn.clear();
    };
    for (std::size_t i = 0; i < b.x.size(); ++i) {
      if (x.contains(b.x[i]) && y.contains(b.lo[i]) && y.contains(b.hi[i])) {
        up.emplace_back(x.to_px(b.x[i]), y.to_px(b.hi[i]));
        dn.emplace_back(x.to_px(b.x[i]), y.to_px(b.lo[i]));
      } else {
        flush();
      }
    }
    flush();
  }
  for (const auto& c : circles) {
    const double rx = std::fabs(x.to_px(c.cx + c.r) - x.to_px(c.cx)), ry = std::fabs(y.to_px(c.cy + c.r) - y.to_px(c.cy));
    o << "<ellipse class=\"circle\" data-circle=\"" << xml_escape(c.name) << "\" data-at=\"" << full(c.cx) << " " << full(c.cy)
      << " " << full(c.r) << "\" cx=\"" << num(x.to_px(c.cx)) << "\" cy=\"" << num(y.to_px(c.cy)) << "\" rx=\"" << num(rx)
      << "\" ry=\"" << num(ry) << "\" stroke=\"" << colour_hex(c.colour) << "\"" << (c.dashed ? " stroke-dasharray=\"5 4\"" : "")
      << "/>\n";
  }
  for (const auto& g : guides) {
    if (!(g.vertical ? x.contains(g.at) : y.contains(g.at))) continue;
    const double p = g.vertical ? x.to_px(g.at) : y.to_px(g.at);
    o << "<line class=\"guide\" data-guide=\"" << xml_escape(g.label) << "\" stroke=\"" << colour_hex(g.colour) << "\" x1=\""
      << num(g.vertical ? p : left) << "\" y1=\"" << num(g.vertical ? top : p) << "\" x2=\"" << num(g.vertical ? p : right)
      << "\" y2=\"" << num(g.vertical ? bottom : p) << "\"/>\n";
  }
  for (const auto& s : series) {
    if (s.dots) {
      o << "<g class=\"dots\" data-series=\"" << xml_escape(s.name) << "\" fill=\"" << colour_hex(s.colour) << "\">";
      for (std::size_t i = 0; i < s.x.size() && i < s.y.size(); ++i)
        if (x.contains(s.x[i]) && y.contains(s.y[i]))
          o << "<circle cx=\"" << num(x.to_px(s.x[i])) << "\" cy=\"" << num(y.to_px(s.y[i])) << "\" r=\"2.2\"/>";
      o << "</g>\n";
      continue;
    }
    std::string d;
    bool pen = false;
    for (std::size_t i = 0; i < s.x.size() && i < s.y.size(); ++i) {
      if (!x.contains(s.x[i]) || !y.contains(s.y[i])) {
        pen = false;
        continue;
      }
      d += (pen ? "L" : "M") + num(x.to_px(s.x[i])) + " " + num(y.to_px(s.y[i]));
      pen = true;
    }
    o << "<path class=\"series\" data-series=\"" << xml_escape(s.name) << "\" stroke=\"" << colour_hex(s.colour)
      << "\" stroke-width=\"" << num(s.width) << "\"" << (s.dashed ? " stroke-dasharray=\"6 4\"" : "") << " d=\"" << d
      << "\"/>\n";
  }
  o << "</g>\n";
  // labels: the first place near the marker, alternating below and above,
  // where the text (about 6.2 px per character, 12 px high) overlaps no label
  // already placed and stays inside the frame
  struct Box {
    double x0, y0, x1, y1;
  };
  std::vector<Box> placed;
  for (const auto& m : markers) {
    if (!x.contains(m.x) || !y.contains(m.y)) continue;
    const double px = x.to_px(m.x), py = y.to_px(m.y);
    placed.push_back({px - 6, py - 6, px + 6, py + 6});
  }
  std::size_t marker_index = 0;
  for (const auto& m : markers) {
    if (!x.contains(m.x) || !y.contains(m.y)) continue;
    const double px = x.to_px(m.x), py = y.to_px(m.y);
    const bool right_half = px > (left + right) / 2;
    const double w = 6.2 * static_cast<double>(m.label.size()) + 2;
    const double tx = px + (right_half ? -8 : 8);
    const double bx0 = right_half ? tx - w : tx, bx1 = right_half ? tx : tx + w;
    double ty = py + 16;
    for (double dy : {16.0, -8.0, 30.0, -22.0, 44.0, -36.0, 58.0, -50.0}) {
      const double cand = py + dy;  // text baseline
      const Box b{bx0, cand - 11, bx1, cand + 2};
      if (b.y0 < top || b.y1 > bottom) continue;
      bool clash = false;
      for (std::size_t k = 0; k < placed.size(); ++k)
        if (k != marker_index && b.x0 < placed[k].x1 && b.x1 > placed[k].x0 && b.y0 < placed[k].y1 && b.y1 > placed[k].y0)
          clash = true;
      if (!clash) {
        ty = cand;
        break;
      }
    }
    placed.push_back({bx0, ty - 11, bx1, ty + 2});
    ++marker_index;
    o << "<g class=\"marker\" data-marker=\"" << xml_escape(m.label) << "\" data-at=\"" << full(m.x) << " " << full(m.y)
      << "\"><path d=\"M" << num(px - 5) << " " << num(py) << "L" << num(px) << " " << num(py - 5) << "L" << num(px + 5)
      << " " << num(py) << "L" << num(px) << " " << num(py + 5) << "Z\" fill=\"#ffffff\" stroke=\""
      << colour_hex(m.colour) << "\" stroke-width=\"2\"/><text class=\"mlabel\" x=\"" << num(tx) << "\" y=\""
      << num(ty) << "\" text-anchor=\"" << (right_half ? "end" : "start") << "\">" << xml_escape(m.label) << "</text></g>\n";
  }
  // legend: one row under the title, left to right
  double lx = left;
  for (const auto& b : bands) {
    o << "<rect class=\"band\" x=\"" << num(lx) << "\" y=\"25\" width=\"18\" height=\"9\" fill=\"" << colour_hex(b.colour)
      << "\"/><text class=\"legend\" x=\"" << num(lx + 22) << "\" y=\"33\">" << xml_escape(b.name) << "</text>\n";
    lx += 30 + 6.2 * static_cast<double>(b.name.size());
  }
  for (const auto& s : series) {
    if (s.dots)
      o << "<circle cx=\"" << num(lx + 9) << "\" cy=\"29.5\" r=\"2.5\" fill=\"" << colour_hex(s.colour) << "\"/>";
    else
      o << "<line x1=\"" << num(lx) << "\" y1=\"29.5\" x2=\"" << num(lx + 18) << "\" y2=\"29.5\" stroke=\""
        << colour_hex(s.colour) << "\" stroke-width=\"" << num(s.width + 0.4) << "\""
        << (s.dashed ? " stroke-dasharray=\"6 4\"" : "") << "/>";
    o << "<text class=\"legend\" x=\"" << num(lx + 22) << "\" y=\"33\">" << xml_escape(s.name) << "</text>\n";
    lx += 30 + 6.2 * static_cast<double>(s.name.size());
  }
  for (const auto& c : circles) {
    o << "<line x1=\"" << num(lx) << "\" y1=\"29.5\" x2=\"" << num(lx + 18) << "\" y2=\"29.5\" stroke=\""
      << colour_hex(c.colour) << "\" stroke-width=\"1.4\" stroke-dasharray=\"5 4\"/><text class=\"legend\" x=\""
      << num(lx + 22) << "\" y=\"33\">" << xml_escape(c.name) << "</text>\n";
    lx += 30 + 6.2 * static_cast<double>(c.name.size());
  }
  o << "</svg>\n";
  return o.str();
}

}  // namespace benchid::cli::svg
