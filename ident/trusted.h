// The one definition of a trusted line of an FRF, and of the trusted band.
//
// A line is trusted ("reliable" in the FRF CSV) when all three hold:
//  1. its coherence is above the zero-coherence bound at the FRF's confidence
//     (Carter, Knapp & Nuttall 1973): by chance alone a fraction
//     1 - confidence of unrelated lines still passes it;
//  2. it was excited: a periodic or stepped estimate holds excited lines
//     only; in a Welch estimate the exciting signal's autospectrum (the
//     input's, or the reference's for the indirect estimate) at the line is
//     within `local_drop_db` of its level within an octave on either side and
//     within `global_drop_db` of its strongest level (both levels are the
//     3-line running median, so one line of leakage or hum sets neither).
//     Lines with G_uu ~ 0 above a band-limited excitation pass test 1 by
//     chance with |H| of 1e6; this is what keeps them out;
//  3. its normalized random error of |H| is at most `max_rel_err` (0.2: a
//     phase standard deviation of about 11 deg, Bendat & Piersol).
// `frf` decides it, since only it sees the autospectra and the excitation.
// A file without the column falls back to tests 1 and 3 (common practice).
//
// The trusted band: from the first trusted line up to the last trusted line
// below which 90 % of the lines, and 12 of the last 16, are trusted. Above it
// a recording usually has no excitation or no output left; single lines
// that pass by chance further up do not stretch it.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "ident/frf.h"

namespace benchid::ident {

// TrustOptions (what makes a line trusted) is in frf.h, part of FrfOptions.
void validate(const TrustOptions& o);

// Which lines a Welch estimate's exciting signal reached, from its
// autospectrum g (one value per line, frequencies ascending, Hz).
std::vector<std::uint8_t> excited_lines(const std::vector<double>& freq_hz,
                                        const std::vector<double>& g, const TrustOptions& o = {});

// Whether the exciting signal has a line spectrum (a multisine or another
// periodic signal analysed by Welch): "tones" are lines whose autospectrum
// is the largest of the 17 lines around it and 20 dB or more above their
// median (a random, PRBS or swept input varies by a few dB from line to line
// after averaging, so none is); a line spectrum when there are at least 5
// tones and 90 % of the power within the band (the first to the last line
// within 30 dB of the strongest) sits on at most a quarter of its lines
// (white noise: about 86 %; a multisine of 57 log-spaced lines analysed
// with 4096-sample Hann segments: 13 %). Both tests: a steep but smooth
// spectrum (low-pass noise) concentrates its power too, but has no tones.
struct LineSpectrum {
  bool found = false;
  std::size_t tones = 0;
  std::size_t lines_90 = 0, band_lines = 0;  // lines holding 90 % of the band's power; the band's
  double lo_hz = 0, hi_hz = 0;               // lowest and highest tone
};
LineSpectrum line_spectrum(const std::vector<double>& freq_hz, const std::vector<double>& g);

// Tests 1 and 3 for one line (coherence NaN: not known, test 1 skipped;
// rel_err NaN: undefined, not trusted unless neither is known).
bool trusted_by_error(double coherence, double coherence_bound, double rel_err,
                      const TrustOptions& o = {});

// f.reliable[k] set to the rule above; `excited` empty: every line excited.
void mark_trusted(Frf& f, const std::vector<std::uint8_t>& excited, const TrustOptions& o = {});

// Whether line k is trusted: f.reliable when the FRF carries it, else tests 1 and 3.
bool is_trusted(const Frf& f, std::size_t k);

struct TrustedBand {
  double lo_hz = 0, hi_hz = 0;  // hi_hz <= lo_hz: none
  std::size_t lines = 0;        // trusted lines inside it
  bool found() const { return hi_hz > lo_hz; }
};
TrustedBand trusted_band(const Frf& f);

// The band a stage works in: [lo_hz, hi_hz] when given (hi_hz 0: up to the
// FRF's top), else the trusted band. `note` says which and how it was chosen; InputError when no
// line of the FRF is inside a given band, and none when the trusted band is
// empty (found() false; the caller says what that means for it).
struct ChosenBand {
  double lo_hz = 0, hi_hz = 0;
  bool given = false;
  std::string note;
  bool found() const { return hi_hz > lo_hz; }
};
ChosenBand choose_band(const Frf& f, bool given, double lo_hz, double hi_hz);

// The rule in one sentence, for help texts and notes.
std::string trusted_band_rule();

}  // namespace benchid::ident
