#include "cli/output.h"

#include <fcntl.h>
#include <signal.h>
#include <sys/stat.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iostream>

#include <nlohmann/json.hpp>

#include "ident/error.h"
#include "ident/excite_io.h"
#include "ident/json_file.h"

namespace benchid::cli {

namespace fs = std::filesystem;

void refuse_overwriting_input(const std::string& out, const std::vector<std::string>& inputs) {
  if (out.empty() || out == "-") return;
  std::error_code ec;
  const fs::path o = fs::weakly_canonical(out, ec);
  for (const auto& in : inputs) {
    std::error_code e1, e2;
    const bool same_file = fs::exists(out, e1) && fs::equivalent(out, in, e2);
    if (same_file || (!ec && fs::weakly_canonical(in, e1) == o))
      throw InputError("output '" + out + "' is the input '" + in +
                       "'; expected a different output path (inputs are never overwritten)");
  }
}

namespace {

bool g_force = false;  // --force of the running command (one command per process)

const char* kind_name(OutputKind k) {
  switch (k) {
    case OutputKind::frf_csv: return "FRF CSV";
    case OutputKind::frf_text: return "FRF text report";
    case OutputKind::model_json: return "model JSON";
    case OutputKind::loop_json: return "loop JSON";
    case OutputKind::replay_csv: return "replay CSV";
    case OutputKind::signal: return "excitation signal";
    case OutputKind::sidecar: return "excitation sidecar or plan";
    case OutputKind::html_report: return "HTML report";
    case OutputKind::batch_results: return "batch results file";
    case OutputKind::compare_csv: return "comparison CSV";
    case OutputKind::controller_json: return "controller JSON";
  }
  return "output";
}

bool starts_with(const std::string& s, const char* prefix) { return s.rfind(prefix, 0) == 0; }

// A JSON file of ours: an object whose "format" member is `format`, read
// with the limits of every JSON input (64 MiB, 64 levels); the member may lie
// anywhere in the file (keys are written sorted), so the whole file is parsed.
bool is_our_json(const std::string& path, const char* format) {
  try {
    const nlohmann::json j = read_json_file(path, "a benchid JSON file");
    return j.is_object() && j.contains("format") && j["format"].is_string() && j["format"].get<std::string>() == format;
  } catch (const std::exception&) {
    return false;
  }
}

bool is_our_output(const std::string& path, OutputKind kind) {
  std::ifstream in(path, std::ios::binary);
  std::string head(1 << 16, '\0');
  in.read(head.data(), static_cast<std::streamsize>(head.size()));
  head.resize(static_cast<std::size_t>(in.gcount()));
  if (head.empty()) return true;  // an empty file holds nothing to lose
  switch (kind) {
    case OutputKind::frf_csv: return starts_with(head, "# benchid frf");
    case OutputKind::frf_text: return starts_with(head, "benchid frequency-response report");
    case OutputKind::model_json: return is_our_json(path, "benchid.model/1");
    case OutputKind::loop_json: return is_our_json(path, "benchid.loop/1");
    case OutputKind::replay_csv: return starts_with(head, "# benchid replay");
    case OutputKind::signal: return starts_with(head, "# benchid excite") || ident::is_benchid_sound_file(path);
    case OutputKind::sidecar: return is_our_json(path, "benchid.excitation/1");
    case OutputKind::html_report:
      return starts_with(head, "<!DOCTYPE html>") && head.find("<title>benchid report:") != std::string::npos;
    case OutputKind::batch_results: return starts_with(head, "{\"unit\":");
    case OutputKind::compare_csv: return starts_with(head, "# benchid compare");
    case OutputKind::controller_json: return is_our_json(path, "benchid.controller/1");
  }
  return false;
}

// Temporaries being written, for the signal handler to remove: fixed slots
// of plain characters, since a handler may only use async-signal-safe
// calls (unlink, write, _exit) and lock-free atomics.
constexpr int kSlots = 64;
constexpr std::size_t kPathMax = 4096;
char g_temp[kSlots][kPathMax];
std::atomic<bool> g_used[kSlots];

int register_temp(const std::string& path) {
  if (path.size() >= kPathMax) return -1;
  for (int i = 0; i < kSlots; ++i) {
    if (g_used[i].load()) continue;
    std::memcpy(g_temp[i], path.c_str(), path.size() + 1);
    g_used[i].store(true);
    return i;
  }
  return -1;  // more temporaries than slots: this one is not removed on a signal
}

void unregister_temp(const std::string& path) {
  for (int i = 0; i < kSlots; ++i)
    if (g_used[i].load() && path == g_temp[i]) g_used[i].store(false);
}

extern "C" void on_stop_signal(int sig) {
  for (int i = 0; i < kSlots; ++i)
    if (g_used[i].load()) ::unlink(g_temp[i]);
  const char* msg = sig == SIGINT ? "\nbenchid: interrupted (SIGINT); unfinished output files removed\n"
                                  : "\nbenchid: terminated (SIGTERM); unfinished output files removed\n";
  const ssize_t unused = ::write(2, msg, std::strlen(msg));
  (void)unused;
  ::_exit(128 + sig);
}

// Creates an empty hidden temporary beside `path` (same file system, so the
// final rename is atomic); returns its name and an open descriptor.
std::string make_temp(const std::string& path, int& fd) {
  const fs::path target(path);
  const fs::path dir = target.has_parent_path() ? target.parent_path() : fs::path(".");
  std::string name(1, '.');  // hidden temporary beside the target, same file system
  name += target.filename().string();
  name += ".tmp.XXXXXX";
  std::string tmpl = (dir / name).string();
  fd = ::mkstemp(tmpl.data());
  if (fd < 0) throw InputError("cannot write '" + path + "': " + std::strerror(errno));
  register_temp(tmpl);
  ::fchmod(fd, 0644);
  return tmpl;
}
}  // namespace

void check_output(const std::string& out, OutputKind kind, const std::vector<std::string>& inputs) {
  if (out.empty() || out == "-") return;
  refuse_overwriting_input(out, inputs);
  std::error_code ec;
  const fs::file_status st = fs::status(out, ec);
  if (ec || !fs::exists(st)) return;
  if (fs::is_directory(st)) throw InputError("output '" + out + "' is a directory; expected a file name");
  if (g_force) return;
  if (!fs::is_regular_file(st))
    throw InputError("output '" + out + "' exists and is not a regular file; expected a new name, or --force to write to it");
  if (!is_our_output(out, kind))
    throw InputError("output '" + out + "' exists and is not an earlier benchid " + kind_name(kind) +
                     "; expected a new name, or --force to replace it");
}

void add_force_flag(CLI::App* command) {
  command->add_flag("--force", g_force,
                    "Replace existing output files even when they are not benchid's own earlier results of the same "
                    "kind (inputs are never replaced)");
}

void install_stop_handlers() {
  struct sigaction sa {};
  sa.sa_handler = on_stop_signal;
  sigemptyset(&sa.sa_mask);
  ::sigaction(SIGINT, &sa, nullptr);
  ::sigaction(SIGTERM, &sa, nullptr);
}

PendingFile::PendingFile(const std::string& path) : path_(path) {
  int fd = -1;
  temp_ = make_temp(path, fd);
  ::close(fd);
}

PendingFile::~PendingFile() {
  if (!done_) ::unlink(temp_.c_str());
  unregister_temp(temp_);
}

void PendingFile::commit() {
  if (std::rename(temp_.c_str(), path_.c_str()) != 0)
    throw InputError("cannot write '" + path_ + "': " + std::strerror(errno));
  unregister_temp(temp_);
  done_ = true;
}

void write_file_atomically(const std::string& path, const std::string& content) {
  if (path == "-") {
    std::cout << content << std::flush;
    return;
  }
  int fd = -1;
  const std::string tmpl = make_temp(path, fd);
  const char* p = content.data();
  std::size_t left = content.size();
  while (left > 0) {
    const ssize_t w = ::write(fd, p, left);
    if (w < 0 && errno == EINTR) continue;
    if (w <= 0) {
      const int e = errno;
      ::close(fd);
      ::unlink(tmpl.c_str());
      unregister_temp(tmpl);
      throw InputError("cannot write '" + path + "': " + std::strerror(e));
    }
    p += w;
    left -= static_cast<std::size_t>(w);
  }
  if (::close(fd) != 0 || std::rename(tmpl.c_str(), path.c_str()) != 0) {
    const int e = errno;
    ::unlink(tmpl.c_str());
    unregister_temp(tmpl);
    throw InputError("cannot write '" + path + "': " + std::strerror(e));
  }
  unregister_temp(tmpl);
}

}  // namespace benchid::cli
