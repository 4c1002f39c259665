// Spectral windows for Welch averaging.
//
// Conventions: periodic ("DFT-even") windows of length N, w[n] for n = 0..N-1,
// the form scipy.signal.get_window uses by default, so that a window and its
// 50 % overlapped copies tile correctly. Cosine-sum windows
//   w[n] = sum_k (-1)^k a_k cos(2 pi k n / N).
// Coefficients: Hann 0.5/0.5; Hamming 0.54/0.46; Blackman-Harris 4-term
// (-92 dB) 0.35875/0.48829/0.14128/0.01168 (Harris, Proc. IEEE 66(1), 1978);
// flat-top 5-term as scipy.signal.windows.flattop (D'Antona & Ferrero 2006).
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace benchid::ident {

enum class Window { rect, hann, hamming, blackmanharris, flattop };

// Parses "rect"/"rectangular"/"boxcar", "hann", "hamming", "blackmanharris",
// "flattop"; throws InputError naming the accepted values.
Window parse_window(const std::string& name);
const char* window_name(Window w);

// Periodic window of n >= 1 samples.
std::vector<double> make_window(Window w, std::size_t n);

// Figures of merit of a window (Harris 1978 definitions).
struct WindowFigures {
  double coherent_gain = 0;   // CG = mean(w)
  double enbw_bins = 0;       // ENBW = N sum w^2 / (sum w)^2, in DFT bins
  double sum_w = 0;           // sum w
  double sum_w2 = 0;          // sum w^2
};
WindowFigures window_figures(const std::vector<double>& w);

// Harris' overlap correlation rho(d) = sum w[n] w[n+d] / sum w^2 for a shift of
// d samples (0 <= d); 0 once d >= N.
double overlap_correlation(const std::vector<double>& w, std::size_t shift);

// Effective number of independent averages of a Welch estimate made of
// `segments` segments with hop `hop` samples (Welch, IEEE Trans. Audio
// Electroacoust. AU-15(2), 1967):  var/var1 = (1/K)[1 + 2 sum_j (K-j)/K rho(j D)^2]
// with rho the overlap correlation, n_eff = K / [1 + 2 sum_j (K-j)/K rho(jD)^2].
double effective_averages(const std::vector<double>& w, std::size_t hop, std::size_t segments);

}  // namespace benchid::ident
