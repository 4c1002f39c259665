// Times benchid tune: PID (and PI) on a 30-pole model, and PID on a
// 5000-line measured FRF. Usage: benchid_bench_tune [REPEAT]
// prints: what median_s, and the plant written for tune_bench.py (SciPy,
// MIGO PI by exact intervals on the same plant) beside it.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <vector>

#include "fit/model_json.h"
#include "loop/tune.h"

using namespace benchid;

namespace {

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v[v.size() / 2];
}

template <class F>
double time_median(int repeat, F f) {
  std::vector<double> t;
  for (int i = 0; i < repeat; ++i) {
    const auto a = std::chrono::steady_clock::now();
    f();
    t.push_back(std::chrono::duration<double>(std::chrono::steady_clock::now() - a).count());
  }
  return median(t);
}

}  // namespace

int main(int argc, char** argv) {
  const int repeat = argc > 1 ? std::atoi(argv[1]) : 5;
  // 30 poles: a lag at 20 Hz, 14 modes from 150 Hz to 8 kHz (damping 0.02
  // to 0.1) with alternating residue signs, and a real pole at 20 kHz; 0.2 ms delay
  fit::RationalModel p;
  const auto add = [&](fit::cplx pole, fit::cplx r) {
    p.poles.push_back(pole);
    p.residues.push_back(r);
    if (pole.imag() != 0) {
      p.poles.push_back(std::conj(pole));
      p.residues.push_back(std::conj(r));
    }
  };
  add(fit::cplx(-2 * M_PI * 20, 0), fit::cplx(2 * M_PI * 20, 0));
  for (int i = 0; i < 14; ++i) {
    const double w = 2 * M_PI * 150 * std::pow(8000.0 / 150, i / 13.0), z = 0.02 + 0.08 * (i % 3) / 2;
    add(fit::cplx(-z * w, w * std::sqrt(1 - z * z)), fit::cplx(0, (i % 2 ? 1 : -1) * 0.05 * w / (i + 1)));
  }
  add(fit::cplx(-2 * M_PI * 20000, 0), fit::cplx(2 * M_PI * 20000 * 0.01, 0));
  p.delay_s = 0.0002;
  std::printf("plant: %zu poles\n", p.order());
  std::ofstream("tune_bench_plant.model.json") << fit::model_json(p);
  loop::TuneResult r;
  loop::TuneOptions o;
  o.structure = loop::TuneStructure::pid;
  const double t_pid = time_median(repeat, [&] { r = loop::tune_model(p, o); });
  std::printf("tune PID, 30-pole model       median %.3f s  (found %d, %s, %zu candidates)\n", t_pid, r.found,
              r.spec.c_str(), r.candidates);
  o.structure = loop::TuneStructure::pi;
  o.pm_min_deg = 0;
  o.gm_min_db = 0;
  o.ms_max_db = 20 * std::log10(2.0);
  const double t_pi = time_median(repeat, [&] { r = loop::tune_model(p, o); });
  std::printf("tune PI (MIGO, Ms 2 only), 30-pole model  median %.3f s  (ki %.6g; SciPy side by side: tune_bench.py)\n",
              t_pi, r.ki);
  // 5000-line FRF of the same plant, 1 % random error
  ident::Frf f;
  for (int i = 1; i <= 5000; ++i) {
    const double hz = 2.0 * i;
    f.freq_hz.push_back(hz);
    f.h.push_back(p.response(hz));
    f.coherence.push_back(0.999);
    f.rel_err.push_back(0.01);
    f.reliable.push_back(1);
  }
  o = {};
  o.structure = loop::TuneStructure::pid;
  const double t_frf = time_median(repeat, [&] { r = loop::tune_frf(f, o); });
  std::printf("tune PID, 5000-line FRF       median %.3f s  (found %d, %s)\n", t_frf, r.found, r.spec.c_str());
  return 0;
}
