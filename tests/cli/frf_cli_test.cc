// `benchid frf` as a user runs it: a good log gives an FRF CSV; every bad
// input gives exit status 2, exactly one "benchid: error:" line naming the
// file (and line or channel) and what was expected, no output file, and the
// input left byte-identical (DESIGN.md, "Command line").
#include <gtest/gtest.h>
#include <sndfile.h>

#include <cmath>
#include <complex>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "ident/frf_csv.h"
#include "tests/support/signals.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

using benchid::test::Gaussian;
using benchid::test::Outcome;
using benchid::test::slurp;
using benchid::test::TempDir;
namespace fs = std::filesystem;

namespace {

Outcome run(const TempDir& d, const std::string& args) { return benchid::test::run_benchid(d, args); }

// A valid log: white noise through a low-pass, with output noise, 2 kHz.
std::string good_log(std::size_t n = 20000) {
  Gaussian g(1);
  const auto u = g.take(n);
  const auto y = benchid::test::Biquad::butterworth_lowpass(0.05).filter(u);
  std::string s = "time_s,drive_v,speed_rads\n";
  char b[128];
  for (std::size_t i = 0; i < n; ++i) {
    std::snprintf(b, sizeof b, "%.6f,%.9g,%.9g\n", static_cast<double>(i) / 2000.0, u[i], y[i] + 0.01 * g());
    s += b;
  }
  return s;
}

TEST(FrfCli, WritesFrfCsvAndSummary) {
  TempDir d;
  const auto log = d.write("log.csv", good_log());
  const Outcome r = run(d, "frf " + log + " --input drive_v --output speed_rads --segment 1024 -o " + d.file("frf.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_TRUE(r.out.empty());
  EXPECT_NE(r.err.find("20000 samples at 2000 Hz"), std::string::npos) << r.err;
  const auto f = benchid::ident::read_frf_csv(d.file("frf.csv"));
  EXPECT_EQ(f.size(), 512u);
  EXPECT_EQ(f.input, "drive_v");
  EXPECT_EQ(f.input_unit, "V");
  EXPECT_EQ(f.averages, 38u);  // (20000 - 1024)/512 + 1
  // at 10 Hz the low-pass (fc 100 Hz) is flat: |H| = 1 within a few rel_err
  EXPECT_NEAR(std::abs(f.h[4]), 1.0, 0.01);
  EXPECT_GT(f.coherence[4], 0.99);
}

TEST(FrfCli, WritesToStdoutWithoutOutputPathAndTakesColumnNumbers) {
  TempDir d;
  const auto log = d.write("log.csv", good_log());
  const Outcome r = run(d, "frf " + log + " --input 2 --output 3 --segment 512 -q");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_EQ(r.out.rfind("# benchid frf 1\n", 0), 0u);
  EXPECT_TRUE(r.err.empty()) << r.err;
}

TEST(FrfCli, HelpExplainsEveryOptionWithUnitAndDefault) {
  TempDir d;
  const Outcome r = run(d, "frf --help");
  EXPECT_EQ(r.code, 0);
  for (const char* s : {"--input", "--output", "--reference", "--rate", "Hz", "--segment", "default 4096",
                        "--resolution", "--overlap", "default 0.5", "--window", "default hann", "--detrend",
                        "--estimator", "--periods", "--period", "--band", "--scale", "--confidence",
                        "default 0.95", "--jitter-tolerance", "--loop-gain"})
    EXPECT_NE(r.out.find(s), std::string::npos) << s;
}

TEST(FrfCli, PeriodicRecordCountsPeriodsAndIsExactOnExcitedLines) {
  // 8 periods of 500 samples of a multisine on every 4th line through a
  // one-pole low-pass y[n] = 0.9 y[n-1] + 0.1 u[n]; one period of settling is
  // logged first and dropped with the lines' own transient (0.9^500 ~ 1e-23).
  TempDir d;
  const std::size_t period = 500, periods = 9;
  std::vector<double> u(period * periods), y(u.size());
  for (std::size_t i = 0; i < u.size(); ++i)
    for (std::size_t k = 4; k < 200; k += 4)
      u[i] += std::cos(2 * M_PI * static_cast<double>(k * (i % period)) / period + 0.37 * static_cast<double>(k * k));
  double state = 0;
  for (std::size_t i = 0; i < u.size(); ++i) y[i] = state = 0.9 * state + 0.1 * u[i];
  std::string s = "u,y\n";
  char b[96];
  for (std::size_t i = period; i < u.size(); ++i) {
    std::snprintf(b, sizeof b, "%.17g,%.17g\n", u[i], y[i]);
    s += b;
  }
  const auto log = d.write("ms.csv", s);
  const Outcome r = run(d, "frf " + log + " --input u --output y --rate 1000 --periods 8 -o " + d.file("frf.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const auto f = benchid::ident::read_frf_csv(d.file("frf.csv"));
  EXPECT_EQ(f.estimator, benchid::ident::Estimator::periodic);
  EXPECT_EQ(f.averages, 8u);
  ASSERT_EQ(f.size(), 49u);  // lines 4, 8, ..., 196; the others carry no excitation
  for (std::size_t i = 0; i < f.size(); ++i) {
    const auto z1 = std::polar(1.0, -2 * M_PI * f.freq_hz[i] / 1000.0);
    const std::complex<double> h = 0.1 / (1.0 - 0.9 * z1);
    // noise-free and leakage-free: only the CSV's 12 significant digits remain
    EXPECT_LT(std::abs(f.h[i] - h) / std::abs(h), 1e-9) << f.freq_hz[i];
  }
  EXPECT_NE(r.err.find("lines left out as not excited"), std::string::npos) << r.err;
}

TEST(FrfCli, SoundFileChannelsAreScaledToUnits) {
  // ch2 = 0.25 ch1 in full scale; --scale 1:10 --scale 2:4 (units per full
  // scale) makes the response (0.25*4)/10 = 0.1 in units.
  TempDir d;
  SF_INFO info{};
  info.samplerate = 8000;
  info.channels = 2;
  info.format = SF_FORMAT_WAV | SF_FORMAT_FLOAT;
  SNDFILE* f = sf_open(d.file("rig.wav").c_str(), SFM_WRITE, &info);
  Gaussian g(3);
  std::vector<float> buf(2 * 40000);
  for (std::size_t i = 0; i < 40000; ++i) {
    const double x = 0.2 * g();
    buf[2 * i] = static_cast<float>(x);
    buf[2 * i + 1] = static_cast<float>(0.25 * x);
  }
  sf_writef_float(f, buf.data(), 40000);
  sf_close(f);
  const Outcome r = run(d, "frf " + d.file("rig.wav") + " --input 1 --output 2 --scale 1:10 --scale 2:4 --segment 1024 -o " +
                               d.file("frf.csv"));
  ASSERT_EQ(r.code, 0) << r.err;
  const auto fr = benchid::ident::read_frf_csv(d.file("frf.csv"));
  EXPECT_NEAR(fr.rate_hz, 8000.0, 0.0);
  for (std::size_t i = 0; i < fr.size(); i += 50) EXPECT_NEAR(std::abs(fr.h[i]), 0.1, 1e-6) << fr.freq_hz[i];  // float samples
}

struct BadCase {
  const char* name;
  std::string file;      // file name inside the temp dir
  std::string content;   // its bytes
  std::string args;      // after the file path; "-o OUT" is added
  std::string fragment;  // expected in the message
  bool names_file = true;
};

std::string log_with_line(const std::string& bad_line) {
  std::string s = "time_s,drive_v,speed_rads\n0,1,2\n0.0005,2,3\n";
  return s + bad_line + "\n0.0015,4,5\n";
}

std::string constant_input_log() {
  std::string s = "t,u,y\n";
  for (int i = 0; i < 5000; ++i) s += std::to_string(i * 0.001) + ",1.5," + std::to_string(i % 7) + "\n";
  return s;
}

std::string wav_bytes(bool truncate) {
  TempDir d;
  SF_INFO info{};
  info.samplerate = 8000;
  info.channels = 2;
  info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_16;
  SNDFILE* f = sf_open(d.file("w.wav").c_str(), SFM_WRITE, &info);
  std::vector<short> buf(2 * 8000, 100);
  sf_writef_short(f, buf.data(), 8000);
  sf_close(f);
  std::string s = slurp(d.file("w.wav"));
  if (truncate) s.resize(s.size() / 3);
  return s;
}

const std::string kArgs = "--input drive_v --output speed_rads --segment 8";

std::vector<BadCase> bad_cases() {
  return {
      {"EmptyFile", "empty.csv", "", "--input 2 --output 3", "the file is empty"},
      {"HeaderOnly", "header.csv", "time_s,drive_v,speed_rads\n", kArgs + "192", "0 samples, fewer than one segment of 8192"},
      {"RaggedRow", "ragged.csv", log_with_line("0.001,3"), kArgs, "ragged.csv:4: 2 fields; expected 3"},
      {"TextInNumber", "text.csv", log_with_line("0.001,abc,4"), kArgs, "text.csv:4: column 'drive_v' value 'abc' is not a number"},
      {"NaN", "nan.csv", log_with_line("0.001,NaN,4"), kArgs, "nan.csv:4: column 'drive_v' value 'NaN' is not finite"},
      {"Inf", "inf.csv", log_with_line("0.001,3,-inf"), kArgs, "inf.csv:4: column 'speed_rads' value '-inf' is not finite"},
      {"TimeGoesBack", "back.csv", log_with_line("0.0004,3,4"), kArgs, "back.csv:4: time 0.0004 s is not after"},
      {"JitteryTime", "jitter.csv", log_with_line("0.0012,3,4"), kArgs, "jitter.csv:4: time step 0.0007 s"},
      {"TooFewSamples", "short.csv", log_with_line("0.001,3,4"), "--input drive_v --output speed_rads",
       "4 samples, fewer than one segment of 4096"},
      {"UnknownChannel", "chan.csv", good_log(100), "--input torque --output speed_rads",
       "no channel 'torque'; expected a name or number of 1=time_s, 2=drive_v, 3=speed_rads"},
      {"ChannelOutOfRange", "range.csv", good_log(100), "--input 7 --output 3", "channel 7 is out of range; expected 1 to 3"},
      {"TimeColumnAsInput", "tcol.csv", good_log(100), "--input 1 --output 3", "is the time column"},
      {"ZeroEnergyInput", "const.csv", constant_input_log(), "--input u --output y --segment 256",
       "channel 'u' has no energy"},
      {"SameInputAndOutput", "same.csv", good_log(100), "--input 2 --output drive_v", "input and output are the same channel"},
      {"UnreadableSoundFile", "bad.wav", std::string("RIFF\x10\0\0\0WAVEfmt \x01\0\0\0", 20), "--input 1 --output 2",
       "not a readable sound file"},
      {"TruncatedSoundFile", "cut.wav", wav_bytes(true), "--input 1 --output 2 --segment 256", "truncated"},
      {"BinaryFile", "blob.csv", std::string("\x7f" "ELF\x02\x01\x01\0\0\0", 10), "--input 1 --output 2",
       "not a readable sound file"},
      {"Utf16File", "wide.csv", std::string("\xFF\xFEt\0,\0u\0", 8), "--input 1 --output 2", "UTF-16"},
      {"NoRate", "norate.csv", "u,y\n1,2\n3,4\n", "--input u --output y", "no time column"},
      {"BadOverlap", "ovl.csv", good_log(100), "--input 2 --output 3 --overlap 1.5", "overlap = 1.5: must be in [0, 0.95]",
       false},
      {"UnknownWindow", "win.csv", good_log(100), "--input 2 --output 3 --window kaiser", "window 'kaiser' is unknown",
       false},
      {"EmptyBand", "band.csv", good_log(5000), "--input 2 --output 3 --segment 256 --band 2000:3000",
       "holds no line", false},
      {"BadScale", "scale.csv", good_log(100), "--input 2 --output 3 --scale 2:zero", "--scale factor 'zero' is not a number",
       false},
  };
}

void PrintTo(const BadCase& c, std::ostream* os) { *os << c.name; }

class FrfCliBadInput : public ::testing::TestWithParam<BadCase> {};

TEST_P(FrfCliBadInput, ExitsTwoWithOneLineAndNoOutput) {
  const BadCase& c = GetParam();
  TempDir d;
  const auto in = d.write(c.file, c.content);
  const std::string out = d.file("out.csv");
  const Outcome r = run(d, "frf " + in + " " + c.args + " -o " + out);
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_EQ(r.err.rfind("benchid: error: ", 0), 0u) << r.err;
  EXPECT_EQ(std::count(r.err.begin(), r.err.end(), '\n'), 1) << r.err;
  EXPECT_NE(r.err.find(c.fragment), std::string::npos) << r.err;
  if (c.names_file) {
    EXPECT_NE(r.err.find(c.file), std::string::npos) << r.err;
  }
  EXPECT_FALSE(fs::exists(out));
  EXPECT_EQ(slurp(in), c.content);  // input byte-identical
  std::size_t files = 0;
  for (const auto& e : fs::directory_iterator(d.path())) files += e.is_regular_file();
  EXPECT_EQ(files, 1u) << "a temporary or partial file was left behind";
}

INSTANTIATE_TEST_SUITE_P(Catalogue, FrfCliBadInput, ::testing::ValuesIn(bad_cases()),
                         [](const auto& info) { return std::string(info.param.name); });

TEST(FrfCli, RefusesOutputEqualToInput) {
  TempDir d;
  const std::string content = good_log(5000);
  const auto log = d.write("log.csv", content);
  const Outcome r = run(d, "frf " + log + " --input 2 --output 3 --segment 256 -o " + log);
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("is the input"), std::string::npos) << r.err;
  EXPECT_EQ(slurp(log), content);
  // the same file under another spelling
  const Outcome r2 = run(d, "frf " + log + " --input 2 --output 3 --segment 256 -o " + d.path() + "/./log.csv");
  EXPECT_EQ(r2.code, 2);
  EXPECT_EQ(slurp(log), content);
}

TEST(FrfCli, MissingFileAndUnknownOptionAreUsageErrors) {
  TempDir d;
  Outcome r = run(d, "frf " + d.file("nope.csv") + " --input 1 --output 2");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("cannot open '" + d.file("nope.csv") + "': No such file or directory"), std::string::npos)
      << r.err;
  r = run(d, "frf x.csv --input 1 --output 2 --bogus");
  EXPECT_EQ(r.code, 2);
  EXPECT_EQ(r.err.rfind("benchid: error: ", 0), 0u) << r.err;
  r = run(d, "frf x.csv --input 1");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("--output is required"), std::string::npos) << r.err;
}

}  // namespace
