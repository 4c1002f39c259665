// benchid demo [-o DIR] [--data DIR]: the whole job on each bundled invented
// scenario, one report per scenario.
#include <filesystem>
#include <iostream>
#include <memory>

#include "cli/commands.h"
#include "cli/output.h"
#include "cli/report.h"
#include "ident/error.h"

#ifndef BENCHID_DEMO_DIR
#define BENCHID_DEMO_DIR "datasets_demo"
#endif

namespace benchid::cli {

namespace fs = std::filesystem;

const std::vector<DemoScenario>& demo_scenarios() {
  static const std::vector<DemoScenario> s{
      {"belt_axis", "Belt-driven positioning axis, random noise (invented demo)", "belt_axis/belt_axis_log.csv",
       "drive_v", "speed_rads", "", "", "auto", "auto", "", "pid:kp=0.025,ki=0.8", "belt_axis/belt_axis.truth.json", "pid"},
      {"voice_coil", "Voice-coil actuator, repeated log sweep through an audio interface (invented demo)",
       "voice_coil/voice_coil_sweep.wav", "1", "2", "", "voice_coil/voice_coil_sweep.plan.json", "5", "auto", "",
       "pid:kp=15,ki=1500,kd=0.04,tf=0.00015", "voice_coil/voice_coil.truth.json"},
      {"pump_speed", "Pump speed loop measured in closed loop with a reference channel (invented demo)",
       "pump_speed/pump_speed_log.csv", "drive_v", "speed_rpm", "setpoint_rpm", "", "auto", "auto", "",
       "pid:kp=0.01,ki=0.05", "pump_speed/pump_speed.truth.json"},
  };
  return s;
}

std::string default_demo_dir() { return BENCHID_DEMO_DIR; }

ReportArgs demo_args(const DemoScenario& s, const std::string& data_dir) {
  ReportArgs a;
  const fs::path d(data_dir);
  a.frf.record = (d / s.record).string();
  a.frf.input = s.input;
  a.frf.output = s.output;
  a.frf.reference = s.reference;
  if (!s.excitation.empty()) a.frf.excitation = (d / s.excitation).string();
  // the equivalent single command, so the report says how to make it again
  std::string cmd = "benchid report " + a.frf.record + " --input " + s.input + " --output " + s.output;
  if (!s.reference.empty()) cmd += " --reference " + s.reference;
  if (!s.excitation.empty()) cmd += " --excitation " + a.frf.excitation;
  if (s.fit_order != "auto") cmd += " --order " + s.fit_order;
  if (s.fit_delay != "auto") cmd += " --delay " + s.fit_delay;
  if (!s.fit_band.empty()) cmd += " --band " + s.fit_band;
  if (!s.controller.empty()) cmd += " --controller " + s.controller;
  if (!s.tune.empty()) cmd += " --tune " + s.tune;
  a.frf.command_line = cmd + " -o " + s.name + ".html   (run by benchid demo)";
  a.fit.order = s.fit_order;
  a.fit.delay = s.fit_delay;
  a.fit.band = s.fit_band;
  a.loop.controller = s.controller;
  a.tune = s.tune;
  a.title = s.title;
  return a;
}

void add_demo_command(CLI::App& app) {
  auto out = std::make_shared<std::string>("benchid_demo");
  auto data = std::make_shared<std::string>(default_demo_dir());
  CLI::App* c = app.add_subcommand(
      "demo", "Run the whole job (frf, fit, replay, loop, HTML report) on each bundled demo recording: invented "
              "scenarios of a belt-driven axis (random noise, CSV), a voice-coil actuator (log sweep, stereo WAV) and "
              "a pump speed loop (closed loop with a reference, CSV). Prints where the reports are.");
  c->add_option("-o,--out", *out, "Folder for the reports (made if missing; default benchid_demo)");
  add_force_flag(c);
  c->add_option("--data", *data, "Folder holding the demo recordings (default: datasets_demo/ of the source tree "
                "this benchid was built from)");
  c->callback([out, data] {
    if (!fs::is_directory(*data))
      throw InputError("--data " + *data + ": no such folder; expected the datasets_demo folder of benchid's sources");
    std::error_code ec;
    fs::create_directories(*out, ec);
    if (ec || !fs::is_directory(*out)) throw InputError("-o " + *out + ": cannot make the folder (" + ec.message() + ")");
    std::vector<std::string> written;
    for (const DemoScenario& s : demo_scenarios()) {
      const ReportArgs a = demo_args(s, *data);
      const ReportPaths p = report_paths((fs::path(*out) / (s.name + ".html")).string(), "");
      run_report(a, p, false);
      written.push_back(p.report);
    }
    std::cout << "benchid demo: open these reports in a browser (invented demo data):\n";
    for (const auto& w : written) std::cout << "  " << fs::absolute(w).string() << "\n";
  });
}

}  // namespace benchid::cli
