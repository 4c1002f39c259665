// Fuzz target: an excitation sidecar or stepped-sine plan as `frf
// --excitation` reads it. Properties: the rate is finite and positive, and
// every step lies inside the signal, in order, with its measured part inside
// the step; excited lines lie strictly between DC and Nyquist of a period.
#include <cmath>
#include <string>

#include "ident/error.h"
#include "ident/excite_io.h"
#include "tests/fuzz/fuzz_file.h"

using namespace benchid;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string path = fuzz::fuzz_file(data, size, ".json");
  ident::Sidecar s;
  try {
    s = ident::read_sidecar(path);
  } catch (const InputError& e) {
    fuzz::require(*e.what() != '\0', "an error without a message");
    return 0;
  }
  const ident::Excitation& e = s.excitation;
  fuzz::require(std::isfinite(e.rate_hz) && e.rate_hz > 0, "rate not finite and positive");
  for (std::size_t line : e.lines) fuzz::require(e.period > 0 && line > 0 && 2 * line < e.period, "a line outside (0, period/2)");
  for (std::size_t i = 0; i < e.steps.size(); ++i) {
    const auto& st = e.steps[i];
    fuzz::require(std::isfinite(st.freq_hz) && st.freq_hz > 0, "a step frequency not finite and positive");
    fuzz::require(st.start <= st.measure_start && st.measure_samples > 0 &&
                      st.measure_start + st.measure_samples <= st.end,
                  "a step's measured part outside the step");
    fuzz::require(i == 0 || st.start >= e.steps[i - 1].end, "steps overlap or are out of order");
  }
  return 0;
}
