// Runs the benchid executable as a user would, capturing its exit status,
// stdout and stderr (through files in the test's scratch directory).
#pragma once

#include <sys/wait.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include "tests/support/temp_dir.h"

namespace benchid::test {

struct Outcome {
  int code;
  std::string out, err;
};

inline std::string slurp(const std::string& p) {
  std::ifstream in(p, std::ios::binary);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

// `args` after the executable's name; stdin is empty.
inline Outcome run_benchid(const TempDir& d, const std::string& args) {
  const std::string out = d.file(".stdout"), err = d.file(".stderr");
  const std::string cmd = std::string(BENCHID_EXE) + " " + args + " >" + out + " 2>" + err + " </dev/null";
  const int st = std::system(cmd.c_str());
  Outcome r{WIFEXITED(st) ? WEXITSTATUS(st) : 128 + WTERMSIG(st), slurp(out), slurp(err)};
  std::filesystem::remove(out);
  std::filesystem::remove(err);
  return r;
}

}  // namespace benchid::test
