// Errors that benchid reports to a user.
//
// Three kinds of failure are kept apart (see DESIGN.md):
//  1. Bad input (a user's file or option): InputError, thrown by readers and
//     validators, caught once at the CLI boundary, printed as
//     "benchid: error: <what>", exit status 2. The message names the file,
//     the line or channel, the offending value and what was expected.
//  2. A numerical outcome (low coherence, no convergence): a status inside the
//     result, never an exception.
//  3. Our own bug: assert.
#pragma once

#include <stdexcept>
#include <string>

namespace benchid {

class InputError : public std::runtime_error {
 public:
  explicit InputError(const std::string& what) : std::runtime_error(what) {}
};

// "FILE:LINE: message" when line > 0, else "FILE: message".
std::string where(const std::string& file, long line = 0);
// A number as a user would write it (%.6g): "1.2", "4096", "2.5e-05".
std::string fmt_num(double v);
// A number in a printf format for one double ("%.2f"): for tables.
std::string fmt(const char* printf_format, double v);

}  // namespace benchid
