// The report pipeline and its plots: the SVG writer's ticks and paths, the
// demo scenarios' recovery of their stated truth, the plots mapped back to
// the numbers they show, the report's self-containment, bad input, and the
// HTML rendered in headless Chromium.
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <regex>
#include <sstream>

#include "cli/report.h"
#include "cli/svg_plot.h"
#include "fit/model_json.h"
#include "loop/controller.h"
#include "ident/frf_csv.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

namespace fs = std::filesystem;
using benchid::test::TempDir;
using benchid::test::slurp;
namespace svg = benchid::cli::svg;

namespace {

// ---------------------------------------------------------------- SVG writer

// 1-2-5 ticks (common practice for plot axes; the same rule as the
// "nice numbers" of Heckbert, Graphics Gems, 1990 — from memory).
TEST(SvgTicks, LinearTicksFallOnOneTwoFive) {
  const auto z = svg::linear_ticks(0, 1, 5);
  ASSERT_EQ(z.size(), 6u);
  for (std::size_t i = 0; i < z.size(); ++i) EXPECT_NEAR(z[i], 0.2 * static_cast<double>(i), 1e-12);
  const auto t = svg::linear_ticks(-37, 112, 6);  // span 149 / 6 -> step 50 (25 is not 1-2-5)
  ASSERT_EQ(t.size(), 3u);
  EXPECT_DOUBLE_EQ(t[0], 0);
  EXPECT_DOUBLE_EQ(t[1], 50);
  EXPECT_DOUBLE_EQ(t[2], 100);
  const auto u = svg::linear_ticks(-720, 45, 5);  // step 200
  EXPECT_DOUBLE_EQ(u.front(), -600);
  EXPECT_DOUBLE_EQ(u.back(), 0);
  EXPECT_TRUE(svg::linear_ticks(1, 1, 5).empty());
}

TEST(SvgTicks, LogTicksAreDecadesWithTwoAndFiveBetween) {
  const svg::LogTicks t = svg::log_ticks(0.5, 2000);
  EXPECT_EQ(t.major, (std::vector<double>{1, 10, 100, 1000}));
  ASSERT_EQ(t.minor.size(), 8u);  // 0.5, 2, 5, 20, 50, 200, 500, 2000
  EXPECT_DOUBLE_EQ(t.minor.front(), 0.5);
  EXPECT_DOUBLE_EQ(t.minor.back(), 2000);
}

TEST(SvgTicks, NiceRangesWidenToOneTwoFive) {
  double lo = 6.1, hi = 2950;
  svg::nice_range(lo, hi, true);
  EXPECT_DOUBLE_EQ(lo, 5);
  EXPECT_DOUBLE_EQ(hi, 5000);
  lo = 0.49, hi = 1000;
  svg::nice_range(lo, hi, true);
  EXPECT_DOUBLE_EQ(lo, 0.2);
  EXPECT_DOUBLE_EQ(hi, 1000);
  lo = -93.2, hi = 31.5;
  svg::nice_range(lo, hi, false);
  EXPECT_DOUBLE_EQ(lo, -100);  // span 124.7 / 6 ticks -> step 50
  EXPECT_DOUBLE_EQ(hi, 50);
}

// SI prefixes: BIPM, The International System of Units, 9th ed. (2019), table 7 (from memory).
TEST(SvgTicks, LabelsUseSiPrefixesOutsideOneThousandth) {
  EXPECT_EQ(svg::si_format(1500), "1.5k");
  EXPECT_EQ(svg::si_format(2e6), "2M");
  EXPECT_EQ(svg::si_format(2e-6), "2\xC2\xB5");
  EXPECT_EQ(svg::si_format(5e-4), "500\xC2\xB5");
  EXPECT_EQ(svg::si_format(0.25), "0.25");
  EXPECT_EQ(svg::si_format(-45), "-45");
  EXPECT_EQ(svg::si_format(0), "0");
  EXPECT_EQ(svg::si_format(100), "100");
  EXPECT_EQ(svg::si_quantity(0.00143, "s"), "1.43 ms");
  EXPECT_EQ(svg::si_quantity(133.3, "Hz"), "133 Hz");
  EXPECT_EQ(svg::si_quantity(2500, "Hz"), "2.5 kHz");
  EXPECT_EQ(svg::si_quantity(4.7e-7, "s"), "470 ns");
}

// Tick labels carry the decimals their step needs, so neighbours never print alike.
TEST(SvgTicks, LinearLabelsShowTheDecimalsOfTheStep) {
  svg::Plot p("t");
  p.series.push_back({"s", {2.1275, 2.1525}, {0, 0.75}});
  p.x.lo = 2.125, p.x.hi = 2.155;  // step 0.005
  p.y.lo = 0, p.y.hi = 1, p.y.tick_step = 0.25;
  const std::string svg_text = p.render();
  for (const char* label : {">2.125<", ">2.130<", ">2.135<", ">2.150<", ">0.25<", ">0.50<", ">0.75<", ">1.00<"})
    EXPECT_NE(svg_text.find(label), std::string::npos) << label;
}

struct SvgPlot {
  std::string title, body;
  svg::Axis x, y;
};

svg::Axis parse_axis(const std::string& attr) {
  std::istringstream s(attr);
  std::string kind;
  svg::Axis a;
  s >> kind >> a.lo >> a.hi >> a.px0 >> a.px1;
  a.log = kind == "log";
  return a;
}

std::vector<SvgPlot> plots_of(const std::string& html) {
  std::vector<SvgPlot> out;
  const std::regex head(R"re(<svg class="plot"[^>]*aria-label="([^"]*)"[^>]*data-x="([^"]*)" data-y="([^"]*)">)re");
  for (std::sregex_iterator it(html.begin(), html.end(), head), end; it != end; ++it) {
    const std::size_t from = static_cast<std::size_t>(it->position(0));
    const std::size_t to = html.find("</svg>", from);
    out.push_back({(*it)[1], html.substr(from, to - from), parse_axis((*it)[2]), parse_axis((*it)[3])});
  }
  return out;
}

// The points of a series' path, in data units, split into its sub-paths.
// (Plain string search: a regex over a path of thousands of points recurses
// too deep for a sanitizer build's stack.)
std::vector<std::vector<std::pair<double, double>>> series_points(const SvgPlot& p, const std::string& name) {
  std::vector<std::vector<std::pair<double, double>>> runs;
  const std::size_t at = p.body.find("<path class=\"series\" data-series=\"" + name + "\"");
  if (at == std::string::npos) return runs;
  const std::size_t d0 = p.body.find(" d=\"", at) + 4, d1 = p.body.find('"', d0);
  const std::string d = p.body.substr(d0, d1 - d0);
  std::size_t i = 0;
  while (i < d.size()) {
    const char c = d[i++];
    if (c != 'M' && c != 'L') continue;
    char* end = nullptr;
    const double px = std::strtod(d.c_str() + i, &end);
    const double py = std::strtod(end, &end);
    i = static_cast<std::size_t>(end - d.c_str());
    if (c == 'M') runs.emplace_back();
    runs.back().emplace_back(p.x.from_px(px), p.y.from_px(py));
  }
  return runs;
}

TEST(SvgPlot, PathsMapBackToTheirDataAndBreakOutsideTheAxes) {
  svg::Plot p("test");
  std::vector<double> f, db;
  for (int i = 0; i <= 40; ++i) {
    f.push_back(std::pow(10.0, -1 + i * 0.1));
    db.push_back(20 * std::sin(i * 0.3) + (i == 20 ? 1e3 : 0.0));  // one point far off the scale
  }
  svg::Series s{"curve", f, db};
  s.autoscale = true;
  p.series.push_back(s);
  p.fit_x(true);
  p.y.lo = -30, p.y.hi = 30;
  const std::string html = p.render();
  const auto plots = plots_of(html);
  ASSERT_EQ(plots.size(), 1u);
  EXPECT_TRUE(plots[0].x.log);
  EXPECT_DOUBLE_EQ(plots[0].x.lo, 0.1);
  EXPECT_DOUBLE_EQ(plots[0].x.hi, 1000);
  const auto runs = series_points(plots[0], "curve");
  ASSERT_EQ(runs.size(), 2u) << "the point off the scale breaks the line";
  EXPECT_EQ(runs[0].size() + runs[1].size(), 40u);
  std::size_t k = 0;
  for (const auto& run : runs)
    for (const auto& [x, y] : run) {
      if (k == 20) ++k;
      // pixels are written to 1/100 px: 1e-4 of a 600-px axis is 0.06 px
      EXPECT_NEAR(std::log10(x), std::log10(f[k]), 1e-4 * 4) << k;
      EXPECT_NEAR(y, db[k], 1e-4 * 60) << k;
      ++k;
    }
}

// ------------------------------------------------------------ the pipeline

struct DemoRun {
  TempDir dir;
  std::map<std::string, benchid::cli::ReportPaths> paths;
};

// The three demo reports, made once for all the tests below.
const DemoRun& demo_run() {
  static DemoRun* run = [] {
    auto* r = new DemoRun;
    for (const auto& s : benchid::cli::demo_scenarios()) {
      const auto p = benchid::cli::report_paths(r->dir.file(s.name + ".html"), "");
      benchid::cli::run_report(benchid::cli::demo_args(s, benchid::cli::default_demo_dir()), p, true);
      r->paths[s.name] = p;
    }
    return r;
  }();
  return *run;
}

// Zero-order hold of period T at f: (1 - e^{-sT}) / (sT), s = j 2 pi f.
std::complex<double> zoh(double f_hz, double t_s) {
  const std::complex<double> s(0, 2 * M_PI * f_hz);
  return (1.0 - std::exp(-s * t_s)) / (s * t_s);
}

// The pipeline recovers each scenario's stated truth: over the fitted band
// the model departs from the true plant (seen through the recording's hold:
// the belt axis and the pump were simulated with a held input, the voice
// coil through a band-limited converter, see datasets_demo/) by less than the
// FRF's own random error. A least-squares fit of p parameters to N lines
// averages the noise down by about sqrt(p/N), so the RMS of the error in
// units of each line's 1-sigma random error must be below 1, and no line may
// be off by more than 4 sigma (a 4-sigma excursion of the fit itself is
// improbable over a few hundred lines). Systematic misfit fails both.
TEST(DemoPipeline, EveryScenarioRecoversItsStatedTruth) {
  const auto& run = demo_run();
  for (const auto& s : benchid::cli::demo_scenarios()) {
    SCOPED_TRACE(s.name);
    const auto& p = run.paths.at(s.name);
    const benchid::fit::RationalModel model = benchid::fit::read_model_json(p.model);
    const benchid::fit::RationalModel truth =
        benchid::fit::read_model_json((fs::path(benchid::cli::default_demo_dir()) / s.truth).string());
    const benchid::ident::Frf frf = benchid::ident::read_frf_csv(p.frf);
    const bool held = s.name != "voice_coil";
    const nlohmann::json mj = nlohmann::json::parse(slurp(p.model));
    const double lo = mj["fit"]["band_hz"][0], hi = mj["fit"]["band_hz"][1];
    // the error the fit is built to reach: each line's random error, floored
    // at a tenth of the median as the variance weighting does (fit/fit_frf.h)
    std::vector<double> errs;
    for (std::size_t i = 0; i < frf.size(); ++i)
      if (frf.freq_hz[i] >= lo && frf.freq_hz[i] <= hi && frf.reliable[i] && frf.rel_err[i] > 0) errs.push_back(frf.rel_err[i]);
    ASSERT_FALSE(errs.empty());
    std::nth_element(errs.begin(), errs.begin() + static_cast<long>(errs.size() / 2), errs.end());
    const double floor = 0.1 * errs[errs.size() / 2];
    double sum = 0, worst = 0, worst_hz = 0;
    std::size_t n = 0;
    for (std::size_t i = 0; i < frf.size(); ++i) {
      const double f = frf.freq_hz[i];
      if (f < lo || f > hi || !frf.reliable[i] || !(frf.rel_err[i] > 0)) continue;
      std::complex<double> h = truth.response(f);
      if (held) h *= zoh(f, 1 / frf.rate_hz);
      const double z = std::abs(model.response(f) - h) / std::abs(h) / std::max(frf.rel_err[i], floor);
      if (z > worst) worst_hz = f;
      sum += z * z;
      worst = std::max(worst, z);
      ++n;
    }
    ASSERT_GT(n, 50u);
    const double rms = std::sqrt(sum / static_cast<double>(n));
    std::printf("  %s: model vs truth over %zu lines: RMS %.3f, worst %.3f sigma at %.4g Hz\n", s.name.c_str(), n, rms,
                worst, worst_hz);
    EXPECT_LT(rms, 1.0) << "model vs truth, RMS in units of the random error, over " << n << " lines";
    EXPECT_LT(worst, 4.0) << "at " << worst_hz << " Hz";
  }
}

// The loop figures on the fitted model agree with the same figures on the
// true plant within 3 standard deviations of their Monte Carlo spread from
// the measured FRF's random error (the report's "+-" column).
TEST(DemoPipeline, MarginsOnTheModelAgreeWithTheTruthWithinTheirSpread) {
  const auto& run = demo_run();
  for (const auto& s : benchid::cli::demo_scenarios()) {
    SCOPED_TRACE(s.name);
    const auto& p = run.paths.at(s.name);
    const nlohmann::json lj = nlohmann::json::parse(slurp(p.loop));
    const TempDir d;
    const auto r = benchid::test::run_benchid(
        d, "loop " + (fs::path(benchid::cli::default_demo_dir()) / s.truth).string() + " --controller " + s.controller +
               " --json");
    ASSERT_EQ(r.code == 0 || r.code == 3, true) << r.err;
    const nlohmann::json tj = nlohmann::json::parse(r.out);
    const auto html = slurp(p.report);
    // the spread as the report states it: "PM +- sd" in the margins table
    const std::regex pm_row(R"re(phase margin \(deg\)</td><td class="n">[^<]*</td><td class="n">[^<]* &plusmn; ([0-9.]+))re");
    std::smatch m;
    ASSERT_TRUE(std::regex_search(html, m, pm_row)) << "no phase-margin spread in the report";
    const double sd = std::stod(m[1]);
    EXPECT_NEAR(lj["phase_margin_deg"].get<double>(), tj["phase_margin_deg"].get<double>(), 3 * sd + 1.0)
        << "1 deg allows for the hold the truth JSON leaves out (half a sample at the crossover)";
    EXPECT_NEAR(lj["crossover_hz"].get<double>(), tj["crossover_hz"].get<double>(), 0.03 * tj["crossover_hz"].get<double>());
  }
}

// DESIGN.md "Plots are data": every curve maps back through its axis to the
// FRF CSV, the model JSON and the loop JSON within 0.5 % of the axis span.
TEST(DemoReport, PlotsMapBackToTheFilesNumbers) {
  const auto& run = demo_run();
  for (const auto& s : benchid::cli::demo_scenarios()) {
    SCOPED_TRACE(s.name);
    const auto& p = run.paths.at(s.name);
    const std::string html = slurp(p.report);
    const auto plots = plots_of(html);
    const benchid::ident::Frf frf = benchid::ident::read_frf_csv(p.frf);
    const benchid::fit::RationalModel model = benchid::fit::read_model_json(p.model);
    const nlohmann::json lj = nlohmann::json::parse(slurp(p.loop));
    const auto find = [&](const std::string& prefix) -> const SvgPlot& {
      for (const auto& q : plots)
        if (q.title.rfind(prefix, 0) == 0) return q;
      ADD_FAILURE() << "no plot " << prefix;
      return plots.front();
    };
    // measured magnitude: each point is a reliable line of the CSV
    const SvgPlot& mag = find("Magnitude of H");
    const double ylim = 0.005 * (mag.y.hi - mag.y.lo), xlim = 0.005 * std::log10(mag.x.hi / mag.x.lo);
    const std::vector<double> mag_db = frf.mag_db();
    std::size_t points = 0;
    for (const auto& r : series_points(mag, "measured"))
      for (const auto& [f, db] : r) {
        // the nearest line (the pixel grid rounds f by about 1e-5 of the log span)
        std::size_t i = static_cast<std::size_t>(std::lower_bound(frf.freq_hz.begin(), frf.freq_hz.end(), f) - frf.freq_hz.begin());
        if (i == frf.size() || (i > 0 && f - frf.freq_hz[i - 1] < frf.freq_hz[i] - f)) --i;
        EXPECT_NEAR(std::log10(f), std::log10(frf.freq_hz[i]), xlim);
        EXPECT_NEAR(db, mag_db[i], ylim) << "at " << f << " Hz";
        ++points;
      }
    std::size_t inside = 0;
    for (std::size_t i = 0; i < frf.size(); ++i) inside += frf.reliable[i] && mag.y.contains(mag_db[i]) ? 1 : 0;
    EXPECT_EQ(points, inside) << "every reliable line on the scale is drawn";
    // the model curve is the model JSON's response
    std::size_t model_points = 0;
    for (const auto& r : series_points(mag, "model"))
      for (const auto& [f, db] : r) {
        EXPECT_NEAR(db, 20 * std::log10(std::abs(model.response(f))), ylim) << "at " << f << " Hz";
        ++model_points;
      }
    EXPECT_GT(model_points, 100u);
    // the crossover marker sits at the loop JSON's crossover, on 0 dB
    const SvgPlot& lmag = find("Loop gain magnitude");
    const std::regex marker(R"re(<g class="marker" data-marker="crossover[^"]*" data-at="([^ ]+) ([^"]+)"><path d="M(-?[0-9.]+) (-?[0-9.]+)L)re");
    std::smatch m;
    ASSERT_TRUE(std::regex_search(lmag.body, m, marker)) << "no crossover marker";
    const double fc = lj["crossover_hz"];
    const double px = std::stod(m[3]) + 5, py = std::stod(m[4]);  // the diamond starts 5 px left of its centre
    EXPECT_NEAR(std::log10(lmag.x.from_px(px)), std::log10(fc), 0.005 * std::log10(lmag.x.hi / lmag.x.lo));
    EXPECT_NEAR(lmag.y.from_px(py), 0.0, 0.005 * (lmag.y.hi - lmag.y.lo));
    // a gain-margin marker at the headline phase crossover, at -GM dB
    bool gm_found = false;
    const double fg = lj["gain_margin_hz"], gm = lj["gain_margin_db"];
    const std::regex gm_marker(R"re(<g class="marker" data-marker="GM [^"]*" data-at="([^ ]+) ([^"]+)"><path d="M(-?[0-9.]+) (-?[0-9.]+)L)re");
    for (std::sregex_iterator it(lmag.body.begin(), lmag.body.end(), gm_marker), end; it != end; ++it) {
      const double mx = lmag.x.from_px(std::stod((*it)[3]) + 5), my = lmag.y.from_px(std::stod((*it)[4]));
      if (std::fabs(std::log10(mx / fg)) < 0.005 * std::log10(lmag.x.hi / lmag.x.lo) &&
          std::fabs(my + gm) < 0.005 * (lmag.y.hi - lmag.y.lo))
        gm_found = true;
    }
    EXPECT_TRUE(gm_found) << "no marker at the gain margin " << gm << " dB, " << fg << " Hz";
    // the Ms circle has radius 1/Ms
    const SvgPlot& nyq = find("Nyquist");
    const std::regex circle(R"re(data-circle="Ms circle" data-at="([^ ]+) ([^ ]+) ([^"]+)")re");
    ASSERT_TRUE(std::regex_search(nyq.body, m, circle));
    EXPECT_NEAR(std::stod(m[3]), std::pow(10.0, -lj["peak_sensitivity_db"].get<double>() / 20), 1e-6);
    EXPECT_DOUBLE_EQ(std::stod(m[1]), -1.0);
  }
}

// report --tune (the belt-axis scenario): the controller file beside the
// report meets the targets under the loop routines, and the "after" curve of
// the tuning plot is |C P| of the fitted model and that controller.
TEST(DemoReport, TuningSectionMatchesTheControllerFile) {
  const auto& run = demo_run();
  for (const auto& s : benchid::cli::demo_scenarios()) {
    if (s.tune.empty()) continue;
    SCOPED_TRACE(s.name);
    const auto& p = run.paths.at(s.name);
    ASSERT_TRUE(fs::exists(p.controller));
    const nlohmann::json cj = nlohmann::json::parse(slurp(p.controller));
    EXPECT_EQ(cj["format"], "benchid.controller/1");
    EXPECT_TRUE(cj["loop_verdict_pass"].get<bool>());
    EXPECT_GE(cj["achieved"]["phase_margin_deg"].get<double>(), 45);
    EXPECT_GE(cj["achieved"]["gain_margin_db"].get<double>(), 10);
    EXPECT_LE(cj["achieved"]["peak_sensitivity_db"].get<double>(), 6);
    const std::string html = slurp(p.report);
    EXPECT_NE(html.find("Proposed tuning"), std::string::npos);
    EXPECT_NE(html.find("Apply them to the machine gradually"), std::string::npos) << "the tuning caution";
    const benchid::fit::RationalModel model = benchid::fit::read_model_json(p.model);
    const benchid::loop::Controller c = benchid::loop::parse_controller(cj["spec"].get<std::string>());
    const auto plots = plots_of(html);
    const SvgPlot* lp = nullptr;
    for (const auto& q : plots)
      if (q.title.rfind("Tuning: loop gain", 0) == 0) lp = &q;
    ASSERT_NE(lp, nullptr);
    const double ylim = 0.005 * (lp->y.hi - lp->y.lo);
    std::size_t n = 0;
    for (const auto& r : series_points(*lp, "after (proposal)"))
      for (const auto& [f, db] : r) {
        EXPECT_NEAR(db, 20 * std::log10(std::abs(model.response(f) * c.model.response(f))), ylim) << "at " << f << " Hz";
        ++n;
      }
    EXPECT_GT(n, 100u);
    // `benchid loop` on the model with the controller file passes
    const TempDir d;
    const auto l = benchid::test::run_benchid(d, "loop " + p.model + " --controller " + p.controller + " --strict");
    EXPECT_EQ(l.code, 0) << l.out << l.err;
  }
}

TEST(DemoReport, IsSelfContainedAndCarriesTheCaution) {
  const auto& run = demo_run();
  for (const auto& [name, p] : run.paths) {
    SCOPED_TRACE(name);
    const std::string html = slurp(p.report);
    EXPECT_EQ(html.find("http://"), std::string::npos);
    EXPECT_EQ(html.find("https://"), std::string::npos);
    EXPECT_EQ(html.find("<script"), std::string::npos);
    EXPECT_EQ(html.find(" src="), std::string::npos);
    EXPECT_EQ(html.find("<link"), std::string::npos);
    EXPECT_NE(html.find("only in the measured band"), std::string::npos);
    EXPECT_NE(html.find("safety rules"), std::string::npos);
    EXPECT_GE(plots_of(html).size(), 11u) << "FRF (3), residual (2), replay, loop (2), Nyquist, S/T, step";
  }
}

// ---------------------------------------------------------------- bad input

TEST(ReportCli, BadInputFailsBeforeWritingWithTheStageNamed) {
  const TempDir d;
  const std::string rec = d.write("log.csv", [] {  // white noise through a one-pole filter
    std::string s = "time_s,u,y\n";
    unsigned long long seed = 12345;
    double y = 0;
    for (int i = 0; i < 20000; ++i) {
      seed = seed * 6364136223846793005ULL + 1442695040888963407ULL;
      const double u = static_cast<double>(seed >> 11) * 0x1.0p-53 - 0.5;
      y = 0.7 * y + 0.3 * u;
      s += std::to_string(i * 1e-3) + "," + std::to_string(u) + "," + std::to_string(y) + "\n";
    }
    return s;
  }());
  struct Case {
    std::string args, stage;
  } cases[] = {
      {"report " + d.file("missing.csv") + " --input u --output y", "frf stage"},
      {"report " + rec + " --input u --output nope", "frf stage"},
      {"report " + rec + " --input u --output y --order 0", "fit stage"},
      {"report " + rec + " --input u --output y --controller pid:kp=oops", "loop stage"},
      {"report " + rec + " --input u --output y --tune pd", "tune stage"},
  };
  for (const auto& c : cases) {
    SCOPED_TRACE(c.args);
    const auto r = benchid::test::run_benchid(d, c.args + " -o " + d.file("out.html"));
    EXPECT_EQ(r.code, 2) << r.err;
    EXPECT_NE(r.err.find(c.stage), std::string::npos) << r.err;
    EXPECT_EQ(std::count(r.err.begin(), r.err.end(), '\n'), 1) << "one line: " << r.err;
    for (const char* f : {"out.html", "out.frf.csv", "out.model.json", "out.loop.json", "out.controller.json"})
      EXPECT_FALSE(fs::exists(d.file(f))) << f;
  }
  // the report may not overwrite the recording
  const auto r = benchid::test::run_benchid(d, "report " + rec + " --input u --output y -o " + rec);
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(slurp(rec).find("time_s,u,y"), std::string::npos);
}

// ------------------------------------------------------------- the browser

// Renders each demo report in headless Chromium. A copy of the report gets a
// script that measures every plot in the laid-out page and writes its
// findings into the DOM; --dump-dom returns that DOM. A screenshot of the
// report must carry far more ink than one of an empty page.
TEST(DemoReport, RendersInHeadlessChromium) {
  const char* exe = "/usr/bin/chromium";
  if (!fs::exists(exe)) GTEST_SKIP() << "Chromium is not installed (tools/deps.sh --test installs it)";
  const auto& run = demo_run();
  const TempDir d;
  const std::string flags = std::string(exe) +
                            " --headless --no-sandbox --disable-gpu --disable-background-networking --no-first-run "
                            "--user-data-dir=" + d.file("profile") + " ";
  const std::string check = R"(<script>
(function(){
  var out = [], svgs = document.querySelectorAll('svg.plot');
  svgs.forEach(function(s, i){
    var r = s.getBoundingClientRect(), vb = s.viewBox.baseVal, name = s.getAttribute('aria-label');
    if (!(r.width > 200 && r.height > 100)) out.push('FAIL ' + name + ': box ' + r.width + 'x' + r.height);
    var box = s.closest('figure').getBoundingClientRect();
    if (r.left < box.left - 1 || r.right > box.right + 1 || r.top < box.top - 1 || r.bottom > box.bottom + 1)
      out.push('FAIL ' + name + ': outside its figure');
    var drawn = 0;
    s.querySelectorAll('path.series, g.dots circle').forEach(function(p){
      var b = p.getBBox();
      if (b.width + b.height > 0) drawn++;
      if (b.x < -1 || b.y < -1 || b.x + b.width > vb.width + 1 || b.y + b.height > vb.height + 1)
        out.push('FAIL ' + name + ': a curve leaves the plot');
    });
    if (drawn == 0) out.push('FAIL ' + name + ': nothing drawn');
  });
  var pre = document.createElement('pre');
  pre.id = 'layout-check';
  pre.textContent = 'plots=' + svgs.length + ' ' + (out.length ? out.join('; ') : 'layout-ok');
  document.body.appendChild(pre);
})();
</script></body>)";
  for (const auto& [name, p] : run.paths) {
    SCOPED_TRACE(name);
    std::string html = slurp(p.report);
    html.replace(html.rfind("</body>"), 7, check);
    const std::string copy = d.write(name + ".html", html);
    const std::string dom = d.file(name + ".dom");
    ASSERT_EQ(std::system((flags + "--dump-dom file://" + copy + " >" + dom + " 2>/dev/null").c_str()), 0);
    const std::string out = slurp(dom);
    const std::regex res(R"re(plots=([0-9]+) ([^<]*)</pre>)re");
    std::smatch m;
    ASSERT_TRUE(std::regex_search(out, m, res)) << "the check did not run";
    EXPECT_EQ(std::stoul(m[1]), plots_of(slurp(p.report)).size());
    EXPECT_EQ(m[2].str(), "layout-ok");
  }
  // screenshot: the report against an empty page of the same size
  const std::string blank = d.write("blank.html", "<!DOCTYPE html><html><body></body></html>");
  const auto shot = [&](const std::string& page, const std::string& png) {
    return std::system((flags + "--window-size=1000,3000 --screenshot=" + png + " file://" + page + " >/dev/null 2>&1").c_str());
  };
  ASSERT_EQ(shot(run.paths.at("belt_axis").report, d.file("report.png")), 0);
  ASSERT_EQ(shot(blank, d.file("blank.png")), 0);
  const std::string png = slurp(d.file("report.png")), empty = slurp(d.file("blank.png"));
  ASSERT_GE(png.size(), 8u);
  EXPECT_EQ(png.substr(1, 3), "PNG");
  EXPECT_GT(png.size(), 20 * empty.size()) << "report " << png.size() << " bytes, empty page " << empty.size();
}

// The committed demo recordings are what the committed generator makes.
TEST(DemoData, GeneratorReproducesTheCommittedFiles) {
  const TempDir d;
  for (const char* sub : {"belt_axis", "voice_coil", "pump_speed"}) fs::create_directories(d.file(sub));
  ASSERT_EQ(std::system((std::string(BENCHID_MAKE_DEMO_DATA) + " " + d.path()).c_str()), 0);
  ASSERT_EQ(std::system((std::string(BENCHID_MAKE_BELT_AXIS) + " " + d.file("belt_axis/belt_axis_log.csv")).c_str()), 0);
  for (const char* f : {"belt_axis/belt_axis_log.csv", "belt_axis/belt_axis.truth.json", "voice_coil/voice_coil_sweep.wav",
                        "voice_coil/voice_coil_sweep.plan.json", "voice_coil/voice_coil.truth.json",
                        "pump_speed/pump_speed_log.csv", "pump_speed/pump_speed.truth.json"}) {
    SCOPED_TRACE(f);
    EXPECT_TRUE(slurp(d.file(f)) == slurp((fs::path(benchid::cli::default_demo_dir()) / f).string()));
  }
}

}  // namespace
