#include "ident/error.h"

#include <cstdio>

namespace benchid {

std::string where(const std::string& file, long line) {
  if (line > 0) return file + ":" + std::to_string(line) + ": ";
  return file + ": ";
}

}  // namespace benchid

namespace benchid {
std::string fmt_num(double v) {
  char b[32];
  std::snprintf(b, sizeof b, "%.6g", v);
  return b;
}
std::string fmt(const char* printf_format, double v) {
  char b[64];
  std::snprintf(b, sizeof b, printf_format, v);
  return b;
}
}  // namespace benchid
