// benchid's FRF CSV file (DESIGN.md, "File formats"):
//   "# key=value" metadata lines, then the header
//   freq_hz,re,im,mag_db,phase_deg,coherence,rel_err,reliable
// one row per line above 0 Hz; phase unwrapped; rel_err empty where undefined.
// `reliable` (1/0) is the trusted-line rule of trusted.h, decided by `frf`;
// readers find columns by name, so files without it are still read, with the
// coherence and error rule of trusted.h in its place. A stepped-sine FRF
// adds `distortion_pct` (output THD+N per point). Metadata may add
// excitation=, nonexcited_lines=, nonexcited_db=, nonexcited_noise_db= and
// one warning= line per warning.
#pragma once

#include <ostream>
#include <string>

#include "ident/frf.h"

namespace benchid::ident {

void write_frf_csv(std::ostream& out, const Frf& f);
// Reads a file written by write_frf_csv (or by hand with at least freq_hz and
// re/im or mag_db/phase_deg). Throws InputError naming file and line.
Frf read_frf_csv(const std::string& path);

}  // namespace benchid::ident
