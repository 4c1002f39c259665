// Time and peak memory of `benchid frf` against record length, for a CSV
// log and for WAV and FLAC sound files, beside the time to merely read the
// same bytes (`cat FILE > /dev/null`, the floor for any reader).
//
// Usage: benchid_bench_scale [--exe PATH] [--dir DIR] [--sizes 1e6,1e7,1e8]
//                            [--formats csv,wav,flac] [--repeat N]
//
// Records are generated on the fly (invented: white noise through a
// resonant second-order filter, fs = 10 kHz, two channels) into DIR
// (default: the system temporary directory), timed, and deleted before the
// next size. Each figure is the median of N runs (default 3); the peak
// resident memory is the largest of the runs (getrusage of the child).
// Columns: format, samples, file MB, floor s, benchid s (all cores), with
// --threads 1 s, MB/s, ns per sample, peak RSS MiB (all cores, one thread).
// Then `benchid replay` of the same record (two streaming passes, model
// fitted once by `benchid fit` to the first FRF of the format): time, ns
// per sample and peak RSS.
#include <sys/resource.h>
#include <sys/wait.h>
#include <fcntl.h>
#include <unistd.h>
#include <sndfile.h>

#include <algorithm>
#include <charconv>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <random>
#include <sstream>
#include <string>
#include <vector>

namespace {

constexpr double kRateHz = 10000.0;

struct Run {
  double wall_s = 0;
  double rss_mib = 0;
};

// Runs argv with stdout to /dev/null (or to out_path), waits, and returns
// the wall time and the child's peak resident memory.
Run run(const std::vector<std::string>& argv, const std::string& out_path = "/dev/null") {
  const auto t0 = std::chrono::steady_clock::now();
  const pid_t pid = fork();
  if (pid == 0) {
    const int fd = ::open(out_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (fd >= 0) dup2(fd, 1);
    std::vector<char*> a;
    for (const auto& s : argv) a.push_back(const_cast<char*>(s.c_str()));
    a.push_back(nullptr);
    execvp(a[0], a.data());
    _exit(127);
  }
  int status = 0;
  rusage ru{};
  wait4(pid, &status, 0, &ru);
  const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) {
    std::string cmd;
    for (const auto& s : argv) cmd += s + " ";
    std::fprintf(stderr, "failed (status %d): %s\n", WEXITSTATUS(status), cmd.c_str());
    std::exit(1);
  }
  return {wall, static_cast<double>(ru.ru_maxrss) / 1024.0};
}

// Invented test signal: u white, y = resonant low-pass of u plus noise.
class Source {
 public:
  void next(double& u, double& y) {
    u = g_(rng_);
    const double v = 0.05 * u + 1.6 * y1_ - 0.7 * y2_;
    y2_ = y1_, y1_ = v;
    y = v + 0.01 * g_(rng_);
  }

 private:
  std::mt19937_64 rng_{20261202};
  std::normal_distribution<double> g_{0.0, 0.3};
  double y1_ = 0, y2_ = 0;
};

void write_csv(const std::string& path, std::size_t n) {
  FILE* f = std::fopen(path.c_str(), "wb");
  if (!f) std::exit(1);
  std::fputs("time_s,u,y\n", f);
  std::vector<char> buf(1 << 20);
  std::size_t at = 0;
  Source src;
  for (std::size_t i = 0; i < n; ++i) {
    if (at + 128 > buf.size()) std::fwrite(buf.data(), 1, at, f), at = 0;
    double u, y;
    src.next(u, y);
    char* p = buf.data() + at;
    char* e = buf.data() + buf.size();
    p = std::to_chars(p, e, static_cast<double>(i) / kRateHz, std::chars_format::fixed, 4).ptr;
    *p++ = ',';
    p = std::to_chars(p, e, u, std::chars_format::general, 9).ptr;
    *p++ = ',';
    p = std::to_chars(p, e, y, std::chars_format::general, 9).ptr;
    *p++ = '\n';
    at = static_cast<std::size_t>(p - buf.data());
  }
  std::fwrite(buf.data(), 1, at, f);
  std::fclose(f);
}

void write_sound(const std::string& path, std::size_t n, int format) {
  SF_INFO info{};
  info.samplerate = static_cast<int>(kRateHz);
  info.channels = 2;
  info.format = format;
  SNDFILE* sf = sf_open(path.c_str(), SFM_WRITE, &info);
  if (!sf) {
    std::fprintf(stderr, "cannot write %s: %s\n", path.c_str(), sf_strerror(nullptr));
    std::exit(1);
  }
  sf_command(sf, SFC_SET_CLIPPING, nullptr, SF_TRUE);  // the rare |x| > 1 clips instead of wrapping
  std::vector<double> frames(2 * 65536);
  Source src;
  for (std::size_t i = 0; i < n;) {
    const std::size_t m = std::min<std::size_t>(65536, n - i);
    for (std::size_t k = 0; k < m; ++k) src.next(frames[2 * k], frames[2 * k + 1]);
    sf_writef_double(sf, frames.data(), static_cast<sf_count_t>(m));
    i += m;
  }
  sf_close(sf);
}

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v[v.size() / 2];
}

std::vector<std::string> split(const std::string& s) {
  std::vector<std::string> r;
  std::stringstream in(s);
  for (std::string x; std::getline(in, x, ',');) r.push_back(x);
  return r;
}

}  // namespace

int main(int argc, char** argv) {
  std::string exe = "build/cli/benchid", dir = std::filesystem::temp_directory_path().string();
  std::string sizes = "1e6,1e7,1e8", formats = "csv,wav,flac";
  int repeat = 3;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i], v = argv[i + 1];
    if (k == "--exe") exe = v;
    else if (k == "--dir") dir = v;
    else if (k == "--sizes") sizes = v;
    else if (k == "--formats") formats = v;
    else if (k == "--repeat") repeat = std::max(1, std::atoi(v.c_str()));
    else {
      std::fprintf(stderr, "unknown option %s\n", k.c_str());
      return 2;
    }
  }
  exe = std::filesystem::absolute(exe).string();
  std::printf("benchid frf scaling: segment 8192, Hann, 50 %% overlap; fs 10 kHz, 2 channels; medians of %d; "
              "%u cores\n",
              repeat, std::max(1u, static_cast<unsigned>(sysconf(_SC_NPROCESSORS_ONLN))));
  std::printf("%-5s %11s %9s %8s %10s %10s %7s %8s %16s | %9s %8s %9s\n", "fmt", "samples", "file MB", "floor s",
              "frf s", "1 thread s", "MB/s", "ns/samp", "peak RSS MiB", "replay s", "ns/samp", "RSS MiB");
  const std::string out = dir + "/benchid-scale-frf.csv", model = dir + "/benchid-scale-model.json";
  for (const auto& fmt : split(formats)) {
    bool have_model = false;
    for (const auto& sz : split(sizes)) {
      const auto n = static_cast<std::size_t>(std::stod(sz));
      const std::string path = dir + "/benchid-scale." + fmt;
      std::vector<std::string> ch = {"--input", "u", "--output", "y"};
      if (fmt == "csv") write_csv(path, n);
      else if (fmt == "wav") write_sound(path, n, SF_FORMAT_WAV | SF_FORMAT_PCM_24), ch = {"--input", "1", "--output", "2"};
      else if (fmt == "flac") write_sound(path, n, SF_FORMAT_FLAC | SF_FORMAT_PCM_24), ch = {"--input", "1", "--output", "2"};
      else {
        std::fprintf(stderr, "unknown format %s\n", fmt.c_str());
        return 2;
      }
      const double mb = static_cast<double>(std::filesystem::file_size(path)) / 1e6;
      std::vector<double> floor_s, all_s, one_s;
      double rss_all = 0, rss_one = 0;
      for (int r = 0; r < repeat; ++r) {
        floor_s.push_back(run({"cat", path}).wall_s);
        std::vector<std::string> cmd = {exe, "frf", path};
        cmd.insert(cmd.end(), ch.begin(), ch.end());
        for (const char* s : {"--segment", "8192", "-q", "-o"}) cmd.push_back(s);
        cmd.push_back(out);
        Run a = run(cmd);
        cmd.push_back("--threads");
        cmd.push_back("1");
        Run b = run(cmd);
        all_s.push_back(a.wall_s), one_s.push_back(b.wall_s);
        rss_all = std::max(rss_all, a.rss_mib), rss_one = std::max(rss_one, b.rss_mib);
      }
      if (!have_model) {
        run({exe, "fit", out, "--order", "2", "--band", "1:1000", "-q", "-o", model});
        have_model = true;
      }
      std::vector<double> rep_s;
      double rss_rep = 0;
      for (int r = 0; r < repeat; ++r) {
        std::vector<std::string> cmd = {exe, "replay", model, path};
        cmd.insert(cmd.end(), ch.begin(), ch.end());
        const Run x = run(cmd);
        rep_s.push_back(x.wall_s);
        rss_rep = std::max(rss_rep, x.rss_mib);
      }
      const double t = median(all_s), tr = median(rep_s);
      std::printf("%-5s %11zu %9.1f %8.3f %10.3f %10.3f %7.0f %8.1f %7.1f / %6.1f | %9.3f %8.1f %9.1f\n", fmt.c_str(), n,
                  mb, median(floor_s), t, median(one_s), mb / t, 1e9 * t / static_cast<double>(n), rss_all, rss_one, tr,
                  1e9 * tr / static_cast<double>(n), rss_rep);
      std::fflush(stdout);
      std::filesystem::remove(path);
    }
  }
  std::filesystem::remove(out);
  std::filesystem::remove(model);
  return 0;
}
