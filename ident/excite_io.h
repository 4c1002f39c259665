// Files of an excitation: the signal (CSV with a time column, or a sound file
// through libsndfile with a level guard) and the sidecar JSON that tells a
// later `benchid frf --excitation` how the signal was made.
//
// Sidecar / plan JSON, "format": "benchid.excitation/1":
//   kind, rate_hz, samples, period_samples (0: not periodic), repeats,
//   band_hz [lo, hi], lines (excited DFT lines of one period), seed,
//   amplitude, offset, crest_factor, rms, description, signal_file, and for a
//   stepped sine "steps": [{freq_hz, amplitude, start_sample,
//   measure_start_sample, measure_samples, end_sample}], plus for sweeps
//   "sweep": {f0_hz, f1_hz, duration_s, fade_s, law: "linear"|"exponential"}.
// A stepped-sine plan is this file with kind "steps".
#pragma once

#include <string>

#include "ident/excite.h"

namespace benchid::ident {

enum class SampleFormat { pcm16, pcm24, float32 };
SampleFormat parse_sample_format(const std::string& s);  // "pcm16" | "pcm24" | "float"

struct SignalWriteOptions {
  std::string channel_name = "excitation";  // CSV column name (unit in brackets if given)
  std::string unit;                          // e.g. "V"; CSV only
  double headroom_db = 1.0;                  // sound files: peak at most -headroom dBFS
  SampleFormat sample_format = SampleFormat::pcm24;
};

// Writes to `path`; the format follows `format_from` (.wav, .flac, .aiff/.aif,
// .ogg: sound file; anything else: CSV). Sound files refuse (InputError) a
// peak above the headroom rather than clip, and a non-integer rate.
void write_signal(const std::string& path, const std::string& format_from, const Excitation& e,
                  const SignalWriteOptions& o);
bool is_sound_name(const std::string& name);
// Sound files written by write_signal carry this software tag (in formats with
// string chunks: WAV, FLAC, Ogg); is_benchid_sound_file tells them apart.
inline constexpr const char* kSoundSoftwareTag = "benchid excite";
bool is_benchid_sound_file(const std::string& path);

// Sidecar as JSON text (2-space indent).
std::string sidecar_json(const Excitation& e, const std::string& signal_file,
                         const SweepOptions* sweep = nullptr);
// Reads a sidecar or plan; throws InputError naming the file and what is wrong.
struct Sidecar {
  Excitation excitation;  // samples left empty
  std::string signal_file;
  bool has_sweep = false;
  SweepOptions sweep;
};
Sidecar read_sidecar(const std::string& path);

}  // namespace benchid::ident
