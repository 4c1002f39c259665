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
#include <iostream>

#include "ident/error.h"

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
