// An FRF against a reference FRF, or against the envelope of several good
// units (a golden-unit band): per line of the FRF, the reference magnitude
// (dB) and phase (deg) interpolated at its frequency (linear in log
// frequency, phase unwrapped along each reference), the band [lo, hi] over
// the references, each widened by `sigmas` times its own random error (a
// reference stands for its unit only to within its error), and whether the
// FRF leaves the band by more than the tolerance plus `sigmas` times its
// own random error (magnitude: 20 log10(1 + rel_err) dB; phase: rel_err
// rad, the standard deviation of the phase for a small error, Bendat &
// Piersol).
#pragma once

#include <cstddef>
#include <string>
#include <vector>

#include "ident/frf.h"

namespace benchid::ident {

struct CompareOptions {
  double tolerance_db = 1.0;    // allowed beyond the band, dB (default 1 dB)
  double tolerance_deg = 10.0;  // allowed beyond the band, deg (default 10 deg)
  double sigmas = 3.0;          // times the FRF's own random error, also allowed (default 3)
};

struct CompareLine {
  double freq_hz = 0;
  double mag_db = 0, lo_db = 0, hi_db = 0;        // the FRF and the band
  double phase_deg = 0, lo_deg = 0, hi_deg = 0;   // phase placed within 180 deg of the band's middle
  double excess_db = 0, excess_deg = 0;           // beyond band + tolerance + sigmas * error (0 inside)
  bool outside = false;
};

struct CompareResult {
  std::vector<CompareLine> lines;       // the lines compared, ascending frequency
  std::size_t outside = 0;              // lines outside the band
  std::size_t unreliable = 0;           // lines of the FRF left out as unreliable
  std::size_t not_covered = 0;          // lines where no reference has trusted lines either side
};

// refs: one reference, or several good units. Throws InputError when no
// reference is given or their units differ from the FRF's.
CompareResult compare_frf(const Frf& frf, const std::vector<const Frf*>& refs, const std::vector<std::string>& ref_names,
                          const CompareOptions& o = {});

}  // namespace benchid::ident
