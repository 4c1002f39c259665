// `benchid fit` as a user runs it: an FRF CSV in, a model JSON and a summary out;
// bad input exit 2 with one line and no file; a fit that cannot converge exit 1.
#include <gtest/gtest.h>

#include <fstream>

#include <cmath>
#include <filesystem>

#include "fit/model_json.h"
#include "fit/replay.h"
#include "ident/frf_csv.h"
#include "tests/support/run_cli.h"
#include "tests/support/signals.h"
#include "tests/support/temp_dir.h"

using benchid::test::Outcome;
using benchid::test::TempDir;
namespace fs = std::filesystem;
using cplx_t = std::complex<double>;

namespace {

Outcome run(const TempDir& d, const std::string& args) { return benchid::test::run_benchid(d, args); }

// An FRF CSV of 10/(s/(2 pi 8) + 1) . w^2/(s^2 + 2 z w s + w^2), w = 2 pi 40 Hz, z = 0.05.
std::string write_frf(const TempDir& d, int lines, bool reliable, const std::string& name = "plant.csv") {
  benchid::ident::Frf f;
  f.rate_hz = 1000;
  f.segment = 1000;
  f.averages = 20;
  f.effective_averages = 20;
  const double w = 2 * M_PI * 40, z = 0.05, wp = 2 * M_PI * 8;
  for (int k = 1; k <= lines; ++k) {
    const double fr = 0.5 * std::pow(400.0, static_cast<double>(k - 1) / (lines - 1));
    const std::complex<double> s(0, 2 * M_PI * fr);
    f.freq_hz.push_back(fr);
    f.h.push_back(10.0 / (s / wp + 1.0) * w * w / (s * s + 2 * z * w * s + w * w));
    f.coherence.push_back(0.99);
    f.rel_err.push_back(0.005);
    f.reliable.push_back(reliable);
  }
  std::ostringstream s;
  benchid::ident::write_frf_csv(s, f);
  return d.write(name, s.str());
}

TEST(FitCli, WritesModelAndSummary) {
  TempDir d;
  const auto frf = write_frf(d, 300, true);
  const Outcome r = run(d, "fit " + frf + " --order 3 --strictly-proper -o " + d.file("m.json"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.out.find("pair  40 Hz   damping 0.05"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("corner 8 Hz"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("DC gain 10"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("about 3 more poles than zeros"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("holds only within the fitted band"), std::string::npos) << r.out;
  const auto m = benchid::fit::read_model_json(d.file("m.json"));
  EXPECT_NEAR(m.dc_gain(), 10.0, 1e-6);
}

TEST(FitCli, AutoOrderPrintsTheSweep) {
  TempDir d;
  const Outcome r = run(d, "fit " + write_frf(d, 200, true) + " --max-order 6 --strictly-proper --json");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.err.find("order sweep"), std::string::npos) << r.err;
  EXPECT_EQ(r.out.rfind("{", 0), 0u);  // --json: only the JSON on stdout
  EXPECT_NE(r.out.find("\"format\": \"benchid.model/1\""), std::string::npos);
}

TEST(FitCli, BadInputExitsTwoWithoutOutput) {
  TempDir d;
  struct Case {
    std::string args, fragment;
  };
  const std::string ok = write_frf(d, 40, true);
  const std::string unreliable = write_frf(d, 40, false, "bad.csv");
  d.write("nan.csv", "freq_hz,re,im\n1,1,0\n2,nan,0\n");
  for (const Case& c : std::vector<Case>{
           {unreliable + " --order 2", "all 40 lines in the band 0.5 to 200 Hz are untrusted"},
           {ok + " --order 30", "40 lines cannot carry an order-30 fit"},
           {ok + " --order 2 --band 900:1000", "holds no line"},
           {ok + " --order two", "--order 'two' is not a number"},
           {ok + " --weighting loud", "weighting 'loud' is unknown"},
           {d.file("nan.csv") + " --order 1",
            "nan.csv:3: column 're' value 'nan' is not a finite number"},
       }) {
    const Outcome r = run(d, "fit " + c.args + " -o " + d.file("out.json"));
    EXPECT_EQ(r.code, 2) << c.args << "\n" << r.err;
    EXPECT_EQ(r.err.rfind("benchid: error: ", 0), 0u) << r.err;
    EXPECT_NE(r.err.find(c.fragment), std::string::npos) << r.err;
    EXPECT_FALSE(fs::exists(d.file("out.json")));
  }
}

TEST(FitCli, NonConvergenceExitsOneWithAdvice) {
  TempDir d;
  const Outcome r = run(d, "fit " + write_frf(d, 300, true) + " --order 12 --max-iterations 1 -o " + d.file("m.json"));
  EXPECT_EQ(r.code, 1) << r.err;
  EXPECT_NE(
      r.err.find(
          "did not converge in 1 iterations at order 12; no order from 1 to 11 converges either"),
      std::string::npos)
      << r.err;
  EXPECT_NE(r.err.find("or more than 1 iterations (--max-iterations)"), std::string::npos) << r.err;
  EXPECT_FALSE(fs::exists(d.file("m.json")));
}

TEST(FitCli, NonConvergenceNamesALowerOrderThatConverges) {
  // the noiseless 3-pole plant of write_frf at order 8 in 5 iterations: the
  // extra poles have nothing to fit and wander (orders 4-7 too), while the
  // plant's own order settles at once; the advice names it
  TempDir d;
  const Outcome r = run(d, "fit " + write_frf(d, 300, true) +
                               " --order 8 --max-iterations 5 --delay 0 --strictly-proper -o " +
                               d.file("m.json"));
  EXPECT_EQ(r.code, 1) << r.err;
  EXPECT_NE(r.err.find("at order 8; order 3 converges on the same lines (0.5 to 200 Hz; NRMSE"),
            std::string::npos)
      << r.err;
  EXPECT_NE(r.err.find(": --order 3"), std::string::npos) << r.err;
  EXPECT_FALSE(fs::exists(d.file("m.json")));
}

}  // namespace

namespace {

TEST(ReplayCli, SplitValidatesOnTheHeldOutPart) {
  // frf --split 0.25 reads the first 75 %; replay --split 0.25 scores the rest
  TempDir d;
  benchid::test::Gaussian g(8);
  const auto u = g.take(40000);
  const auto y = benchid::test::Biquad::butterworth_lowpass(0.05).filter(u);
  std::string s = "# rate_hz=1000\nu,y\n";
  char b[80];
  for (std::size_t k = 0; k < u.size(); ++k) {
    std::snprintf(b, sizeof b, "%.12g,%.12g\n", u[k], y[k] + 0.001 * g());
    s += b;
  }
  const std::string rec = d.write("rec.csv", s);
  Outcome r = run(d, "frf " + rec + " --input u --output y --segment 1024 --split 0.25 -o " + d.file("frf.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_EQ(benchid::ident::read_frf_csv(d.file("frf.csv")).samples, 30000u);
  // the plant is a digital filter: fitted in z it is exact, so what is left
  // in the held-out residual is the white measurement noise
  r = run(d, "fit " + d.file("frf.csv") + " --order 2 --domain z --sample-time 0.001 -q -o " + d.file("m.json"));
  ASSERT_EQ(r.code, 0) << r.err;
  r = run(d, "replay " + d.file("m.json") + " " + rec + " --input u --output y --split 0.25");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.out.find("on 10000 samples"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("residual independence: pass"), std::string::npos) << r.out;
  r = run(d, "frf " + rec + " --input u --output y --split 0.95");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("must be in [0, 0.9]"), std::string::npos) << r.err;
}

TEST(ReplayCli, ModelOnItsOwnRecordMatchesAndWrongModelFailsStrict) {
  // a record made by the model itself (hold simulation, 1 % noise), replayed
  TempDir d;
  benchid::fit::RationalModel m;
  const double w = 2 * M_PI * 25, z = 0.08;
  m.poles = {cplx_t(-z * w, w * std::sqrt(1 - z * z)), cplx_t(-z * w, -w * std::sqrt(1 - z * z))};
  m.residues = {cplx_t(0, -w / 2), cplx_t(0, w / 2)};
  d.write("m.json", benchid::fit::model_json(m));
  benchid::test::Gaussian g(5);
  const auto u = g.take(8000);
  auto y = benchid::fit::simulate(m, u, 1000);
  std::string s = "time_s,cmd,resp\n";
  char b[96];
  for (std::size_t k = 0; k < u.size(); ++k) {
    std::snprintf(b, sizeof b, "%.4f,%.12g,%.12g\n", static_cast<double>(k) / 1000, u[k], y[k] + 0.01 * g());
    s += b;
  }
  const std::string rec = d.write("rec.csv", s);
  Outcome r = run(d, "replay " + d.file("m.json") + " " + rec + " --input cmd --output resp --hold zoh --strict -o " +
                         d.file("sim.csv"));
  ASSERT_EQ(r.code, 0) << r.err << r.out;
  EXPECT_NE(r.out.find("residual independence: pass"), std::string::npos) << r.out;
  EXPECT_TRUE(fs::exists(d.file("sim.csv")));
  // The same replay streamed in two passes (as a record above --stream-above
  // samples is): the same verdict, and the same samples in the CSV, whose
  // last line is the verdict.
  const auto verdict_of = [](const std::string& out) {
    const auto a = out.find("  match "), b = out.find('\n', a);
    return out.substr(a, b - a);
  };
  const auto lines_of = [](const std::string& path) {
    std::ifstream in(path);
    std::vector<std::string> v;
    for (std::string l; std::getline(in, l);) v.push_back(l);
    return v;
  };
  Outcome st = run(d, "replay " + d.file("m.json") + " " + rec + " --input cmd --output resp --hold zoh --strict " +
                          "--stream-above 1000 -o " + d.file("sim_streamed.csv"));
  ASSERT_EQ(st.code, 0) << st.err << st.out;
  EXPECT_NE(st.out.find("streamed in two passes"), std::string::npos) << st.out;
  EXPECT_EQ(verdict_of(st.out), verdict_of(r.out));
  const auto whole_csv = lines_of(d.file("sim.csv")), streamed_csv = lines_of(d.file("sim_streamed.csv"));
  ASSERT_EQ(streamed_csv.size(), whole_csv.size());
  EXPECT_EQ(streamed_csv.size(), 8000u + 3);  // comment, header, samples, verdict
  EXPECT_EQ(streamed_csv.back().rfind("# verdict: match ", 0), 0u) << streamed_csv.back();
  EXPECT_EQ(streamed_csv[1], "time_s,measured,simulated,residual");
  // a record that turns bad near its end: exit 2, and the CSV that was being
  // written as the record went by is not left behind
  d.write("bad.csv", s + "8.0000,1.0,oops\n");
  st = run(d, "replay " + d.file("m.json") + " " + d.file("bad.csv") + " --input cmd --output resp --hold zoh " +
                  "--stream-above 1000 -o " + d.file("sim_bad.csv"));
  EXPECT_EQ(st.code, 2) << st.err;
  EXPECT_NE(st.err.find("bad.csv:8002: "), std::string::npos) << st.err;
  EXPECT_FALSE(fs::exists(d.file("sim_bad.csv")));
  for (const auto& e : fs::directory_iterator(d.path()))
    EXPECT_EQ(e.path().filename().string().find("sim_bad"), std::string::npos) << e.path();
  benchid::fit::RationalModel wrong = m;
  for (auto& p : wrong.poles) p *= 1.3;
  d.write("wrong.json", benchid::fit::model_json(wrong));
  r = run(d, "replay " + d.file("wrong.json") + " " + rec + " --input cmd --output resp --hold zoh --strict");
  EXPECT_EQ(r.code, 3) << r.out;  // DESIGN.md: the verdict failed and --strict asked for it
  EXPECT_NE(r.out.find("residual independence: FAIL"), std::string::npos) << r.out;
  r = run(d, "replay " + d.file("m.json") + " " + rec + " --input cmd --output cmd");
  EXPECT_EQ(r.code, 2) << r.err;
  r = run(d, "replay " + rec + " " + rec + " --input cmd --output resp");
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_NE(r.err.find("not valid JSON"), std::string::npos) << r.err;
}

}  // namespace
