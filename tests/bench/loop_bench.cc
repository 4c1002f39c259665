// Times the margins of a 200-pole loop on a 1e5-point grid with root
// refinement, the closed-loop stability count, and a 100-value gain sweep.
// Usage: benchid_bench_loop [REPEAT]   prints: what median_ms
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "loop/margins.h"
#include "loop/stability.h"

using namespace benchid;

int main(int argc, char** argv) {
  const int repeat = argc > 1 ? std::atoi(argv[1]) : 5;
  // 100 lightly damped modes from 1 Hz to 10 kHz plus an integrator: 201 poles
  fit::RationalModel p;
  for (int i = 0; i < 100; ++i) {
    const double w = 2 * M_PI * std::pow(10.0, 4.0 * i / 99), z = 0.03;
    const fit::cplx pole(-z * w, w * std::sqrt(1 - z * z)), r(0, -0.02 * w / (1 + i % 7));
    p.poles.push_back(pole);
    p.poles.push_back(std::conj(pole));
    p.residues.push_back(r);
    p.residues.push_back(std::conj(r));
  }
  p.poles.push_back(0.0);
  p.residues.push_back(50.0);
  auto time_ms = [&](auto&& fn) {
    std::vector<double> t;
    for (int i = 0; i < repeat; ++i) {
      const auto a = std::chrono::steady_clock::now();
      fn();
      t.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - a).count());
    }
    std::sort(t.begin(), t.end());
    return t[t.size() / 2];
  };
  const loop::Controller c = loop::parse_controller("pid:kp=0.5,ki=2");
  loop::MarginOptions o;
  o.points = 100000;
  loop::Margins m;
  const double t_margins = time_ms([&] { m = loop::model_margins(p, c, o); });
  const double t_stab = time_ms([&] { loop::closed_loop_stability(p, c, m.f_lo_hz, m.f_hi_hz); });
  const double t_sweep = time_ms([&] {
    // as benchid loop --sweep: the plant evaluated once on the grid
    const auto [lo, hi] = loop::loop_range(p, c, o);
    const loop::PlantOnGrid pg(p, lo, hi, o.points);
    for (int i = 0; i < 100; ++i) {
      const loop::Controller ci = loop::parse_controller("pid:kp=" + std::to_string(0.1 + 0.01 * i) + ",ki=2");
      loop::margins([&](double f) { return pg(f) * ci.model.response(f); }, lo, hi, o.points);
    }
  });
  std::printf("poles %zu grid %zu crossings %zu\n", p.poles.size(), o.points, m.crossings.size());
  std::printf("margins_ms %.1f\nstability_ms %.1f\nsweep100_ms %.1f\n", t_margins, t_stab, t_sweep);
  return 0;
}
