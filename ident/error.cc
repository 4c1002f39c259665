#include "ident/error.h"

namespace benchid {

std::string where(const std::string& file, long line) {
  if (line > 0) return file + ":" + std::to_string(line) + ": ";
  return file + ": ";
}

}  // namespace benchid
