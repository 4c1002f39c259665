// Times vector fitting on synthetic FRFs: an order-30 plant (15 lightly
// damped modes between 5 Hz and 5 kHz) sampled at N log-spaced lines.
// Usage: benchid_bench_fit LINES [ORDER] [REPEAT] [DUMP.csv]
// Prints: lines order iterations median_fit_ms ms_per_iteration nrmse
// (a whole fit with default options, until it converges)
// With DUMP.csv, writes the FRF (freq_hz,re,im) for a side-by-side run.
//
// Usage: benchid_bench_fit LINES sweep MAX_ORDER [REPEAT]
// times `fit --order auto` (fit_frf: sweep from orders 1 up, then the final
// fit; 1 % error bars and 1 % complex Gaussian noise, seed 1, variance
// weights, no delay) on one thread and on every core, and the fit at the
// chosen order alone (order given), one thread.
// Prints: lines max_order chosen_order median_ms_one_thread median_ms_all_cores
//         median_ms_order_given ratio_all_cores_to_given
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <string>
#include <vector>

#include "fit/fit_frf.h"
#include "fit/vector_fit.h"
#include "tests/support/plants.h"

using namespace benchid::fit;

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s LINES [ORDER] [REPEAT] [DUMP.csv]\n", argv[0]);
    return 2;
  }
  const int lines = std::atoi(argv[1]);
  const int order = argc > 2 ? std::atoi(argv[2]) : 30;
  const int repeat = argc > 3 ? std::atoi(argv[3]) : 5;
  const RationalModel t = benchid::test::fifteen_mode_plant();
  FitData d;
  for (int k = 0; k < lines; ++k) {
    const double f = 1 * std::pow(1e4, static_cast<double>(k) / (lines - 1));
    d.freq_hz.push_back(f);
    d.h.push_back(t.response(f));
    d.weight.push_back(1.0 / std::abs(d.h.back()));
  }
  if (argc > 2 && std::string(argv[2]) == "sweep") {
    const int max_order = argc > 3 ? std::atoi(argv[3]) : 40;
    const int rep = argc > 4 ? std::atoi(argv[4]) : 3;
    benchid::ident::Frf frf;
    frf.rate_hz = 40000;
    std::mt19937_64 rng(1);
    std::normal_distribution<double> g(0.0, 0.01 / std::sqrt(2.0));
    for (int k = 0; k < lines; ++k) {
      frf.freq_hz.push_back(d.freq_hz[k]);
      frf.h.push_back(d.h[k] * cplx(1 + g(rng), g(rng)));
      frf.rel_err.push_back(0.01);
      frf.coherence.push_back(0.99);
      frf.reliable.push_back(true);
    }
    FitOptions fo;
    fo.auto_order = true;
    fo.max_order = max_order;
    double med[2];
    int chosen = 0;
    for (int threads : {1, 0}) {
      fo.threads = threads;
      std::vector<double> t;
      for (int i = 0; i < rep; ++i) {
        const auto t0 = std::chrono::steady_clock::now();
        const FrfFit f = fit_frf(frf, fo);
        t.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
        chosen = static_cast<int>(f.result.model.poles.size());
      }
      std::sort(t.begin(), t.end());
      med[threads == 1 ? 0 : 1] = t[t.size() / 2];
    }
    fo.auto_order = false;
    fo.threads = 1;
    fo.vf.order = chosen;
    std::vector<double> tg;
    for (int i = 0; i < rep; ++i) {
      const auto t0 = std::chrono::steady_clock::now();
      (void)fit_frf(frf, fo);
      tg.push_back(
          std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
    }
    std::sort(tg.begin(), tg.end());
    const double given = tg[tg.size() / 2];
    std::printf("%d %d %d %.1f %.1f %.1f %.1f\n", lines, max_order, chosen, med[0], med[1], given,
                med[1] / given);
    return 0;
  }
  if (argc > 4) {
    std::FILE* out = std::fopen(argv[4], "w");
    for (int k = 0; k < lines; ++k) std::fprintf(out, "%.17g,%.17g,%.17g\n", d.freq_hz[k], d.h[k].real(), d.h[k].imag());
    std::fclose(out);
  }
  VectorFitOptions o;
  o.order = order;
  // default options: the fit runs until it converges
  std::vector<double> ms;
  FitResult r;
  for (int i = 0; i < repeat; ++i) {
    const auto t0 = std::chrono::steady_clock::now();
    r = vector_fit(d, o);
    ms.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
  }
  std::sort(ms.begin(), ms.end());
  const double med = ms[ms.size() / 2];
  std::printf("%d %d %d %.3f %.3f %.3g\n", lines, order, r.iterations, med, med / r.iterations, r.nrmse);
  return 0;
}
