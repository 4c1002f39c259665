// Time per stage of `benchid demo`: each bundled scenario run through the
// report pipeline (frf, fit, replay, loop, HTML, writing) `repeat` times in
// one process; prints the median of each stage and of the whole.
// Usage: benchid_bench_demo [REPEAT] [DATA_DIR]   (run on demand; tests/bench/demo_bench.py
// runs it beside SciPy doing the same FRF and simulation steps)
#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include "cli/report.h"

namespace {
double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v.size() % 2 ? v[v.size() / 2] : 0.5 * (v[v.size() / 2 - 1] + v[v.size() / 2]);
}
}  // namespace

int main(int argc, char** argv) {
  const int repeat = argc > 1 ? std::atoi(argv[1]) : 5;
  const std::string data = argc > 2 ? argv[2] : benchid::cli::default_demo_dir();
  const auto dir = std::filesystem::temp_directory_path() / "benchid-bench-demo";
  std::filesystem::create_directories(dir);
  std::printf("benchid demo, time per stage (median of %d runs, s)\n", repeat);
  std::printf("%-11s %8s %8s %8s %8s %8s %8s %8s\n", "scenario", "frf", "fit", "replay", "loop", "html", "write", "total");
  std::vector<double> all_totals(static_cast<std::size_t>(repeat), 0.0);
  for (const auto& s : benchid::cli::demo_scenarios()) {
    std::vector<double> frf, fit, rep, loop, html, wr, tot;
    for (int k = 0; k < repeat; ++k) {
      const auto p = benchid::cli::report_paths((dir / (s.name + ".html")).string(), "");
      const benchid::cli::ReportTimes t = benchid::cli::run_report(benchid::cli::demo_args(s, data), p, true);
      frf.push_back(t.frf_s), fit.push_back(t.fit_s), rep.push_back(t.replay_s), loop.push_back(t.loop_s);
      html.push_back(t.report_s), wr.push_back(t.write_s), tot.push_back(t.total());
      all_totals[static_cast<std::size_t>(k)] += t.total();
    }
    std::printf("%-11s %8.3f %8.3f %8.3f %8.3f %8.3f %8.3f %8.3f\n", s.name.c_str(), median(frf), median(fit),
                median(rep), median(loop), median(html), median(wr), median(tot));
  }
  std::printf("all scenarios: %.3f s (median of %d; target < 3 s)\n", median(all_totals), repeat);
  std::filesystem::remove_all(dir);
  return 0;
}
