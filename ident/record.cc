#include "ident/record.h"

#include <condition_variable>
#include <deque>
#include <exception>
#include <mutex>
#include <system_error>
#include <thread>

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstring>

#include "ident/error.h"
#include "ident/detail/readers.h"

namespace benchid::ident {

namespace {
std::string lower(std::string s) {
  for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

std::string channel_list(const RecordInfo& info) {
  std::string s;
  for (std::size_t i = 0; i < info.channels.size(); ++i) {
    if (i) s += ", ";
    s += std::to_string(i + 1) + "=" + info.channels[i].name;
  }
  return s;
}
}  // namespace

std::size_t RecordReader::channel_index(const std::string& spec) const {
  const auto& ch = info_.channels;
  for (std::size_t i = 0; i < ch.size(); ++i)
    if (ch[i].name == spec) return i;
  const std::string ls = lower(spec);
  for (std::size_t i = 0; i < ch.size(); ++i) {
    if (lower(ch[i].name) == ls) return i;
    if (!ch[i].unit.empty() && lower(ch[i].name + " [" + ch[i].unit + "]") == ls) return i;
  }
  if (!spec.empty() && std::all_of(spec.begin(), spec.end(), ::isdigit) && spec.size() < 9) {
    const std::size_t n = std::stoul(spec);
    if (n >= 1 && n <= ch.size()) return n - 1;
    throw InputError(where(info_.path) + "channel " + spec + " is out of range; expected 1 to " +
                     std::to_string(ch.size()) + " (" + channel_list(info_) + ")");
  }
  throw InputError(where(info_.path) + "no channel '" + spec + "'; expected a name or number of " +
                   channel_list(info_));
}

void RecordReader::select(const std::vector<std::size_t>& channels) {
  for (std::size_t c : channels) {
    if (c >= info_.channels.size())
      throw InputError(where(info_.path) + "channel index " + std::to_string(c + 1) +
                       " out of range");
    if (static_cast<int>(c) == info_.time_channel)
      throw InputError(where(info_.path) + "channel '" + info_.channels[c].name +
                       "' is the time column; expected a data channel");
  }
  selected_ = channels;
}

void RecordReader::set_scale(std::size_t channel, double factor) {
  if (channel >= info_.channels.size())
    throw InputError(where(info_.path) + "scale for channel " + std::to_string(channel + 1) +
                     ": no such channel");
  if (!std::isfinite(factor) || factor == 0.0)
    throw InputError(where(info_.path) + "scale factor " + fmt_num(factor) +
                     " for channel '" + info_.channels[channel].name +
                     "': expected a finite non-zero number");
  if (scale_.size() < info_.channels.size()) scale_.resize(info_.channels.size(), 1.0);
  scale_[channel] = factor;
}

std::unique_ptr<RecordReader> open_record(const std::string& path, const ReadOptions& opts) {
  int fd = ::open(path.c_str(), O_RDONLY);
  if (fd < 0) throw InputError("cannot open '" + path + "': " + std::strerror(errno));
  unsigned char head[4096];
  ssize_t got = ::read(fd, head, sizeof head);
  const int saved = errno;
  ::close(fd);
  if (got < 0) throw InputError("cannot read '" + path + "': " + std::strerror(saved));
  const auto n = static_cast<std::size_t>(got);
  if (n == 0) throw InputError(where(path) + "the file is empty; expected a CSV log or a sound file");
  if (detail::looks_like_sound_file(head, n)) return detail::open_sound(path, opts);
  if (n >= 2 && ((head[0] == 0xFF && head[1] == 0xFE) || (head[0] == 0xFE && head[1] == 0xFF)))
    throw InputError(where(path) + "the file is UTF-16 text; expected UTF-8 or ASCII (save it as UTF-8)");
  if (std::memchr(head, 0, n) != nullptr) {
    // Binary, but not a header we know: libsndfile may still read it.
    return detail::open_sound(path, opts);
  }
  return detail::open_csv(path, opts);
}

struct BlockPrefetcher::State {
  struct Block {
    std::size_t frames = 0;
    std::vector<std::vector<double>> data;
  };
  static constexpr std::size_t kDepth = 3;  // blocks read ahead at most
  std::mutex m;
  std::condition_variable cv;
  std::deque<Block> full;
  std::vector<Block> spare;
  bool done = false, stop = false;
  std::exception_ptr error;
  std::thread thread;
};

BlockPrefetcher::BlockPrefetcher(RecordReader& reader, std::size_t block_frames, std::size_t limit, bool threaded)
    : reader_(reader), block_frames_(std::max<std::size_t>(block_frames, 1)), limit_(limit) {
  if (!threaded) return;
  state_ = std::make_unique<State>();
  State& s = *state_;
  try {
    s.thread = std::thread([this, &s] {
      for (;;) {
        State::Block b;
        {
          std::lock_guard<std::mutex> lk(s.m);
          if (!s.spare.empty()) b = std::move(s.spare.back()), s.spare.pop_back();
        }
        std::exception_ptr err;
        try {
          b.frames = read_direct(b.data);
        } catch (...) {
          err = std::current_exception();
        }
        std::unique_lock<std::mutex> lk(s.m);
        if (err || b.frames == 0) {
          s.error = err;
          s.done = true;
          s.cv.notify_all();
          return;
        }
        s.full.push_back(std::move(b));
        s.cv.notify_all();
        s.cv.wait(lk, [&] { return s.full.size() < State::kDepth || s.stop; });
        if (s.stop) return;
      }
    });
  } catch (const std::system_error&) {
    state_.reset();  // no thread to be had: read on the caller's thread
  }
}

BlockPrefetcher::~BlockPrefetcher() {
  if (!state_) return;
  {
    std::lock_guard<std::mutex> lk(state_->m);
    state_->stop = true;
  }
  state_->cv.notify_all();
  state_->thread.join();
}

std::size_t BlockPrefetcher::read_direct(std::vector<std::vector<double>>& out) {
  if (read_ >= limit_) return 0;
  const std::size_t n = reader_.read_block(std::min(block_frames_, limit_ - read_), out);
  read_ += n;
  return n;
}

std::size_t BlockPrefetcher::next(std::vector<std::vector<double>>& out) {
  if (!state_) return read_direct(out);
  State& s = *state_;
  std::unique_lock<std::mutex> lk(s.m);
  s.cv.wait(lk, [&] { return !s.full.empty() || s.done; });
  if (s.full.empty()) {
    if (s.error) {
      auto e = s.error;
      s.error = nullptr;
      std::rethrow_exception(e);
    }
    return 0;
  }
  State::Block b = std::move(s.full.front());
  s.full.pop_front();
  const std::size_t frames = b.frames;
  std::swap(out, b.data);
  s.spare.push_back(std::move(b));  // the caller's old buffers, to be filled again
  s.cv.notify_all();
  return frames;
}

Record read_record(const std::string& path, const ReadOptions& opts) {
  auto reader = open_record(path, opts);
  Record rec;
  rec.path = path;
  std::vector<std::size_t> sel;
  for (std::size_t i = 0; i < reader->info().channels.size(); ++i)
    if (static_cast<int>(i) != reader->info().time_channel) {
      sel.push_back(i);
      rec.channels.push_back(reader->info().channels[i]);
    }
  reader->select(sel);
  rec.samples.resize(sel.size());
  std::vector<std::vector<double>> block;
  while (reader->read_block(1 << 16, block) > 0)
    for (std::size_t c = 0; c < sel.size(); ++c)
      rec.samples[c].insert(rec.samples[c].end(), block[c].begin(), block[c].end());
  rec.rate_hz = reader->rate_hz();
  return rec;
}

}  // namespace benchid::ident
