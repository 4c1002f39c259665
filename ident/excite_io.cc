#include "ident/excite_io.h"

#include <sndfile.h>

#include <cmath>
#include <cstdio>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "ident/error.h"
#include "ident/json_file.h"

namespace benchid::ident {

using nlohmann::json;

SampleFormat parse_sample_format(const std::string& s) {
  if (s == "pcm16") return SampleFormat::pcm16;
  if (s == "pcm24") return SampleFormat::pcm24;
  if (s == "float") return SampleFormat::float32;
  throw InputError("sample format '" + s + "' is unknown; expected pcm16, pcm24 or float");
}

namespace {
std::string ext_of(const std::string& name) {
  const auto dot = name.rfind('.');
  if (dot == std::string::npos || name.find('/', dot) != std::string::npos) return "";
  std::string e = name.substr(dot + 1);
  for (char& c : e) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return e;
}
}  // namespace

bool is_benchid_sound_file(const std::string& path) {
  SF_INFO info{};
  SNDFILE* f = sf_open(path.c_str(), SFM_READ, &info);
  if (!f) return false;
  const char* sw = sf_get_string(f, SF_STR_SOFTWARE);
  const bool ours = sw && std::string(sw).rfind(kSoundSoftwareTag, 0) == 0;
  sf_close(f);
  return ours;
}

bool is_sound_name(const std::string& name) {
  const std::string e = ext_of(name);
  return e == "wav" || e == "flac" || e == "aiff" || e == "aif" || e == "ogg";
}

void write_signal(const std::string& path, const std::string& format_from, const Excitation& e,
                  const SignalWriteOptions& o) {
  if (!is_sound_name(format_from)) {
    std::FILE* f = std::fopen(path.c_str(), "w");
    if (!f) throw InputError("cannot write '" + format_from + "'");
    std::fprintf(f, "# benchid excite %s: %s\n# rate_hz=%.10g\n", e.kind.c_str(), e.description.c_str(), e.rate_hz);
    std::fprintf(f, "time_s,%s\n", (o.unit.empty() ? o.channel_name : o.channel_name + " [" + o.unit + "]").c_str());
    for (std::size_t i = 0; i < e.samples.size(); ++i)
      std::fprintf(f, "%.10g,%.10g\n", static_cast<double>(i) / e.rate_hz, e.samples[i]);
    if (std::fclose(f) != 0) throw InputError("cannot write '" + format_from + "': disk full or I/O error");
    return;
  }
  // Level guard: a sound file clips at full scale, so refuse instead.
  double peak = 0;
  for (double v : e.samples) peak = std::max(peak, std::fabs(v));
  const double limit = std::pow(10.0, -o.headroom_db / 20.0);
  if (peak > limit)
    throw InputError(format_from + ": peak " + fmt_num(peak) + " FS exceeds the " + fmt_num(-o.headroom_db) +
                     " dBFS headroom limit (" + fmt_num(limit) + " FS); expected a lower --amplitude/--offset (or "
                     "less --headroom)");
  if (std::fabs(e.rate_hz - std::round(e.rate_hz)) > 1e-9)
    throw InputError(format_from + ": rate " + fmt_num(e.rate_hz) + " Hz; a sound file needs a whole number of Hz");
  const std::string ext = ext_of(format_from);
  int major = SF_FORMAT_WAV;
  if (ext == "flac") major = SF_FORMAT_FLAC;
  else if (ext == "aiff" || ext == "aif") major = SF_FORMAT_AIFF;
  else if (ext == "ogg") major = SF_FORMAT_OGG;
  int sub = o.sample_format == SampleFormat::pcm16 ? SF_FORMAT_PCM_16
            : o.sample_format == SampleFormat::pcm24 ? SF_FORMAT_PCM_24 : SF_FORMAT_FLOAT;
  if (major == SF_FORMAT_OGG) sub = SF_FORMAT_VORBIS;
  if (major == SF_FORMAT_FLAC && sub == SF_FORMAT_FLOAT)
    throw InputError(format_from + ": FLAC holds integer samples; expected --sample-format pcm16 or pcm24");
  SF_INFO info{};
  info.samplerate = static_cast<int>(std::lround(e.rate_hz));
  info.channels = 1;
  info.format = major | sub;
  if (!sf_format_check(&info))
    throw InputError(format_from + ": libsndfile cannot write this format/sample-format combination");
  SNDFILE* f = sf_open(path.c_str(), SFM_WRITE, &info);
  if (!f) throw InputError("cannot write '" + format_from + "': " + sf_strerror(nullptr));
  sf_command(f, SFC_SET_CLIPPING, nullptr, SF_TRUE);
  // the software tag marks the file as benchid's own, so a later run may replace it
  // (formats without string chunks ignore it)
  sf_set_string(f, SF_STR_SOFTWARE, kSoundSoftwareTag);
  const sf_count_t n = static_cast<sf_count_t>(e.samples.size());
  const sf_count_t w = sf_writef_double(f, e.samples.data(), n);
  const int rc = sf_close(f);
  if (w != n || rc != 0) throw InputError("cannot write '" + format_from + "': disk full or I/O error");
}

std::string sidecar_json(const Excitation& e, const std::string& signal_file, const SweepOptions* sweep) {
  json j;
  j["format"] = "benchid.excitation/1";
  j["kind"] = e.kind;
  j["description"] = e.description;
  j["rate_hz"] = e.rate_hz;
  j["samples"] = e.samples.size();
  j["period_samples"] = e.period;
  j["repeats"] = e.repeats;
  j["band_hz"] = {e.band_lo_hz, e.band_hi_hz};
  j["lines"] = e.lines;
  j["seed"] = e.seed;
  j["amplitude"] = e.amplitude;
  j["offset"] = e.offset;
  j["crest_factor"] = e.crest_factor;
  j["rms"] = e.rms;
  j["signal_file"] = signal_file;
  if (!e.levels.empty()) j["levels"] = e.levels;
  if (sweep) {
    j["sweep"] = {{"f0_hz", sweep->f0_hz},
                  {"f1_hz", sweep->f1_hz},
                  {"duration_s", sweep->duration_s},
                  {"fade_s", sweep->fade_s},
                  {"law", sweep->logarithmic ? "exponential" : "linear"}};
  }
  if (!e.steps.empty()) {
    json steps = json::array();
    for (const Step& s : e.steps)
      steps.push_back({{"freq_hz", s.freq_hz},
                       {"amplitude", s.amplitude},
                       {"start_sample", s.start},
                       {"measure_start_sample", s.measure_start},
                       {"measure_samples", s.measure_samples},
                       {"end_sample", s.end}});
    j["steps"] = steps;
  }
  return j.dump(2) + "\n";
}

namespace {
[[noreturn]] void bad(const std::string& path, const std::string& what) { throw InputError(where(path) + what); }

double num(const json& j, const char* key, const std::string& path, bool required = true, double def = 0) {
  if (!j.contains(key)) {
    if (required) bad(path, std::string("key '") + key + "' is missing; expected a number");
    return def;
  }
  const json& v = j.at(key);
  if (!v.is_number() || !std::isfinite(v.get<double>()))
    bad(path, std::string("key '") + key + "' is " + v.dump().substr(0, 40) + "; expected a finite number");
  return v.get<double>();
}

std::size_t count(const json& j, const char* key, const std::string& path, bool required = true) {
  const double v = num(j, key, path, required, 0);
  if (v < 0 || v != std::floor(v) || v > 1e15)
    bad(path, std::string("key '") + key + "' is " + fmt_num(v) + "; expected a whole number >= 0");
  return static_cast<std::size_t>(v);
}
}  // namespace

Sidecar read_sidecar(const std::string& path) {
  json j = read_json_file(path, "a benchid excitation sidecar or plan");
  if (!j.is_object() || !j.contains("format") || j["format"] != "benchid.excitation/1")
    bad(path, "\"format\" is not \"benchid.excitation/1\"; expected a sidecar or plan from 'benchid excite'");
  Sidecar s;
  Excitation& e = s.excitation;
  if (!j.contains("kind") || !j["kind"].is_string()) bad(path, "key 'kind' is missing; expected a string");
  e.kind = j["kind"].get<std::string>();
  if (e.kind != "chirp" && e.kind != "logchirp" && e.kind != "multisine" && e.kind != "prbs" && e.kind != "steps")
    bad(path, "kind '" + e.kind + "' is unknown; expected chirp, logchirp, multisine, prbs or steps");
  e.rate_hz = num(j, "rate_hz", path);
  if (!(e.rate_hz > 0)) bad(path, "rate_hz " + fmt_num(e.rate_hz) + "; expected a positive rate");
  e.period = count(j, "period_samples", path, false);
  e.repeats = count(j, "repeats", path, false);
  if (j.contains("band_hz")) {
    const json& b = j["band_hz"];
    if (!b.is_array() || b.size() != 2 || !b[0].is_number() || !b[1].is_number())
      bad(path, "band_hz is " + b.dump().substr(0, 40) + "; expected [LO, HI] in Hz");
    e.band_lo_hz = b[0].get<double>();
    e.band_hi_hz = b[1].get<double>();
    if (!(e.band_lo_hz >= 0 && e.band_lo_hz <= e.band_hi_hz))
      bad(path, "band_hz is " + b.dump().substr(0, 40) + "; expected [LO, HI] with 0 <= LO <= HI");
  }
  if (j.contains("lines")) {
    if (!j["lines"].is_array()) bad(path, "lines is not an array; expected DFT line numbers");
    for (const json& v : j["lines"]) {
      if (!v.is_number_unsigned() || v.get<std::size_t>() == 0 || (e.period && 2 * v.get<std::size_t>() >= e.period))
        bad(path, "line " + v.dump().substr(0, 20) + " is not a line of the period; expected 1 <= k < period/2");
      if (!e.lines.empty() && v.get<std::size_t>() <= e.lines.back()) bad(path, "lines must increase");
      e.lines.push_back(v.get<std::size_t>());
    }
    if (!e.lines.empty() && e.period == 0) bad(path, "lines are given but period_samples is 0; expected the period they belong to");
  }
  if (j.contains("levels")) {
    const json& l = j["levels"];
    if (!l.is_array() || l.size() != 2 || !l[0].is_number() || !l[1].is_number() || !(l[0].get<double>() > 0) ||
        !(l[1].get<double>() > 0) || l[0].get<double>() > 1 || l[1].get<double>() > 1 || l[0] == l[1])
      bad(path, "levels is " + l.dump().substr(0, 40) + "; expected [L1, L2], two different fractions in (0, 1]");
    if (e.period == 0 || e.repeats < 4 || e.repeats % 2 != 0)
      bad(path, "levels need a periodic signal of an even number of at least 4 periods; expected period_samples and "
                "repeats from 'benchid excite --levels'");
    e.levels = {l[0].get<double>(), l[1].get<double>()};
  }
  e.amplitude = num(j, "amplitude", path, false);
  e.offset = num(j, "offset", path, false);
  if (j.contains("signal_file") && j["signal_file"].is_string()) s.signal_file = j["signal_file"];
  if (j.contains("sweep")) {
    const json& w = j["sweep"];
    if (!w.is_object()) bad(path, "sweep is not an object");
    s.has_sweep = true;
    s.sweep.rate_hz = e.rate_hz;
    s.sweep.f0_hz = num(w, "f0_hz", path);
    s.sweep.f1_hz = num(w, "f1_hz", path);
    s.sweep.duration_s = num(w, "duration_s", path);
    s.sweep.fade_s = num(w, "fade_s", path, false, 0.0);
    if (!(s.sweep.f0_hz > 0 && s.sweep.f1_hz > 0 && s.sweep.duration_s > 0 && s.sweep.fade_s >= 0))
      bad(path, "sweep needs positive f0_hz, f1_hz and duration_s, and fade_s >= 0");
    s.sweep.logarithmic = w.contains("law") && w["law"] == "exponential";
  }
  if (e.kind == "steps") {
    if (!j.contains("steps") || !j["steps"].is_array() || j["steps"].empty())
      bad(path, "a stepped-sine plan needs a non-empty 'steps' array");
    long idx = 0;
    for (const json& st : j["steps"]) {
      ++idx;
      if (!st.is_object()) bad(path, "step " + std::to_string(idx) + " is not an object");
      Step p;
      const std::string which = "step " + std::to_string(idx) + ": ";
      try {
        p.freq_hz = num(st, "freq_hz", path);
        p.amplitude = num(st, "amplitude", path, false);
        p.measure_start = count(st, "measure_start_sample", path);
        p.measure_samples = count(st, "measure_samples", path);
        // the fade-in and fade-out around the window default to none
        p.start = st.contains("start_sample") ? count(st, "start_sample", path) : p.measure_start;
        p.end = st.contains("end_sample") ? count(st, "end_sample", path) : p.measure_start + p.measure_samples;
      } catch (const InputError& err) {
        bad(path, which + std::string(err.what()).substr(path.size() + 2));
      }
      if (!(p.freq_hz > 0 && p.freq_hz < e.rate_hz / 2))
        bad(path, which + "freq_hz " + fmt_num(p.freq_hz) + "; expected 0 < f < Nyquist (" + fmt_num(e.rate_hz / 2) + " Hz)");
      if (p.measure_samples < 8) bad(path, which + "measure_samples " + std::to_string(p.measure_samples) + "; expected at least 8");
      if (!(p.start <= p.measure_start && p.measure_start + p.measure_samples <= p.end))
        bad(path, which + "samples " + std::to_string(p.start) + " to " + std::to_string(p.end) + " do not hold its measuring window " +
                      std::to_string(p.measure_start) + " + " + std::to_string(p.measure_samples) +
                      "; expected start_sample <= measure_start_sample and measure_start_sample + measure_samples <= end_sample");
      if (!e.steps.empty() && p.measure_start < e.steps.back().measure_start + e.steps.back().measure_samples)
        bad(path, which + "its measuring window starts before the previous one ends; expected steps in time order");
      if (!e.steps.empty() && p.start < e.steps.back().end)
        bad(path, which + "start_sample " + std::to_string(p.start) + " is before the previous step's end_sample " +
                      std::to_string(e.steps.back().end) + "; expected steps in time order, not overlapping");
      e.steps.push_back(p);
    }
  }
  return s;
}

}  // namespace benchid::ident
