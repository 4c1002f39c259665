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

void write_file_atomically(const std::string& path, const std::string& content) {
  if (path == "-") {
    std::cout << content << std::flush;
    return;
  }
  const fs::path target(path);
  const fs::path dir = target.has_parent_path() ? target.parent_path() : fs::path(".");
  std::string name(1, '.');  // hidden temporary beside the target, same file system
  name += target.filename().string();
  name += ".tmp.XXXXXX";
  std::string tmpl = (dir / name).string();
  int fd = ::mkstemp(tmpl.data());
  if (fd < 0) throw InputError("cannot write '" + path + "': " + std::strerror(errno));
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
  ::fchmod(fd, 0644);
  if (::close(fd) != 0 || std::rename(tmpl.c_str(), path.c_str()) != 0) {
    const int e = errno;
    ::unlink(tmpl.c_str());
    throw InputError("cannot write '" + path + "': " + std::strerror(e));
  }
}

}  // namespace benchid::cli
