// The overwrite rule (README, "Outputs"): an output may replace an existing
// file only when that file is empty or benchid's own earlier result of the
// same kind, or with --force; an input is never replaced, not even with
// --force; a refusal is exit status 2 with one line naming the file, and the
// existing file is left byte-identical. Common practice for careful
// measurement software (a measurement log is never lost to a typo in -o).
#include <gtest/gtest.h>

#include <algorithm>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

namespace fs = std::filesystem;
using benchid::test::Outcome;
using benchid::test::run_benchid;
using benchid::test::slurp;
using benchid::test::TempDir;

namespace {

const std::string kOk = std::string(BENCHID_TEST_DATA_DIR) + "/bad_inputs/ok/";

std::string frf_args(const std::string& out) { return kOk + "record.csv --input u --output y -q -o " + out; }

// No temporary sibling is left in the directory.
void expect_no_temporaries(const TempDir& d) {
  for (const auto& e : fs::directory_iterator(d.path()))
    EXPECT_EQ(e.path().filename().string().find(".tmp."), std::string::npos) << e.path();
}

void expect_refused(const Outcome& r, const std::string& path, const std::string& fragment) {
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_NE(r.err.find("benchid: error: output '" + path + "'"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find(fragment), std::string::npos) << r.err;
}

// A 16-bit mono WAV of 8 samples with no software tag: another program's file.
std::string foreign_wav() {
  std::string w = "RIFF";
  auto u32 = [&](std::uint32_t v) { for (int i = 0; i < 4; ++i) w += static_cast<char>((v >> (8 * i)) & 0xff); };
  auto u16 = [&](std::uint16_t v) { for (int i = 0; i < 2; ++i) w += static_cast<char>((v >> (8 * i)) & 0xff); };
  u32(36 + 16);
  w += "WAVEfmt ";
  u32(16), u16(1), u16(1), u32(8000), u32(16000), u16(2), u16(16);
  w += "data";
  u32(16);
  for (int i = 0; i < 8; ++i) u16(static_cast<std::uint16_t>(i * 1000));
  return w;
}

TEST(Overwrite, AForeignFileIsRefusedAndKeptUnlessForced) {
  TempDir d;
  const std::string notes = d.write("notes.csv", "measurement notes, not an FRF\n1,2,3\n");
  expect_refused(run_benchid(d, "frf " + frf_args(notes)), notes,
                 "exists and is not an earlier benchid FRF CSV; expected a new name, or --force");
  EXPECT_EQ(slurp(notes), "measurement notes, not an FRF\n1,2,3\n");
  expect_no_temporaries(d);
  const Outcome forced = run_benchid(d, "frf " + frf_args(notes) + " --force");
  ASSERT_EQ(forced.code, 0) << forced.err;
  EXPECT_EQ(slurp(notes).rfind("# benchid frf", 0), 0u);
}

TEST(Overwrite, OwnEarlierResultOfTheSameKindIsReplaced) {
  TempDir d;
  const std::string out = d.file("h.csv");
  ASSERT_EQ(run_benchid(d, "frf " + frf_args(out)).code, 0);
  const Outcome again = run_benchid(d, "frf " + frf_args(out) + " --segment 1024");
  ASSERT_EQ(again.code, 0) << again.err;
  EXPECT_NE(slurp(out).find("# segment=1024"), std::string::npos);
  // loop JSON and replay CSV: run twice onto the same name
  const std::string loop_out = d.file("l.json");
  for (int i = 0; i < 2; ++i) {
    const Outcome r = run_benchid(d, "loop " + kOk + "model.json --controller pid:kp=1,ki=1 -o " + loop_out);
    EXPECT_EQ(r.code == 0 || r.code == 3, true) << r.err;  // 3: a limit not met, the file is written all the same
    EXPECT_TRUE(fs::exists(loop_out));
  }
}

TEST(Overwrite, AnEmptyFileIsReplaced) {
  TempDir d;
  const std::string out = d.write("h.csv", "");
  const Outcome r = run_benchid(d, "frf " + frf_args(out));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_GT(fs::file_size(out), 100u);
}

TEST(Overwrite, BenchidsResultOfAnotherKindIsRefused) {
  TempDir d;
  const std::string frf = d.file("h.csv");
  ASSERT_EQ(run_benchid(d, "frf " + frf_args(frf)).code, 0);
  const std::string before = slurp(frf);
  expect_refused(run_benchid(d, "loop " + kOk + "model.json --controller pid:kp=1 -o " + frf), frf,
                 "is not an earlier benchid loop JSON");
  EXPECT_EQ(slurp(frf), before);
}

TEST(Overwrite, ADirectoryIsRefusedEvenWithForce) {
  TempDir d;
  fs::create_directory(d.file("folder"));
  expect_refused(run_benchid(d, "frf " + frf_args(d.file("folder")) + " --force"), d.file("folder"),
                 "is a directory; expected a file name");
}

TEST(Overwrite, AnInputIsNeverReplacedEvenWithForce) {
  TempDir d;
  const std::string rec = d.write("rec.csv", slurp(kOk + "record.csv"));
  const Outcome r = run_benchid(d, "frf " + rec + " --input u --output y -q --force -o " + rec);
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("is the input"), std::string::npos) << r.err;
  EXPECT_EQ(slurp(rec), slurp(kOk + "record.csv"));
}

TEST(Overwrite, SoundFilesAreToldApartByBenchidsSoftwareTag) {
  TempDir d;
  const std::string ours = d.file("sig.wav"), theirs = d.write("take1.wav", foreign_wav());
  const std::string args = "excite multisine -q --rate 8000 --f0 10 --f1 100 --amplitude 0.1";
  ASSERT_EQ(run_benchid(d, args + " -o " + ours).code, 0);
  EXPECT_EQ(run_benchid(d, args + " -o " + ours).code, 0);  // our own: replaced
  expect_refused(run_benchid(d, args + " -o " + theirs), theirs, "is not an earlier benchid excitation signal");
  EXPECT_EQ(slurp(theirs), foreign_wav());
  EXPECT_FALSE(fs::exists(d.file("take1.excite.json")));  // nothing written, not even the sidecar
  // a foreign sidecar path is refused before the signal is written
  const std::string side = d.write("plan.json", "{\"note\": \"mine\"}\n");
  expect_refused(run_benchid(d, args + " -o " + d.file("new.wav") + " --sidecar " + side), side,
                 "is not an earlier benchid excitation sidecar or plan");
  EXPECT_FALSE(fs::exists(d.file("new.wav")));
  expect_no_temporaries(d);
}

// Nothing is written but the outputs asked for: the directory holds exactly
// the inputs and those outputs afterwards (no stray or temporary files).
TEST(Overwrite, OnlyTheRequestedFilesAppear) {
  TempDir d;
  const std::string rec = d.write("rec.csv", slurp(kOk + "record.csv"));
  auto listing = [&] {
    std::vector<std::string> names;
    for (const auto& e : fs::directory_iterator(d.path())) names.push_back(e.path().filename().string());
    std::sort(names.begin(), names.end());
    return names;
  };
  ASSERT_EQ(run_benchid(d, "frf " + rec + " --input u --output y -q -o " + d.file("h.csv") + " --report " + d.file("h.txt")).code, 0);
  EXPECT_EQ(listing(), (std::vector<std::string>{"h.csv", "h.txt", "rec.csv"}));
  ASSERT_EQ(run_benchid(d, "excite steps -q --rate 1000 --f0 5 --f1 50 --count 3 --plan " + d.file("p.json")).code, 0);
  EXPECT_EQ(listing(), (std::vector<std::string>{"h.csv", "h.txt", "p.json", "rec.csv"}));
  const Outcome lp = run_benchid(d, "loop " + kOk + "model.json --controller pid:kp=1,ki=1 -o " + d.file("l.json"));
  ASSERT_EQ(lp.code, 0) << lp.err;
  EXPECT_EQ(listing(), (std::vector<std::string>{"h.csv", "h.txt", "l.json", "p.json", "rec.csv"}));
}

}  // namespace
