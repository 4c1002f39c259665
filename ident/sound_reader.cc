// Sound-file recordings through libsndfile (WAV, FLAC, AIFF, Ogg, CAF, ...).
// Samples arrive normalised to full scale = 1.0; a channel's scale factor
// turns them into units (units per full scale). Samples at full scale are
// counted per channel and reported as a clipping warning.
#include <sndfile.h>

#include <cmath>
#include <cstring>

#include "ident/detail/readers.h"
#include "ident/error.h"

namespace benchid::ident::detail {

bool looks_like_sound_file(const unsigned char* h, std::size_t n) {
  if (n < 4) return false;
  static const char* kMagic[] = {"RIFF", "RIFX", "RF64", "FORM", "fLaC", "OggS", "caff", ".snd",
                                 "riff", "wvpk", "MThd"};
  for (const char* m : kMagic)
    if (std::memcmp(h, m, 4) == 0) return true;
  return false;
}

namespace {

const char* major_name(int format) {
  switch (format & SF_FORMAT_TYPEMASK) {
    case SF_FORMAT_WAV: return "wav";
    case SF_FORMAT_WAVEX: return "wav";
    case SF_FORMAT_RF64: return "rf64";
    case SF_FORMAT_W64: return "w64";
    case SF_FORMAT_AIFF: return "aiff";
    case SF_FORMAT_FLAC: return "flac";
    case SF_FORMAT_OGG: return "ogg";
    case SF_FORMAT_CAF: return "caf";
    case SF_FORMAT_AU: return "au";
    default: return "sound";
  }
}

// Largest positive sample value an integer format can hold, as libsndfile
// normalises it (e.g. 16 bit: 32767/32768); 1.0 for float formats.
double full_scale(int format) {
  switch (format & SF_FORMAT_SUBMASK) {
    case SF_FORMAT_PCM_S8:
    case SF_FORMAT_PCM_U8: return 127.0 / 128.0;
    case SF_FORMAT_PCM_16: return 32767.0 / 32768.0;
    case SF_FORMAT_PCM_24: return 8388607.0 / 8388608.0;
    case SF_FORMAT_PCM_32: return 2147483647.0 / 2147483648.0;
    default: return 1.0;
  }
}

class SoundReader final : public RecordReader {
 public:
  SoundReader(const std::string& path, const ReadOptions& opts) {
    info_.path = path;
    SF_INFO sfi{};
    sf_ = sf_open(path.c_str(), SFM_READ, &sfi);
    if (!sf_)
      throw InputError(where(path) + "not a readable sound file (" + sf_strerror(nullptr) +
                       "); expected WAV, FLAC, AIFF or another format libsndfile reads, or CSV text");
    if (sfi.channels < 1 || sfi.samplerate <= 0) {
      sf_close(sf_);
      throw InputError(where(path) + "sound file header gives " + std::to_string(sfi.channels) +
                       " channels at " + std::to_string(sfi.samplerate) +
                       " Hz; expected at least 1 channel and a positive rate");
    }
    // libsndfile trims a chunk that runs past the end of the file to what is
    // there and logs the size it found as "(should be N)"; a shortened
    // recording is refused. (Its note that an odd-length chunk "should be an
    // even number of bytes" is benign and has no parenthesis.) Formats that
    // keep the header's frame count are caught at the end of reading.
    char log[4096] = {0};
    sf_command(sf_, SFC_GET_LOG_INFO, log, sizeof log);
    if (std::strstr(log, "(should be ") != nullptr) {
      sf_close(sf_);
      throw InputError(where(path) +
                       "sound file is truncated: its header promises more data than the file "
                       "holds; expected a complete file");
    }
    info_.format = major_name(sfi.format);
    info_.rate_hz = opts.rate_hz > 0 ? opts.rate_hz : sfi.samplerate;
    // A stream whose length was not written (a FLAC encoder stopped early, or
    // a pipe) reports the largest count: the length is then unknown.
    if (sfi.frames >= 0 && sfi.frames < SF_COUNT_MAX) info_.frames = static_cast<std::size_t>(sfi.frames);
    nch_ = static_cast<std::size_t>(sfi.channels);
    for (std::size_t c = 0; c < nch_; ++c) info_.channels.push_back({"ch" + std::to_string(c + 1), "FS"});
    full_scale_ = full_scale(sfi.format);
    clipped_.assign(nch_, 0);
    first_clip_.assign(nch_, 0);
  }
  ~SoundReader() override {
    if (sf_) sf_close(sf_);
    report_clipping();
  }

  std::size_t read_block(std::size_t max_frames, std::vector<std::vector<double>>& out) override {
    inter_.resize(max_frames * nch_);
    const sf_count_t got = sf_readf_double(sf_, inter_.data(), static_cast<sf_count_t>(max_frames));
    if (got < 0) throw InputError(where(info_.path) + "read error: " + sf_strerror(sf_));
    const auto n = static_cast<std::size_t>(got);
    out.resize(selected_.size());
    for (std::size_t i = 0; i < selected_.size(); ++i) {
      const std::size_t c = selected_[i];
      const double s = scale_.empty() ? 1.0 : scale_[c];
      auto& o = out[i];
      o.resize(n);
      for (std::size_t k = 0; k < n; ++k) {
        const double x = inter_[k * nch_ + c];
        if (x >= full_scale_ || x <= -1.0) {
          if (clipped_[c]++ == 0) first_clip_[c] = frames_read_ + k;
        }
        o[k] = x * s;
      }
    }
    frames_read_ += n;
    if (n == 0 && info_.frames && frames_read_ < *info_.frames)
      throw InputError(where(info_.path) + "sound file ends after " + std::to_string(frames_read_) +
                       " frames; its header promises " + std::to_string(*info_.frames) +
                       " (the file is truncated)");
    if (n == 0 && !info_.frames && frames_read_ == 0)
      throw InputError(where(info_.path) + "no audio frames could be decoded (the header gives no length and "
                       "the data is missing or damaged); expected a complete sound file");
    if (n == 0) report_clipping();
    return n;
  }

  std::size_t count_frames() override {
    if (info_.frames) return *info_.frames;
    // length unknown: decode a second handle to the end and count
    SF_INFO sfi{};
    SNDFILE* sf = sf_open(info_.path.c_str(), SFM_READ, &sfi);
    if (!sf) throw InputError(where(info_.path) + "cannot reopen the sound file: " + sf_strerror(nullptr));
    std::vector<double> buf(static_cast<std::size_t>(sfi.channels) * 65536);
    std::size_t total = 0;
    for (sf_count_t g; (g = sf_readf_double(sf, buf.data(), 65536)) > 0;) total += static_cast<std::size_t>(g);
    sf_close(sf);
    return total;
  }

 private:
  void report_clipping() {
    if (reported_) return;
    reported_ = true;
    for (std::size_t c = 0; c < nch_; ++c)
      if (clipped_[c] > 0)
        warnings_.push_back(where(info_.path) + "channel " + std::to_string(c + 1) + ": " +
                            std::to_string(clipped_[c]) + " samples at full scale, the first at " +
                            std::to_string(static_cast<double>(first_clip_[c]) / info_.rate_hz) +
                            " s; the recording is probably clipped (lower the level)");
  }

  SNDFILE* sf_ = nullptr;
  std::size_t nch_ = 0;
  double full_scale_ = 1.0;
  std::vector<double> inter_;
  std::vector<std::size_t> clipped_, first_clip_;
  bool reported_ = false;
};

}  // namespace

std::unique_ptr<RecordReader> open_sound(const std::string& path, const ReadOptions& opts) {
  return std::make_unique<SoundReader>(path, opts);
}

}  // namespace benchid::ident::detail
