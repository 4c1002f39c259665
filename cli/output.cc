#include "cli/output.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

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
  ::fchmod(fd, 0644);
  return tmpl;
}
}  // namespace

PendingFile::PendingFile(const std::string& path) : path_(path) {
  int fd = -1;
  temp_ = make_temp(path, fd);
  ::close(fd);
}

PendingFile::~PendingFile() {
  if (!done_) ::unlink(temp_.c_str());
}

void PendingFile::commit() {
  if (std::rename(temp_.c_str(), path_.c_str()) != 0)
    throw InputError("cannot write '" + path_ + "': " + std::strerror(errno));
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
      throw InputError("cannot write '" + path + "': " + std::strerror(e));
    }
    p += w;
    left -= static_cast<std::size_t>(w);
  }
  if (::close(fd) != 0 || std::rename(tmpl.c_str(), path.c_str()) != 0) {
    const int e = errno;
    ::unlink(tmpl.c_str());
    throw InputError("cannot write '" + path + "': " + std::strerror(e));
  }
}

}  // namespace benchid::cli
