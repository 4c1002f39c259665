// Recordings: named channels of double samples at a uniform rate.
//
// A recording is read through a RecordReader, which streams blocks of frames
// so that a log far larger than memory is processed in one pass with bounded
// memory. read_record() reads a whole recording for small files and tests.
//
// Channel numbering (DESIGN.md): channels are numbered from 1 in file order;
// for a CSV log every column counts, the time column included, so in
// "time_s,u,y" channel 2 is "u". Sound-file channels are 1..channels.
// Sample values are in the channel's unit (CSV: as written; sound file: full
// scale = 1.0 unless a scale factor in units per full scale is set).
#pragma once

#include <cstddef>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace benchid::ident {

struct ChannelInfo {
  std::string name;  // as in the header, without a bracketed unit ("speed [rad/s]" -> "speed")
  std::string unit;  // "rad/s", or inferred from a suffix ("speed_rads" -> "rad/s"); may be empty
};

struct RecordInfo {
  std::string path;
  std::string format;                 // "csv" or the sound-file format name ("wav", "flac", ...)
  std::vector<ChannelInfo> channels;  // every column / sound channel, in file order
  int time_channel = -1;              // index of the time column, -1 if none (CSV only)
  double rate_hz = 0;                 // sampling rate; see RecordReader::rate_hz()
  std::optional<std::size_t> frames;  // known up front for sound files
};

// Options for opening a recording. Defaults suit a DAQ or drive-scope log.
struct ReadOptions {
  double rate_hz = 0;           // > 0: use this rate and ignore any time column; 0: from the file
  double jitter_tolerance = 0.01;  // allowed deviation of one time step, as a fraction of the
                                   // nominal step (plus the printed resolution of the time values)
  double fallback_rate_hz = 0;  // > 0: the rate of a CSV log with neither time column nor rate comment
                                // (e.g. from the excitation's sidecar)
  std::size_t threads = 0;      // CSV parse threads: 0 = one per core (at most 8), 1 = the calling
                                // thread only; values and errors do not depend on it
  std::size_t chunk_bytes = 1u << 20;  // CSV text parsed per step (memory and speed, not results); >= 64
};

class RecordReader {
 public:
  virtual ~RecordReader() = default;
  const RecordInfo& info() const { return info_; }

  // Resolves a channel given as a name (exact, then case-insensitive; the
  // header text with its unit also matches) or as a 1-based number. Throws
  // InputError listing the channels when there is no such channel.
  std::size_t channel_index(const std::string& spec) const;

  // Chooses which channels read_block() delivers, in this order.
  virtual void select(const std::vector<std::size_t>& channels);
  // Multiplies a channel's samples by factor (units per full scale for sound files).
  void set_scale(std::size_t channel, double factor);

  // Reads up to max_frames frames of the selected channels into out[i]
  // (resized to the frames read). Returns the number of frames; 0 at the end.
  // Throws InputError on malformed data, naming file and line.
  virtual std::size_t read_block(std::size_t max_frames, std::vector<std::vector<double>>& out) = 0;

  // Sampling rate in Hz. For a CSV log with a time column the value is
  // provisional until the end of the data is reached; then it is
  // (frames - 1) / (t_last - t_first).
  virtual double rate_hz() const { return info_.rate_hz; }
  std::size_t frames_read() const { return frames_read_; }
  // Counts the data frames without delivering them (a fast scan for CSV).
  virtual std::size_t count_frames() = 0;
  // Warnings met while reading (clipping, ignored time column), one line each.
  const std::vector<std::string>& warnings() const { return warnings_; }

 protected:
  RecordInfo info_;
  std::vector<std::size_t> selected_;
  std::vector<double> scale_;  // per channel in info_.channels
  std::size_t frames_read_ = 0;
  std::vector<std::string> warnings_;
};

// Opens a recording. The format is told from the content, not the name:
// RIFF/RF64/FORM/fLaC/OggS/... headers go to libsndfile, text to the CSV reader.
std::unique_ptr<RecordReader> open_record(const std::string& path, const ReadOptions& opts = {});

// Reads the blocks of a RecordReader on a background thread, a few blocks
// ahead of the consumer, so that parsing or decoding overlaps the consumer's
// work. Blocks come in order with the sizes direct read_block() calls would
// give, so results do not depend on it; a reader error is raised by next()
// at the point of the stream where the reader met it. The reader must not be
// used by anyone else until next() has returned 0 or the prefetcher is gone.
class BlockPrefetcher {
 public:
  // limit: most frames read in all; threaded = false reads on the caller's thread.
  BlockPrefetcher(RecordReader& reader, std::size_t block_frames,
                  std::size_t limit = static_cast<std::size_t>(-1), bool threaded = true);
  ~BlockPrefetcher();  // stops the thread and waits for it
  BlockPrefetcher(const BlockPrefetcher&) = delete;
  BlockPrefetcher& operator=(const BlockPrefetcher&) = delete;
  // The next block into out[c][n]; returns its frames, 0 at the end.
  std::size_t next(std::vector<std::vector<double>>& out);

 private:
  struct State;
  std::size_t read_direct(std::vector<std::vector<double>>& out);
  RecordReader& reader_;
  std::size_t block_frames_, limit_, read_ = 0;
  std::unique_ptr<State> state_;  // null when not threaded
};

// A whole recording in memory.
struct Record {
  std::string path;
  double rate_hz = 0;
  std::vector<ChannelInfo> channels;         // every channel but the time column
  std::vector<std::vector<double>> samples;  // samples[c][n]
};
Record read_record(const std::string& path, const ReadOptions& opts = {});

}  // namespace benchid::ident
