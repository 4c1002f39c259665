// A small SVG plot writer for the HTML report: linear or log axes with 1-2-5
// ticks, SI-prefixed tick labels, grid, lines, error bands, labelled markers,
// circles and a legend. Colours are the Okabe-Ito palette (Okabe & Ito 2008,
// "Color Universal Design"; hex values from memory), distinguishable with the common colour-vision
// deficiencies; every series also differs in width or dash, so a grey print
// still tells them apart.
//
// Plots are data: each <svg class="plot"> carries its axis transforms as
// data-x / data-y = "lin|log LO HI PX0 PX1", each curve is a <path
// data-series="NAME"> of its points in pixels (no smoothing, no clamping: a
// point outside the axis range breaks the line instead), and each marker a
// <g data-marker="LABEL" data-at="X Y"> so a test can map everything back to
// the numbers it came from.
#pragma once

#include <string>
#include <vector>

namespace benchid::cli::svg {

// Text for an XML attribute or element: < > & " escaped.
std::string xml_escape(const std::string& s);

// Palette indices (Okabe-Ito).
enum Colour { black, orange, sky, green, yellow, blue, vermillion, purple, grey };
const char* colour_hex(Colour c);

struct Axis {
  std::string label;       // with its unit, e.g. "frequency (Hz)"
  bool log = false;
  double lo = 0, hi = 1;   // data range
  double px0 = 0, px1 = 1; // pixel positions of lo and hi (y: px0 is the bottom)
  double tick_step = 0;    // linear axis: ticks at multiples of this (e.g. 45 deg); 0: 1-2-5
  double to_px(double v) const;
  double from_px(double p) const;
  bool contains(double v) const;
};

// Ticks at 1, 2 or 5 times a power of ten, about `target` of them, covering [lo, hi].
std::vector<double> linear_ticks(double lo, double hi, int target = 6);
// Decades inside [lo, hi] as major ticks; 2 and 5 of each decade as minor ticks.
struct LogTicks {
  std::vector<double> major, minor;
};
LogTicks log_ticks(double lo, double hi);
// Range [lo, hi] widened to whole 1-2-5 ticks (linear), or out to the nearest
// 1, 2 or 5 times a power of ten (log).
void nice_range(double& lo, double& hi, bool log);
// Tick label: SI prefix from 1000 up and below 0.001 (1500 -> "1.5k", 2e-6 -> "2µ"),
// plain in between (0.25, 100, -45); at most 3 significant digits.
std::string si_format(double v);
// A value with its unit and an SI prefix, 3 significant digits: (0.00143, "s") -> "1.43 ms",
// (133.3, "Hz") -> "133 Hz", (2500, "Hz") -> "2.5 kHz".
std::string si_quantity(double v, const std::string& unit);

struct Series {
  std::string name;  // legend text
  std::vector<double> x, y;
  Colour colour = blue;
  double width = 1.6;
  bool dashed = false;
  bool dots = false;  // draw points (small circles) instead of a line
  bool autoscale = true;  // counts for fit_y (false: drawn where it falls inside the range)
};
struct Band {  // shaded area between lo and hi (e.g. an error band)
  std::string name;
  std::vector<double> x, lo, hi;
  Colour colour = sky;
};
struct Marker {
  std::string label;
  double x = 0, y = 0;
  Colour colour = black;
};
struct Circle {  // in data units; needs equal scales on both axes to look round
  std::string name;
  double cx = 0, cy = 0, r = 1;
  Colour colour = grey;
  bool dashed = true;
};
struct Guide {  // a horizontal or vertical reference line across the plot
  bool vertical = false;
  double at = 0;
  std::string label;
  Colour colour = grey;
};

class Plot {
 public:
  Plot(std::string title, double width_px = 720, double height_px = 300);
  Axis x, y;
  std::vector<Band> bands;
  std::vector<Series> series;
  std::vector<Circle> circles;
  std::vector<Guide> guides;
  std::vector<Marker> markers;
  // Set an axis range from the data (finite values), widened to nice ticks;
  // y on a log axis is not supported (magnitudes are plotted in dB).
  void fit_x(bool log);
  void fit_y(double pad_fraction = 0.05);
  // The same from a given data range (what must be seen); the rest breaks off at the frame.
  void fit_y_range(double lo, double hi, double pad_fraction = 0.05);
  // Equal data-per-pixel on both axes around the given ranges (Nyquist).
  void equal_aspect();
  std::string render() const;

 private:
  std::string title_;
  double width_, height_;
};

}  // namespace benchid::cli::svg
