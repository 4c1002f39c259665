// Shared by the fuzz targets: the readers take file names (they are what a
// user hands benchid), so each input is written to a file in a private
// directory first (under /dev/shm when it exists, a memory file system).
#pragma once

#include <unistd.h>

#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

namespace benchid::fuzz {

inline const std::string& fuzz_dir() {
  // never destroyed: the exit handler that removes the directory reads it
  static const std::string& dir = *new std::string([] {
    std::string tmpl = (std::filesystem::is_directory("/dev/shm") ? "/dev/shm" : "/tmp") + std::string("/benchid-fuzz-XXXXXX");
    if (!mkdtemp(tmpl.data())) {
      std::perror("benchid fuzz: mkdtemp");
      std::abort();
    }
    std::atexit([] {
      std::error_code ec;
      std::filesystem::remove_all(fuzz_dir(), ec);
    });
    return tmpl;
  }());
  return dir;
}

// Writes the bytes to fuzz_dir()/input<suffix> and returns the path.
inline std::string fuzz_file(const std::uint8_t* data, std::size_t size, const std::string& suffix) {
  const std::string path = fuzz_dir() + "/input" + suffix;
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  if (!out.flush()) {
    std::perror("benchid fuzz: write");
    std::abort();
  }
  return path;
}

// A property the fuzzer must never break: print it and abort (a finding).
inline void require(bool ok, const char* what) {
  if (!ok) {
    std::fprintf(stderr, "benchid fuzz: property broken: %s\n", what);
    std::abort();
  }
}

}  // namespace benchid::fuzz
