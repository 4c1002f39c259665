#include "ident/window.h"

#include <cmath>
#include <numbers>

#include "ident/error.h"

namespace benchid::ident {

Window parse_window(const std::string& name) {
  if (name == "rect" || name == "rectangular" || name == "boxcar") return Window::rect;
  if (name == "hann" || name == "hanning") return Window::hann;
  if (name == "hamming") return Window::hamming;
  if (name == "blackmanharris") return Window::blackmanharris;
  if (name == "flattop") return Window::flattop;
  throw InputError("window '" + name + "' is unknown; expected rect, hann, hamming, " +
                   "blackmanharris or flattop");
}

const char* window_name(Window w) {
  switch (w) {
    case Window::rect: return "rect";
    case Window::hann: return "hann";
    case Window::hamming: return "hamming";
    case Window::blackmanharris: return "blackmanharris";
    case Window::flattop: return "flattop";
  }
  return "?";
}

namespace {
std::vector<double> cosine_sum(const std::vector<double>& a, std::size_t n) {
  std::vector<double> w(n);
  const double step = 2.0 * std::numbers::pi / static_cast<double>(n);
  for (std::size_t i = 0; i < n; ++i) {
    double v = 0, sign = 1;
    for (std::size_t k = 0; k < a.size(); ++k, sign = -sign)
      v += sign * a[k] * std::cos(step * static_cast<double>(k * i % n));
    w[i] = v;
  }
  return w;
}
}  // namespace

std::vector<double> make_window(Window w, std::size_t n) {
  switch (w) {
    case Window::rect: return std::vector<double>(n, 1.0);
    case Window::hann: return cosine_sum({0.5, 0.5}, n);
    case Window::hamming: return cosine_sum({0.54, 0.46}, n);
    case Window::blackmanharris: return cosine_sum({0.35875, 0.48829, 0.14128, 0.01168}, n);
    case Window::flattop:
      return cosine_sum({0.21557895, 0.41663158, 0.277263158, 0.083578947, 0.006947368}, n);
  }
  return {};
}

WindowFigures window_figures(const std::vector<double>& w) {
  WindowFigures f;
  for (double v : w) {
    f.sum_w += v;
    f.sum_w2 += v * v;
  }
  const double n = static_cast<double>(w.size());
  f.coherent_gain = f.sum_w / n;
  f.enbw_bins = n * f.sum_w2 / (f.sum_w * f.sum_w);
  return f;
}

double overlap_correlation(const std::vector<double>& w, std::size_t shift) {
  if (shift >= w.size()) return 0.0;
  double num = 0, den = 0;
  for (std::size_t i = 0; i < w.size(); ++i) {
    den += w[i] * w[i];
    if (i + shift < w.size()) num += w[i] * w[i + shift];
  }
  return num / den;
}

double effective_averages(const std::vector<double>& w, std::size_t hop, std::size_t segments) {
  if (segments == 0) return 0.0;
  const double k = static_cast<double>(segments);
  double factor = 1.0;
  for (std::size_t j = 1; j < segments; ++j) {
    const double rho = overlap_correlation(w, j * hop);
    if (rho == 0.0) break;
    factor += 2.0 * (k - static_cast<double>(j)) / k * rho * rho;
  }
  return k / factor;
}

}  // namespace benchid::ident
