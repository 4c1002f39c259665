// Ctrl-C (SIGINT) or SIGTERM in the middle of a long run: one line on
// stderr, exit status 128 + signal (130, 143: common practice for shells),
// and no output file, not even the temporary the output was being written
// to. The run is a streamed replay of a generated 3e6-sample record that
// writes its CSV as it goes; the signal is sent once that temporary exists.
#include <gtest/gtest.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <string>
#include <thread>

#include "fit/model_json.h"
#include "tests/support/run_cli.h"
#include "tests/support/temp_dir.h"

namespace fs = std::filesystem;
using benchid::test::slurp;
using benchid::test::TempDir;

namespace {

bool has_temporary(const std::string& dir) {
  for (const auto& e : fs::directory_iterator(dir))
    if (e.path().filename().string().rfind(".replay.csv.tmp.", 0) == 0) return true;
  return false;
}

void interrupt_mid_run(int sig) {
  TempDir d;
  benchid::fit::RationalModel m;
  m.poles = {-40.0};
  m.residues = {40.0};
  d.write("m.json", benchid::fit::model_json(m));
  {
    FILE* f = std::fopen(d.file("rec.csv").c_str(), "w");
    std::fputs("time_s,u,y\n", f);
    for (int k = 0; k < 3000000; ++k)
      std::fprintf(f, "%.4f,%.5f,%.5f\n", k / 1000.0, std::sin(k * 0.37), std::cos(k * 0.11));
    std::fclose(f);
  }
  const std::string err = d.file("err.txt"), out = d.file("replay.csv");
  const pid_t pid = fork();
  if (pid == 0) {
    std::freopen(err.c_str(), "w", stderr);
    std::freopen("/dev/null", "w", stdout);
    execl(BENCHID_EXE, BENCHID_EXE, "replay", d.file("m.json").c_str(), d.file("rec.csv").c_str(), "--input", "u",
          "--output", "y", "--stream-above", "1000", "-o", out.c_str(), static_cast<char*>(nullptr));
    _exit(127);
  }
  // wait until the output is being written, then stop the run
  const auto until = std::chrono::steady_clock::now() + std::chrono::seconds(60);
  bool seen = false;
  int status = 0;
  while (std::chrono::steady_clock::now() < until) {
    if ((seen = has_temporary(d.path()))) break;
    if (waitpid(pid, &status, WNOHANG) == pid) break;  // finished before we could see it
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  ASSERT_TRUE(seen) << "the run ended before its output's temporary appeared: " << slurp(err);
  std::this_thread::sleep_for(std::chrono::milliseconds(50));
  kill(pid, sig);
  waitpid(pid, &status, 0);
  ASSERT_TRUE(WIFEXITED(status)) << "killed by the signal instead of handling it";
  EXPECT_EQ(WEXITSTATUS(status), 128 + sig);
  std::string msg = slurp(err);
  while (!msg.empty() && msg.front() == '\n') msg.erase(0, 1);  // ends any progress line first
  EXPECT_EQ(msg.rfind("benchid: ", 0), 0u) << msg;
  EXPECT_NE(msg.find(sig == SIGINT ? "interrupted (SIGINT)" : "terminated (SIGTERM)"), std::string::npos) << msg;
  EXPECT_EQ(std::count(msg.begin(), msg.end(), '\n'), 1) << msg;
  EXPECT_FALSE(fs::exists(out));
  EXPECT_FALSE(has_temporary(d.path())) << "the temporary was left behind";
}

TEST(Interrupt, SigintMidRunLeavesNoOutputAndExits130) { interrupt_mid_run(SIGINT); }

TEST(Interrupt, SigtermMidRunLeavesNoOutputAndExits143) { interrupt_mid_run(SIGTERM); }

}  // namespace
