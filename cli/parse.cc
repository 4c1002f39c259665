#include "cli/parse.h"

#include <charconv>
#include <cmath>

#include "ident/error.h"

namespace benchid::cli {

double parse_number(const std::string& s, const std::string& what) {
  double v = 0;
  auto r = std::from_chars(s.data(), s.data() + s.size(), v);
  if (r.ec != std::errc() || r.ptr != s.data() + s.size() || !std::isfinite(v))
    throw InputError(what + " '" + s + "' is not a number");
  return v;
}

std::vector<std::string> split_list(const std::string& text) {
  std::vector<std::string> items;
  std::size_t p = 0;
  for (;;) {
    const std::size_t q = text.find(',', p);
    items.push_back(text.substr(p, q == std::string::npos ? std::string::npos : q - p));
    if (q == std::string::npos) break;
    p = q + 1;
  }
  return items;
}

}  // namespace benchid::cli
