// The catalogue of hostile and malformed inputs in tests/bad_inputs/: every
// reader (record CSV, sound files, FRF CSV, model JSON, controller JSON,
// stepped-sine plans, excitation sidecars, batch manifests) must answer each
// with exit status 2 and one line "benchid: error: ..." that names the file
// and says what was expected, write no output (nor leave a temporary file),
// and leave every input byte-identical. Common practice for command-line
// tools; the cases and their expected fragments are in cases.tsv.
#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
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

struct Case {
  std::string file, args, fragment;
};

std::vector<Case> load_cases() {
  std::ifstream in(std::string(BENCHID_TEST_DATA_DIR) + "/bad_inputs/cases.tsv");
  std::vector<Case> cases;
  for (std::string line; std::getline(in, line);) {
    if (line.empty() || line[0] == '#') continue;
    const auto a = line.find('\t'), b = line.find('\t', a + 1);
    cases.push_back({line.substr(0, a), line.substr(a + 1, b - a - 1), line.substr(b + 1)});
  }
  return cases;
}

std::string replace_all(std::string s, const std::string& from, const std::string& to) {
  for (std::size_t p = 0; (p = s.find(from, p)) != std::string::npos; p += to.size()) s.replace(p, from.size(), to);
  return s;
}

// Every file under dir with its bytes.
std::map<std::string, std::string> snapshot(const std::string& dir) {
  std::map<std::string, std::string> m;
  for (const auto& e : fs::recursive_directory_iterator(dir))
    if (e.is_regular_file()) m[fs::relative(e.path(), dir).string()] = slurp(e.path().string());
  return m;
}

void expect_clean_refusal(const TempDir& d, const std::string& file, const std::string& args,
                          const std::string& fragment) {
  SCOPED_TRACE(file + ": benchid " + args);
  const std::string out = d.file("never_written.out");
  const auto before = snapshot(d.path());
  std::string cmd = replace_all(args, "{f}", d.file(file));
  cmd = replace_all(cmd, "{out}", out);
  cmd = replace_all(cmd, " ok/", " " + d.path() + "/ok/");
  const Outcome r = run_benchid(d, cmd);
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_EQ(r.err.rfind("benchid: error: ", 0), 0u) << r.err;
  EXPECT_EQ(std::count(r.err.begin(), r.err.end(), '\n'), 1) << "one line: " << r.err;
  EXPECT_NE(r.err.find(fs::path(file).filename().string()), std::string::npos) << "names the file: " << r.err;
  EXPECT_NE(r.err.find(fragment), std::string::npos) << "expected '" << fragment << "' in: " << r.err;
  EXPECT_FALSE(fs::exists(out)) << "an output was written";
  EXPECT_EQ(snapshot(d.path()), before) << "an input changed, or a file (a temporary?) was left behind";
}

TEST(BadInputs, CatalogueHasAtLeastThirtyFilesAcrossEveryReader) {
  const auto cases = load_cases();
  std::map<std::string, int> per_command;
  std::map<std::string, int> files;
  for (const auto& c : cases) {
    ++per_command[c.args.substr(0, c.args.find(' '))];
    ++files[c.file];
  }
  EXPECT_GE(files.size(), 30u);
  for (const char* cmd : {"frf", "fit", "loop", "batch"}) EXPECT_GE(per_command[cmd], 3) << cmd;
  for (const auto& [f, n] : files)
    EXPECT_TRUE(fs::exists(std::string(BENCHID_TEST_DATA_DIR) + "/bad_inputs/" + f)) << f;
}

TEST(BadInputs, EveryCatalogueFileIsRefusedCleanly) {
  TempDir d;
  fs::copy(std::string(BENCHID_TEST_DATA_DIR) + "/bad_inputs", d.path(), fs::copy_options::recursive);
  for (const auto& c : load_cases()) expect_clean_refusal(d, c.file, c.args, c.fragment);
}

// Too large to commit, so made here: a line of 2 MB and 100 000 columns.
// The stated limits (1 MiB a line, 4096 columns) refuse them with a message
// rather than by running out of memory.
TEST(BadInputs, GeneratedGiantLineAndTooManyColumnsAreRefusedAtTheStatedLimits) {
  TempDir d;
  std::string long_line = "time_s,u,y\n0,1,2\n0.001," + std::string(2u << 20, '7') + ",3\n";
  d.write("long_line.csv", long_line);
  expect_clean_refusal(d, "long_line.csv", "frf {f} --input u --output y -o {out}", ":3: line longer than 1 MiB");
  std::ostringstream wide;
  wide << "time_s";
  for (int i = 0; i < 100000; ++i) wide << ",c" << i;
  wide << "\n";
  d.write("wide.csv", wide.str());
  expect_clean_refusal(d, "wide.csv", "frf {f} --input c1 --output c2 -o {out}", ":1: 100001 columns; expected at most 4096");
}

}  // namespace
