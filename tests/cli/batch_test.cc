// benchid batch: a fleet of generated units through the pipeline; the figures
// against each unit's truth, errors and limit failures per unit, shards
// merged (through GNU parallel) equal to the unsharded run, --jobs giving the
// same bytes as one job, and --resume after an interrupted run.
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <random>
#include <sstream>

#include "fit/model.h"
#include "fit/replay.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

namespace fs = std::filesystem;
using benchid::test::slurp;
using benchid::test::TempDir;

namespace {

constexpr int kUnits = 50;
constexpr double kRateHz = 1000;

// Unit k: a resonance at 40 + k/2 Hz, damping 0.05, DC gain 2 + k/50 (an
// invented production line of actuators), white-noise drive, 0.5 % output noise.
double unit_res_hz(int k) { return 40 + 0.5 * k; }
double unit_dc(int k) { return 2 + k / 50.0; }

std::string unit_record(int k) {
  const double w = 2 * M_PI * unit_res_hz(k), z = 0.05;
  benchid::fit::Zpk p;
  p.poles = {{-z * w, w * std::sqrt(1 - z * z)}, {-z * w, -w * std::sqrt(1 - z * z)}};
  p.gain = unit_dc(k) * w * w;
  const benchid::fit::RationalModel m = benchid::fit::from_zpk(p);
  std::mt19937_64 gen(1000 + static_cast<unsigned>(k));
  std::normal_distribution<double> n01;
  std::vector<double> u(16384);
  for (double& v : u) v = n01(gen);
  // the response applied to the samples as they are (a band-limited converter, no hold)
  const std::vector<double> y = benchid::fit::simulate_as_measured(m, u, kRateHz);
  std::ostringstream s;
  s << "time_s,drive_v,pos_mm\n";
  char b[96];
  for (std::size_t i = 0; i < u.size(); ++i) {
    std::snprintf(b, sizeof b, "%.3f,%.6f,%.6f\n", static_cast<double>(i) / kRateHz, u[i], y[i] + 0.01 * n01(gen));
    s << b;
  }
  return s.str();
}

struct Fleet {
  TempDir dir;
  std::string manifest;
};

// 50 units; U013 is missing its file, U027 has a dead drive channel (no
// energy), U042's resonance limits are set wrong on purpose (it must fail).
const Fleet& fleet() {
  static Fleet* f = [] {
    auto* fl = new Fleet;
    // a product of known order: the manifest fixes order, delay and band, as a test floor would
    std::string m = "# invented production fleet for the batch test\n"
                    "unit,record,input,output,order,delay,band,resonance_hz_min,resonance_hz_max,dc_gain_min\n";
    for (int k = 0; k < kUnits; ++k) {
      char id[8];
      std::snprintf(id, sizeof id, "U%03d", k);
      const std::string rec = std::string(id) + ".csv";
      if (k == 27) {
        std::string s = "time_s,drive_v,pos_mm\n";
        for (int i = 0; i < 16384; ++i) s += std::to_string(i / kRateHz) + ",0,0.1\n";
        fl->dir.write(rec, s);
      } else if (k != 13) {
        fl->dir.write(rec, unit_record(k));
      }
      const double f0 = unit_res_hz(k) * (k == 42 ? 1.2 : 0.98), f1 = unit_res_hz(k) * (k == 42 ? 1.3 : 1.02);
      char row[160];
      std::snprintf(row, sizeof row, "%s,%s,drive_v,pos_mm,2,0,1:300,%.4f,%.4f,%.3f\n", id, rec.c_str(), f0, f1,
                    unit_dc(k) * 0.95);
      m += row;
    }
    fl->manifest = fl->dir.write("fleet.csv", m);
    return fl;
  }();
  return *f;
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> v;
  std::istringstream s(text);
  for (std::string l; std::getline(s, l);) v.push_back(l);
  return v;
}

TEST(Batch, EveryUnitGetsItsLineWithFiguresErrorsAndVerdicts) {
  const Fleet& f = fleet();
  const TempDir d;
  const auto r = benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("all.jsonl") + " --jobs 2 -q");
  EXPECT_EQ(r.code, 1) << "two units cannot be analysed: " << r.err;
  const auto lines = lines_of(slurp(d.file("all.jsonl")));
  ASSERT_EQ(lines.size(), static_cast<std::size_t>(kUnits));
  for (int k = 0; k < kUnits; ++k) {
    SCOPED_TRACE(k);
    const nlohmann::json j = nlohmann::json::parse(lines[static_cast<std::size_t>(k)]);
    char id[8];
    std::snprintf(id, sizeof id, "U%03d", k);
    EXPECT_EQ(j["unit"], id) << "manifest order";
    if (k == 13 || k == 27) {
      EXPECT_EQ(j["status"], "error");
      EXPECT_NE(j["error"].get<std::string>().find(k == 13 ? "U013.csv" : "drive_v"), std::string::npos) << j["error"];
      continue;
    }
    ASSERT_EQ(j["status"], k == 42 ? "fail" : "pass") << j.dump();
    // fit-issue tolerances (issue 4): natural frequency within 1 %, damping within 15 %
    ASSERT_EQ(j["resonances"].size(), 1u) << j.dump();
    EXPECT_NEAR(j["resonances"][0]["freq_hz"].get<double>(), unit_res_hz(k), 0.01 * unit_res_hz(k));
    EXPECT_NEAR(j["resonances"][0]["damping"].get<double>(), 0.05, 0.15 * 0.05);
    // DC gain within 3 sigma of its random error: about 1 % here (0.5 % noise, 15 averages)
    EXPECT_NEAR(j["dc_gain"].get<double>(), unit_dc(k), 0.03 * unit_dc(k));
  }
}

TEST(Batch, ShardsThroughGnuParallelMergeToTheUnshardedRun) {
  const Fleet& f = fleet();
  const TempDir d;
  const std::string exe = BENCHID_EXE;
  ASSERT_EQ(benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("all.jsonl") + " -q").code, 1);
  const bool have_parallel = std::system("command -v parallel >/dev/null 2>&1") == 0;
  if (have_parallel) {
    const std::string cmd = "cd " + d.path() + " && parallel --will-cite " + exe + " batch " + f.manifest +
                            " -o shard{}.jsonl --shard {}/4 -q ::: 0 1 2 3 >/dev/null 2>&1";
    std::system(cmd.c_str());  // exit status 1: some shards hold the failing units
  } else {
    for (int i = 0; i < 4; ++i)
      benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("shard" + std::to_string(i) + ".jsonl") +
                                        " --shard " + std::to_string(i) + "/4 -q");
  }
  std::vector<std::string> merged;
  for (int i = 0; i < 4; ++i) {
    const auto l = lines_of(slurp(d.file("shard" + std::to_string(i) + ".jsonl")));
    EXPECT_GE(l.size(), 12u);
    merged.insert(merged.end(), l.begin(), l.end());
  }
  std::vector<std::string> all = lines_of(slurp(d.file("all.jsonl")));
  std::sort(merged.begin(), merged.end());
  std::sort(all.begin(), all.end());
  EXPECT_EQ(merged, all);
  if (!have_parallel) GTEST_SKIP() << "GNU parallel is not installed (tools/deps.sh --test installs it); shards were run one by one";
}

TEST(Batch, JobsGiveTheSameBytesAsOneJob) {
  const Fleet& f = fleet();
  const TempDir d;
  benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("one.jsonl") + " -q");
  benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("two.jsonl") + " --jobs 2 -q");
  const std::string one = slurp(d.file("one.jsonl"));
  EXPECT_FALSE(one.empty());
  EXPECT_TRUE(one == slurp(d.file("two.jsonl")));
}

TEST(Batch, ResumeRunsOnlyWhatAnInterruptedRunLeft) {
  const Fleet& f = fleet();
  const TempDir d;
  benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("full.jsonl") + " -q");
  const std::string full = slurp(d.file("full.jsonl"));
  // an interrupted run: 10 whole lines and half of the 11th
  const auto lines = lines_of(full);
  std::string cut;
  for (int i = 0; i < 10; ++i) cut += lines[static_cast<std::size_t>(i)] + "\n";
  cut += lines[10].substr(0, lines[10].size() / 2);
  d.write("part.jsonl", cut);
  const auto no = benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("part.jsonl") + " -q");
  EXPECT_EQ(no.code, 2) << "an existing file needs --resume";
  EXPECT_EQ(slurp(d.file("part.jsonl")), cut) << "and is left as it was";
  const auto r = benchid::test::run_benchid(d, "batch " + f.manifest + " -o " + d.file("part.jsonl") + " --resume");
  EXPECT_NE(r.out.find("40 run now, 10 already done"), std::string::npos) << r.out;
  EXPECT_EQ(slurp(d.file("part.jsonl")), full);
}

TEST(Batch, BadManifestIsRefusedBeforeAnythingRuns) {
  const TempDir d;
  struct Case {
    std::string manifest, says;
  } cases[] = {
      {"unit,record,input,output,pm_minimum\nA,a.csv,u,y,40\n", "column 'pm_minimum' is unknown"},
      {"unit,record,input\nA,a.csv,u\n", "no column 'output'"},
      {"unit,record,input,output\nA,a.csv,u,y\nA,b.csv,u,y\n", "unit 'A' appears twice"},
      {"unit,record,input,output,pm_min\nA,a.csv,u,y,40\n", "needs a controller"},
      {"unit,record,input,output,controller\nA,a.csv,u,y,pid:kq=1\n", ":2: controller"},
      {"unit,record,input,output\nA,a.csv,u\n", ":2: 3 fields; expected 4"},
  };
  for (const auto& c : cases) {
    SCOPED_TRACE(c.manifest);
    const std::string m = d.write("m.csv", c.manifest);
    const auto r = benchid::test::run_benchid(d, "batch " + m + " -o " + d.file("r.jsonl"));
    EXPECT_EQ(r.code, 2);
    EXPECT_NE(r.err.find(c.says), std::string::npos) << r.err;
    EXPECT_FALSE(fs::exists(d.file("r.jsonl")));
  }
}

// The golden-unit band as a batch limit (issue 9): units 0 and 4 of the
// fleet (resonances at 40 and 42 Hz, DC gains 2 and 2.08) are the good
// units; unit 2 (41 Hz, 2.04) lies between them and passes; unit 30 (55 Hz,
// DC gain 2.6: 1.9 dB above the band, beyond the 1 dB allowed) leaves the
// band from the lowest lines on and fails the envelope check.
TEST(Batch, TheGoodUnitsBandIsALimit) {
  TempDir d;
  for (int k : {0, 4, 2, 30}) d.write("U" + std::to_string(k) + ".csv", unit_record(k));
  for (int k : {0, 4}) {
    const auto r = benchid::test::run_benchid(d, "frf " + d.file("U" + std::to_string(k) + ".csv") +
                                                     " --input drive_v --output pos_mm -q -o " + d.file("good" + std::to_string(k) + ".csv"));
    ASSERT_EQ(r.code, 0) << r.err;
  }
  d.write("m.csv", "unit,record,input,output,order,delay,band,envelope\n"
                   "U2,U2.csv,drive_v,pos_mm,2,0,1:300,good0.csv;good4.csv\n"
                   "U30,U30.csv,drive_v,pos_mm,2,0,1:300,good0.csv;good4.csv\n");
  const auto r = benchid::test::run_benchid(d, "batch " + d.file("m.csv") + " -o " + d.file("out.jsonl"));
  EXPECT_EQ(r.code, 3) << r.err;  // a unit failed its limits
  const auto lines = lines_of(slurp(d.file("out.jsonl")));
  ASSERT_EQ(lines.size(), 2u);
  const auto u2 = nlohmann::json::parse(lines[0]), u30 = nlohmann::json::parse(lines[1]);
  EXPECT_EQ(u2["status"], "pass") << lines[0];
  EXPECT_EQ(u2["envelope"]["lines_outside"], 0) << lines[0];
  EXPECT_EQ(u30["status"], "fail") << lines[1];
  EXPECT_GT(u30["envelope"]["lines_outside"].get<int>(), 100);
  EXPECT_LT(u30["envelope"]["outside_hz"][0].get<double>(), 1.0) << lines[1];  // from the first lines on
  // the limit needs an envelope
  d.write("bad.csv", "unit,record,input,output,envelope_outside_max\nU2,U2.csv,drive_v,pos_mm,3\n");
  const auto bad = benchid::test::run_benchid(d, "batch " + d.file("bad.csv") + " -o " + d.file("bad.jsonl"));
  EXPECT_EQ(bad.code, 2);
  EXPECT_NE(bad.err.find("envelope_outside_max needs an envelope"), std::string::npos) << bad.err;
}

}  // namespace
