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

Band parse_band(const std::string& text, const std::string& what) {
  const auto c = text.find(':');
  if (c == std::string::npos) throw InputError(what + " '" + text + "': expected LO:HI in Hz, e.g. 1:500");
  Band b;
  b.lo_hz = c == 0 ? 0 : parse_number(text.substr(0, c), what + " LO");
  b.hi_hz = c + 1 == text.size() ? 0 : parse_number(text.substr(c + 1), what + " HI");
  if (b.lo_hz < 0 || b.hi_hz < 0) throw InputError(what + " " + text + ": frequencies must be >= 0 Hz");
  if (b.hi_hz > 0 && b.hi_hz <= b.lo_hz) throw InputError(what + " " + text + ": LO must be below HI");
  return b;
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
