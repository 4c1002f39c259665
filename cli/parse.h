// Parsing of option values shared by the subcommands; errors are InputError
// naming the option and the text.
#pragma once

#include <string>
#include <vector>

namespace benchid::cli {

// A finite decimal number; `what` names it in the error ("--scale factor").
double parse_number(const std::string& text, const std::string& what);
// "LO:HI" in Hz, either side may be empty (0 = no limit); `what` names the option.
struct Band {
  double lo_hz = 0, hi_hz = 0;
};
Band parse_band(const std::string& text, const std::string& what);
// Items of a comma-separated list, empty items kept (so "1,,2" is refused by
// the item's own parser).
std::vector<std::string> split_list(const std::string& text);

}  // namespace benchid::cli
