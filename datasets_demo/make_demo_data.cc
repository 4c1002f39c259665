// Generator of the invented "voice coil" and "pump speed" demo recordings and
// of the stated truth (benchid.model/1 JSON) of all three demo scenarios. The
// belt axis recording itself comes from make_belt_axis.cc.
//
// INVENTED SCENARIOS, for demonstration only; no real machine was measured.
// The simulator is benchid's own: a continuous plant as poles and zeros
// (fit::from_zpk), exact zero-order-hold simulation with the delay in whole
// samples (fit::simulate, or fit::discretize + a state-space recursion inside
// a feedback loop), a discrete controller from the same spec parser as
// `benchid loop` (loop::parse_controller), and seeded Gaussian noise.
//
// Usage: benchid_make_demo_data DATASETS_DEMO_DIR
#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdint>
#include <cstdio>
#include <fstream>
#include <random>
#include <stdexcept>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "fit/discretize.h"
#include "fit/model.h"
#include "fit/model_json.h"
#include "fit/replay.h"
#include "ident/excite.h"
#include "ident/excite_io.h"
#include "loop/controller.h"

namespace {

using benchid::fit::cplx;
using benchid::fit::RationalModel;
constexpr double kTwoPi = 2 * M_PI;

struct Gaussian {
  std::mt19937_64 gen;
  explicit Gaussian(std::uint64_t seed) : gen(seed) {}
  double operator()() {  // Box-Muller, portable across standard libraries
    const double u1 = (static_cast<double>(gen() >> 11) + 0.5) * 0x1.0p-53;
    const double u2 = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(kTwoPi * u2);
  }
};

// Roots of s^2/w^2 + 2 z s/w + 1 (a complex pair at f_hz with damping z).
void pair(std::vector<cplx>& roots, double f_hz, double zeta) {
  const double w = kTwoPi * f_hz;
  roots.emplace_back(-zeta * w, w * std::sqrt(1 - zeta * zeta));
  roots.emplace_back(-zeta * w, -w * std::sqrt(1 - zeta * zeta));
}

// k such that the model's DC gain is dc.
RationalModel with_dc_gain(std::vector<cplx> zeros, std::vector<cplx> poles, double dc, double delay_s) {
  benchid::fit::Zpk z;
  z.zeros = std::move(zeros);
  z.poles = std::move(poles);
  z.gain = 1;
  RationalModel m = benchid::fit::from_zpk(z);
  const double g = m.dc_gain();
  z.gain = dc / g;
  m = benchid::fit::from_zpk(z);
  m.delay_s = delay_s;
  return m;
}

void write_text(const std::string& path, const std::string& text) {
  std::ofstream f(path, std::ios::binary);
  f << text;
  if (!f) throw std::runtime_error("cannot write " + path);
}

void write_truth(const std::string& path, const RationalModel& m, const std::string& note) {
  nlohmann::json j = nlohmann::json::parse(benchid::fit::model_json(m));
  j["note"] = note;
  write_text(path, j.dump(2) + "\n");
}

// ---- belt axis: the truth of make_belt_axis.cc (its recording is made there) ----
void belt_axis_truth(const std::string& dir) {
  std::vector<cplx> z, p;
  pair(z, 22.0, 0.03);
  pair(p, 31.0, 0.04);
  p.emplace_back(-1 / 0.08, 0);
  write_truth(dir + "/belt_axis/belt_axis.truth.json", with_dc_gain(z, p, 40.0, 0.0015),
              "INVENTED demo plant (belt_axis): drive command V to motor speed rad/s; see README.md");
}

// ---- voice coil: stereo WAV through an audio interface, repeated log sweep ----
constexpr double kVcRateHz = 48000;
constexpr int kVcDelaySamples = 12;  // interface round trip beyond the loopback: 0.25 ms
RationalModel voice_coil_plant() {
  std::vector<cplx> z, p;
  pair(p, 62.0, 0.05);    // moving mass on its suspension
  pair(z, 700.0, 0.02);   // flexure: anti-resonance ...
  pair(p, 760.0, 0.02);   // ... then resonance
  p.emplace_back(-kTwoPi * 2000.0, 0);  // sensor amplifier's low-pass
  return with_dc_gain(z, p, 0.1, kVcDelaySamples / kVcRateHz);
}

void voice_coil(const std::string& dir) {
  benchid::ident::SweepOptions so;
  so.rate_hz = kVcRateHz;
  so.f0_hz = 5;
  so.f1_hz = 3000;
  so.duration_s = 0.5;
  so.logarithmic = true;
  so.amplitude = 0.5;
  so.repeats = 8;
  const benchid::ident::Excitation e = benchid::ident::make_sweep(so);
  const RationalModel g = voice_coil_plant();
  // an audio interface reconstructs its output band-limited (not held), so the
  // plant response is applied to the samples as they are
  const std::vector<double> y = benchid::fit::simulate_as_measured(g, e.samples, kVcRateHz);
  Gaussian noise(20261203);
  std::vector<float> frames;
  for (std::size_t i = 0; i < e.samples.size(); ++i) {
    frames.push_back(static_cast<float>(e.samples[i] + 1e-5 * noise()));  // loopback of the drive
    frames.push_back(static_cast<float>(y[i] + 2e-5 * noise()));          // displacement sensor
  }
  SF_INFO info{};
  info.samplerate = static_cast<int>(kVcRateHz);
  info.channels = 2;
  info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_24;
  const std::string wav = dir + "/voice_coil/voice_coil_sweep.wav";
  SNDFILE* f = sf_open(wav.c_str(), SFM_WRITE, &info);
  if (!f) throw std::runtime_error("cannot write " + wav);
  sf_command(f, SFC_SET_CLIPPING, nullptr, SF_TRUE);
  sf_writef_float(f, frames.data(), static_cast<sf_count_t>(e.samples.size()));
  sf_close(f);
  write_text(dir + "/voice_coil/voice_coil_sweep.plan.json", benchid::ident::sidecar_json(e, "voice_coil_sweep.wav", &so));
  write_truth(dir + "/voice_coil/voice_coil.truth.json", g,
              "INVENTED demo plant (voice_coil): drive (full scale) to displacement sensor (full scale); see README.md");
}

// ---- pump speed: closed loop at 1 kHz with a reference channel ----
constexpr double kPumpRateHz = 1000;
constexpr int kPumpDelaySamples = 2;
const char* const kPumpController = "pid:kp=0.01,ki=0.05@dt=0.001";
RationalModel pump_plant() {
  return with_dc_gain({}, {cplx(-1 / 0.35, 0), cplx(-1 / 0.025, 0)}, 300.0, kPumpDelaySamples / kPumpRateHz);
}

struct Recursion {  // x[k+1] = A x[k] + B u[k], y[k] = C x[k] + D u[k]
  benchid::fit::StateSpace ss;
  std::vector<double> x;
  explicit Recursion(const RationalModel& zm) : ss(zm.state_space()), x(ss.b.size(), 0.0) {}
  double output(double u) const {
    double y = ss.d * u;
    for (std::size_t i = 0; i < x.size(); ++i) y += ss.c[i] * x[i];
    return y;
  }
  void advance(double u) {
    std::vector<double> n(x.size(), 0.0);
    for (std::size_t i = 0; i < x.size(); ++i) {
      n[i] = ss.b[i] * u;
      for (std::size_t j = 0; j < x.size(); ++j) n[i] += ss.a[i][j] * x[j];
    }
    x = n;
  }
};

void pump_speed(const std::string& dir) {
  const RationalModel g = pump_plant();
  RationalModel g_nodelay = g;
  g_nodelay.delay_s = 0;
  benchid::fit::DiscretizeOptions d;
  d.sample_time_s = 1 / kPumpRateHz;
  Recursion plant(benchid::fit::discretize(g_nodelay, d).model);
  const benchid::loop::Controller c = benchid::loop::parse_controller(kPumpController);
  Recursion ctrl(c.model);
  const auto n = static_cast<std::size_t>(40 * kPumpRateHz);
  Gaussian noise(20261204);
  // reference: setpoint 1500 rpm with steps of +-100 rpm every 5 s, plus a
  // random dither (white, low-passed at 100 Hz by a one-pole filter) of 150 rpm rms
  const double a_lp = std::exp(-kTwoPi * 100 / kPumpRateHz);
  double dither = 0;
  std::vector<double> delayed(kPumpDelaySamples, 0.0);
  std::string csv =
      "# INVENTED demo data (benchid datasets_demo/pump_speed): pump speed loop in closed loop at 1 kHz; see README.md\n"
      "time_s,setpoint_rpm,drive_v,speed_rpm\n";
  char b[128];
  // the loop runs 10 s before logging starts, so the log begins at the
  // operating point (1500 rpm, about 5 V) rather than with the start-up
  const auto warmup = static_cast<std::size_t>(10 * kPumpRateHz);
  for (std::size_t i = 0; i < warmup + n; ++i) {
    const std::size_t k = i - std::min(i, warmup);
    const double t = static_cast<double>(k) / kPumpRateHz;
    const double step = (static_cast<int>(t / 5) % 2 ? 100.0 : -100.0);
    dither = a_lp * dither + (1 - a_lp) * noise() * 150 * std::sqrt((1 + a_lp) / (1 - a_lp));
    const double r = 1500 + step + dither;
    const double speed = plant.output(0) + 1.0 * noise();  // tachometer noise, 1 rpm rms
    const double e = r - speed;
    const double u = ctrl.output(e);
    ctrl.advance(e);
    // the plant sees the drive two samples late
    delayed.push_back(u);
    const double u_late = delayed.front();
    delayed.erase(delayed.begin());
    plant.advance(u_late);
    if (i < warmup) continue;
    std::snprintf(b, sizeof b, "%.3f,%.3f,%.5f,%.3f\n", t, r, u, speed);
    csv += b;
  }
  write_text(dir + "/pump_speed/pump_speed_log.csv", csv);
  write_truth(dir + "/pump_speed/pump_speed.truth.json", g,
              "INVENTED demo plant (pump_speed): drive command V to pump speed rpm; see README.md");
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: %s DATASETS_DEMO_DIR\n", argv[0]);
    return 2;
  }
  try {
    const std::string dir = argv[1];
    belt_axis_truth(dir);
    voice_coil(dir);
    pump_speed(dir);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "benchid_make_demo_data: %s\n", e.what());
    return 2;
  }
  return 0;
}
