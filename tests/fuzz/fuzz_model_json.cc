// Fuzz target: a model JSON as `loop`, `replay` and `report` read it.
// Properties: the poles and residues read are finite, and the model can be
// evaluated and turned into zeros/poles/gain without crashing.
#include <cmath>
#include <string>

#include "fit/model.h"
#include "fit/model_json.h"
#include "ident/error.h"
#include "tests/fuzz/fuzz_file.h"

using namespace benchid;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string path = fuzz::fuzz_file(data, size, ".json");
  fit::RationalModel m;
  try {
    m = fit::read_model_json(path);
  } catch (const InputError& e) {
    fuzz::require(*e.what() != '\0', "an error without a message");
    return 0;
  }
  fuzz::require(m.poles.size() == m.residues.size(), "poles and residues of different counts");
  for (const auto& p : m.poles) fuzz::require(std::isfinite(p.real()) && std::isfinite(p.imag()), "a pole not finite");
  for (const auto& r : m.residues) fuzz::require(std::isfinite(r.real()) && std::isfinite(r.imag()), "a residue not finite");
  for (double f_hz : {0.0, 1.0, 1e3}) (void)m.response(f_hz);
  try {
    (void)m.zpk();
  } catch (const InputError&) {
  }
  return 0;
}
