// Fuzz target: an FRF CSV as `fit`, `loop` and `report` read it.
// Properties: frequencies finite, non-negative and increasing; responses
// finite; coherence in [0, 1] and relative error >= 0 where given; the
// per-line columns all as long as the frequencies; metadata in range.
#include <cmath>
#include <string>

#include "ident/error.h"
#include "ident/frf_csv.h"
#include "tests/fuzz/fuzz_file.h"

using namespace benchid;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string path = fuzz::fuzz_file(data, size, ".csv");
  ident::Frf f;
  try {
    f = ident::read_frf_csv(path);
  } catch (const InputError& e) {
    fuzz::require(*e.what() != '\0', "an error without a message");
    return 0;
  }
  const std::size_t n = f.size();
  fuzz::require(n > 0, "an FRF with no lines");
  fuzz::require(f.h.size() == n && f.coherence.size() == n && f.rel_err.size() == n && f.reliable.size() == n,
                "per-line columns of different lengths");
  fuzz::require(f.distortion_pct.empty() || f.distortion_pct.size() == n, "distortion column of another length");
  for (std::size_t i = 0; i < n; ++i) {
    fuzz::require(std::isfinite(f.freq_hz[i]) && f.freq_hz[i] >= 0, "a frequency not finite and >= 0");
    fuzz::require(i == 0 || f.freq_hz[i] > f.freq_hz[i - 1], "frequencies not increasing");
    fuzz::require(std::isfinite(f.h[i].real()) && std::isfinite(f.h[i].imag()), "a response that is not finite");
    fuzz::require(std::isnan(f.coherence[i]) || (f.coherence[i] >= 0 && f.coherence[i] <= 1), "coherence outside [0, 1]");
    fuzz::require(std::isnan(f.rel_err[i]) || f.rel_err[i] >= 0, "a negative relative error");
  }
  fuzz::require(std::isfinite(f.rate_hz) && f.rate_hz >= 0, "rate_hz not finite and >= 0");
  fuzz::require(f.overlap >= 0 && f.overlap < 1, "overlap outside [0, 1)");
  fuzz::require(f.confidence > 0 && f.confidence < 1, "confidence outside (0, 1)");
  fuzz::require(f.coherence_bound >= 0 && f.coherence_bound <= 1, "coherence bound outside [0, 1]");
  fuzz::require(std::isfinite(f.effective_averages) && f.effective_averages >= 0, "effective averages not >= 0");
  return 0;
}
