// Fuzz target: a controller given on the command line (SPEC string) and as a
// controller JSON file. Property: a controller that parses is a proper
// rational model with finite coefficients, and evaluating it does not crash.
#include <cmath>
#include <string>

#include "ident/error.h"
#include "loop/controller.h"
#include "tests/fuzz/fuzz_file.h"

using namespace benchid;

namespace {
void check(const loop::Controller& c) {
  for (const auto& p : c.model.poles) fuzz::require(std::isfinite(p.real()) && std::isfinite(p.imag()), "a pole not finite");
  for (const auto& r : c.model.residues)
    fuzz::require(std::isfinite(r.real()) && std::isfinite(r.imag()), "a residue not finite");
  for (double f_hz : {0.1, 10.0, 1e4}) (void)c.model.response(f_hz);
}
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string spec(reinterpret_cast<const char*>(data), size);
  try {
    check(loop::parse_controller(spec));
  } catch (const InputError& e) {
    fuzz::require(*e.what() != '\0', "an error without a message");
  }
  const std::string path = fuzz::fuzz_file(data, size, ".json");
  try {
    const std::string s = loop::controller_spec(path);
    check(loop::parse_controller(s));
  } catch (const InputError& e) {
    fuzz::require(*e.what() != '\0', "an error without a message");
  }
  return 0;
}
