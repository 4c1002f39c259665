// Streaming reader for CSV / TSV / whitespace-separated logs.
//
// Accepted layout: optional "#" comment lines (a "# rate_hz=F" comment sets
// the rate), one header row of channel names (optional units as
// "speed [rad/s]", "speed (rad/s)" or a suffix "speed_rads"), then one row per
// sample. The delimiter is detected from the header: tab, then ';', then ',',
// else runs of spaces. With ';', tab or space delimiters a decimal comma
// ("1,25") is accepted. A header of numbers means there is no header; the
// columns are then named "1", "2", ...
//
// Speed: the file is read in chunks (4 MiB by default), lines found with
// memchr, numbers parsed in place (Clinger's fast path, else
// std::from_chars); no allocation per row or field. Each chunk is split at
// line ends into pieces parsed on separate threads, then joined and checked
// in file order, so values, time checks and the first error reported are the
// same for any number of threads and any chunk size.
#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <cerrno>
#include <cstdint>
#include <charconv>
#include <cmath>
#include <cstring>
#include <string_view>
#include <exception>
#include <memory>
#include <thread>
#include <vector>

#include "ident/detail/readers.h"
#include "ident/error.h"
#include "ident/work_pool.h"

namespace benchid::ident::detail {

namespace {

constexpr std::size_t kChunk = 4u << 20;      // bytes read at a time by count_frames()
constexpr std::size_t kMaxLine = 1u << 20;    // longest accepted line, bytes
constexpr std::size_t kMaxColumns = 4096;     // most accepted columns

bool is_space(char c) { return c == ' ' || c == '\t'; }

std::string_view trim(std::string_view s) {
  while (!s.empty() && (is_space(s.front()) || s.front() == '"')) s.remove_prefix(1);
  while (!s.empty() && (is_space(s.back()) || s.back() == '"')) s.remove_suffix(1);
  return s;
}

std::string lower(std::string_view s) {
  std::string r(s);
  for (char& c : r) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return r;
}

std::string shown(std::string_view s) {
  std::string r(s.substr(0, 40));
  if (s.size() > 40) r += "...";
  return r;
}

// Decimal places printed in a number's text ("0.0015" -> 4, "2.5e-05" -> 6),
// giving the rounding quantum 10^-places of a printed time stamp.
int printed_places(std::string_view s) {
  int frac = 0, exp = 0;
  std::size_t i = s.find('.');
  if (i == std::string_view::npos) i = s.find(',');
  std::size_t epos = s.find_first_of("eE");
  if (i != std::string_view::npos) {
    std::size_t j = i + 1;
    while (j < s.size() && j != epos && std::isdigit(static_cast<unsigned char>(s[j]))) ++j, ++frac;
  }
  if (epos != std::string_view::npos) {
    std::string_view e = s.substr(epos + 1);
    if (!e.empty() && e.front() == '+') e.remove_prefix(1);
    std::from_chars(e.data(), e.data() + e.size(), exp);
  }
  return frac - exp;
}

// Clinger's fast path (W. D. Clinger, "How to read floating point numbers
// accurately", PLDI 1990): a decimal with at most 15 significant digits and
// a power of ten within 1e+-22 is m * 10^e or m / 10^e of two exact doubles,
// so one IEEE operation rounds it correctly, the same double std::from_chars
// gives. Returns the end of the number, or nullptr when the text is outside
// the fast path (then std::from_chars decides, and reports errors).
const char* parse_decimal_fast(const char* p, const char* e, double& out) {
  static constexpr double kPow10[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,  1e9,  1e10, 1e11,
                                      1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
  bool neg = false;
  if (p < e && (*p == '-' || *p == '+')) neg = *p++ == '-';
  std::uint64_t m = 0;
  int sig = 0, e10 = 0;
  bool any = false;
  for (; p < e && static_cast<unsigned>(*p - '0') < 10; ++p) {
    any = true;
    const int d = *p - '0';
    if (m == 0 && d == 0) continue;
    if (++sig > 15) return nullptr;
    m = m * 10 + static_cast<unsigned>(d);
  }
  if (p < e && *p == '.') {
    for (++p; p < e && static_cast<unsigned>(*p - '0') < 10; ++p) {
      any = true;
      const int d = *p - '0';
      --e10;
      if (m == 0 && d == 0) continue;
      if (++sig > 15) return nullptr;
      m = m * 10 + static_cast<unsigned>(d);
    }
  }
  if (!any) return nullptr;
  if (p < e && (*p == 'e' || *p == 'E')) {
    ++p;
    bool eneg = false;
    if (p < e && (*p == '-' || *p == '+')) eneg = *p++ == '-';
    int x = 0;
    const char* s = p;
    for (; p < e && static_cast<unsigned>(*p - '0') < 10 && x < 10000; ++p) x = x * 10 + (*p - '0');
    if (p == s) return nullptr;
    e10 += eneg ? -x : x;
  }
  double v = static_cast<double>(m);
  if (m != 0) {
    if (e10 < -22 || e10 > 22) return nullptr;
    v = e10 < 0 ? v / kPow10[-e10] : v * kPow10[e10];
  }
  out = neg ? -v : v;
  return p;
}

struct TimeName {
  bool is_time = false;
  double scale_s = 1.0;  // seconds per unit of the column
};

TimeName time_name(const std::string& name, const std::string& unit) {
  const std::string n = lower(name), u = lower(unit);
  TimeName t;
  static const char* kSeconds[] = {"time", "t", "time_s", "t_s", "timestamp", "seconds", "sec"};
  static const char* kMillis[] = {"time_ms", "t_ms"};
  static const char* kMicros[] = {"time_us", "t_us"};
  for (const char* s : kSeconds) if (n == s) t = {true, 1.0};
  for (const char* s : kMillis) if (n == s) t = {true, 1e-3};
  for (const char* s : kMicros) if (n == s) t = {true, 1e-6};
  if (t.is_time && !u.empty()) {
    if (u == "s" || u == "sec") t.scale_s = 1.0;
    else if (u == "ms") t.scale_s = 1e-3;
    else if (u == "us" || u == "\xC2\xB5s") t.scale_s = 1e-6;
    else t.is_time = false;  // "t [degC]" is a temperature, not time
  }
  return t;
}

class CsvReader final : public RecordReader {
 public:
  CsvReader(const std::string& path, const ReadOptions& opts) : opts_(opts) {
    info_.path = path;
    info_.format = "csv";
    fd_ = ::open(path.c_str(), O_RDONLY);
    if (fd_ < 0) throw InputError("cannot open '" + path + "': " + std::strerror(errno));
    chunk_ = std::max<std::size_t>(opts.chunk_bytes, 64);
    threads_ = opts.threads > 0 ? opts.threads : std::clamp<std::size_t>(std::thread::hardware_concurrency(), 1, 8);
    buf_.resize(chunk_ + kMaxLine);
    try {
      read_header();
      detect_decimal_comma();
    } catch (...) {
      ::close(fd_);
      throw;
    }
  }
  ~CsvReader() override {
    if (fd_ >= 0) ::close(fd_);
  }

  void select(const std::vector<std::size_t>& channels) override {
    RecordReader::select(channels);
    slot_.assign(ncols_, -1);
    for (std::size_t i = 0; i < channels.size(); ++i) slot_[channels[i]] = static_cast<int>(i);
    if (use_time_) slot_[static_cast<std::size_t>(info_.time_channel)] = kTimeSlot;
  }

  std::size_t read_block(std::size_t max_frames, std::vector<std::vector<double>>& out) override {
    if (slot_.empty()) select({});
    out.resize(selected_.size());
    for (auto& v : out) v.clear(), v.reserve(max_frames);  // grown as rows come: a short file touches little memory
    std::size_t n = 0;
    while (n < max_frames) {
      if (cur_piece_ == npieces_ && !fill()) break;
      const Piece& pc = pieces_[cur_piece_];
      if (cur_row_ == pc.rows) {
        ++cur_piece_, cur_row_ = 0;
        continue;
      }
      const std::size_t take = std::min(max_frames - n, pc.rows - cur_row_);
      for (std::size_t i = 0; i < out.size(); ++i) {
        out[i].resize(n + take);
        std::memcpy(out[i].data() + n, pc.cols[i].data() + cur_row_, take * sizeof(double));
      }
      cur_row_ += take;
      n += take;
    }
    if (n == 0 && max_frames > 0 && use_time_ && time_rows_ == 1)  // at the end, with one time stamp
      throw InputError(where(info_.path) + "one data row; expected at least two, so the time column gives the rate");
    for (auto& v : out) v.resize(n);
    for (std::size_t i = 0; i < selected_.size(); ++i) {
      const double s = scale_.empty() ? 1.0 : scale_[selected_[i]];
      if (s != 1.0) for (double& x : out[i]) x *= s;
    }
    frames_read_ += n;
    return n;
  }

  double rate_hz() const override {
    if (!use_time_ || time_rows_ < 2) return info_.rate_hz;
    return static_cast<double>(time_rows_ - 1) / (t_last_ - t_first_);
  }

  std::size_t count_frames() override {
    int fd = ::open(info_.path.c_str(), O_RDONLY);
    if (fd < 0) throw InputError("cannot open '" + info_.path + "': " + std::strerror(errno));
    std::vector<char> buf(kChunk + kMaxLine);
    std::size_t have = 0, count = 0;
    long line = 0;
    bool eof = false;
    while (!eof || have > 0) {
      if (!eof) {
        ssize_t r = ::read(fd, buf.data() + have, buf.size() - have);
        if (r <= 0) eof = true;
        else have += static_cast<std::size_t>(r);
      }
      std::size_t pos = 0;
      for (;;) {
        const char* s = buf.data() + pos;
        const char* nl = static_cast<const char*>(std::memchr(s, '\n', have - pos));
        if (!nl && !(eof && pos < have)) break;
        const char* e = nl ? nl : buf.data() + have;
        ++line;
        const char* p = s;
        while (p < e && (is_space(*p) || *p == '\r')) ++p;
        if (line > header_line_ && p < e && *p != '#') ++count;
        pos = static_cast<std::size_t>(e - buf.data()) + (nl ? 1 : 0);
        if (!nl) break;
      }
      std::memmove(buf.data(), buf.data() + pos, have - pos);
      have -= pos;
      if (eof) break;
    }
    ::close(fd);
    // a header-less file's first row is data
    return count + (pending_line_ > 0 && header_line_ == pending_line_ ? 1 : 0);
  }

 private:
  static constexpr int kTimeSlot = -2;

  // Moves the unread bytes [pos_, end_) to the front of the buffer and reads
  // until it is full or the file ends. A NUL byte is remembered (nul_), not
  // refused here: the line holding it is refused when it is reached, so the
  // error names that line whatever the chunk size.
  void refill() {
    const std::size_t rem = end_ - pos_;
    std::memmove(buf_.data(), buf_.data() + pos_, rem);
    if (nul_ != kNone) nul_ -= pos_;
    pos_ = 0;
    end_ = rem;
    while (!eof_ && end_ < buf_.size()) {
      const ssize_t r = ::read(fd_, buf_.data() + end_, buf_.size() - end_);
      if (r < 0 && errno == EINTR) continue;
      if (r < 0) throw InputError("cannot read '" + info_.path + "': " + std::strerror(errno));
      if (r == 0) {
        eof_ = true;
        break;
      }
      if (nul_ == kNone) {
        const void* z = std::memchr(buf_.data() + end_, 0, static_cast<std::size_t>(r));
        if (z) nul_ = static_cast<std::size_t>(static_cast<const char*>(z) - buf_.data());
      }
      end_ += static_cast<std::size_t>(r);
    }
  }

  [[noreturn]] void refuse_nul(long line) const {
    throw InputError(where(info_.path, line) + "binary data (a NUL byte) in a text log; expected CSV text");
  }
  [[noreturn]] void refuse_long(long line) const {
    throw InputError(where(info_.path, line) + "line longer than 1 MiB; expected a log with one sample per line");
  }

  // Next physical line [b, e) without its end-of-line; false at end of file
  // (header and comment lines before it; data rows go through fill()).
  bool next_line(const char*& b, const char*& e) {
    for (;;) {
      char* start = buf_.data() + pos_;
      auto* nl = static_cast<char*>(std::memchr(start, '\n', end_ - pos_));
      if (nl != nullptr || (eof_ && pos_ < end_)) {
        b = start;
        e = nl ? nl : buf_.data() + end_;
        pos_ = static_cast<std::size_t>(e - buf_.data()) + (nl ? 1 : 0);
        if (e > b && e[-1] == '\r') --e;
        ++line_no_;
        if (nul_ != kNone && nul_ < pos_) refuse_nul(line_no_);
        if (static_cast<std::size_t>(e - b) > kMaxLine) refuse_long(line_no_);
        return true;
      }
      if (eof_) return false;
      if (end_ - pos_ > kMaxLine) refuse_long(line_no_ + 1);
      refill();
    }
  }

  // Rows parsed from one piece of a chunk (by one thread).
  struct RowTime {
    double t = 0;
    const char* b = nullptr;  // time stamp as printed
    const char* e = nullptr;
  };
  struct alignas(64) Piece {
    const char* b = nullptr;  // whole lines [b, e)
    const char* e = nullptr;
    std::vector<std::vector<double>> cols;  // per selected channel, rows (capacity may exceed)
    std::vector<RowTime> time;              // per row when the time column is checked
    std::size_t rows = 0;
    long lines = 0;               // physical lines in the piece (comments and blanks included)
    const char* fail_b = nullptr;  // the first line that failed to parse, and its local number
    const char* fail_e = nullptr;
    long fail_line = 0;
    std::exception_ptr other;  // anything but a parse error (out of memory)
  };

  // Parses the data rows of one piece; never throws (errors are recorded and
  // raised in file order by fill()). Reads only state fixed after the header.
  void parse_piece(Piece& pc) const noexcept {
    // Counters live in locals and are stored at the end: pieces parsed at
    // the same time would otherwise share cache lines row by row.
    std::size_t rows = 0;
    long lines = 0;
    pc.fail_b = nullptr;
    pc.other = nullptr;
    try {
      std::vector<std::vector<double>> cols = std::move(pc.cols);
      std::vector<RowTime> time = std::move(pc.time);
      cols.resize(selected_.size());
      std::size_t cap = cols.empty() ? time.size() : cols[0].size();
      const char* p = pc.b;
      const char* const end = pc.e;
      while (p < end) {
        const char* nl = static_cast<const char*>(std::memchr(p, '\n', static_cast<std::size_t>(end - p)));
        const char* b = p;
        const char* e = nl ? nl : end;
        p = nl ? nl + 1 : end;
        ++lines;
        if (e > b && e[-1] == '\r') --e;
        bool failed = static_cast<std::size_t>(e - b) > kMaxLine;
        if (!failed) {
          const char* q = b;
          while (q < e && is_space(*q)) ++q;
          if (q == e || *q == '#') continue;  // blank or comment line
          if (rows == cap) {
            cap = std::max<std::size_t>(4096, 2 * cap);
            for (auto& c : cols) c.resize(cap);
            if (use_time_) time.resize(cap);
          }
          RowTime rt;
          try {
            parse_fields(b, e, cols, rows, 0, rt);
          } catch (const InputError&) {
            failed = true;
          }
          if (!failed) {
            if (use_time_) time[rows] = rt;
            ++rows;
            continue;
          }
        }
        pc.fail_b = b, pc.fail_e = e, pc.fail_line = lines;
        break;
      }
      pc.cols = std::move(cols);
      pc.time = std::move(time);
    } catch (...) {
      pc.other = std::current_exception();
    }
    pc.rows = rows;
    pc.lines = lines;
  }

  // Raises the error of a line a piece could not parse, naming its line.
  [[noreturn]] void raise_row_error(const char* b, const char* e, long line) {
    if (static_cast<std::size_t>(e - b) > kMaxLine) refuse_long(line);
    std::vector<std::vector<double>> scratch(selected_.size(), std::vector<double>(1));
    RowTime rt;
    parse_fields(b, e, scratch, 0, line, rt);  // throws
    throw InputError(where(info_.path, line) + "row could not be parsed");
  }

  // Parses the next chunk of whole lines into pieces_ (split at line ends
  // and parsed by up to threads_ threads); the pieces are checked in file
  // order, so the values and the first error reported do not depend on the
  // number of threads or the chunk size. False at the end of the data.
  bool fill() {
    cur_piece_ = cur_row_ = npieces_ = 0;
    if (!pending_.empty()) {  // a first data row met while looking for the header
      std::string row;
      row.swap(pending_);
      if (pieces_.empty()) pieces_.resize(1);
      Piece& pc = pieces_[0];
      pc.cols.resize(selected_.size());
      for (auto& v : pc.cols) v.resize(std::max<std::size_t>(v.size(), 1));
      RowTime rt;
      parse_fields(row.data(), row.data() + row.size(), pc.cols, 0, pending_line_, rt);
      if (rt.b) check_time(rt, [&] { return pending_line_; });
      pc.rows = 1;
      npieces_ = 1;
      return true;
    }
    for (;;) {
      if (!eof_ && nul_ == kNone && end_ - pos_ < chunk_) refill();
      // whole lines in [pos_, stop), at most about chunk_ bytes, ending
      // before the line that holds a NUL byte
      std::size_t stop = end_;
      if (!eof_ || end_ - pos_ > chunk_) {
        const std::size_t upto = std::min(end_, pos_ + chunk_);
        const void* last = ::memrchr(buf_.data() + pos_, '\n', upto - pos_);
        if (!last && upto < end_) last = std::memchr(buf_.data() + upto, '\n', end_ - upto);  // a long line
        stop = last ? static_cast<std::size_t>(static_cast<const char*>(last) - buf_.data()) + 1
                    : (eof_ ? end_ : pos_);
      }
      if (nul_ != kNone && nul_ < stop) {
        const void* before = ::memrchr(buf_.data() + pos_, '\n', nul_ - pos_);
        stop = before ? static_cast<std::size_t>(static_cast<const char*>(before) - buf_.data()) + 1 : pos_;
      }
      if (stop == pos_) {
        if (nul_ != kNone) refuse_nul(line_no_ + 1);
        if (eof_) return false;
        if (end_ - pos_ > kMaxLine) refuse_long(line_no_ + 1);
        refill();  // a line longer than the chunk: read on
        continue;
      }
      const std::size_t rows = parse_region(buf_.data() + pos_, buf_.data() + stop);
      pos_ = stop;
      if (rows > 0) return true;
    }
  }

  // Parses [rb, re) in pieces of about chunk_ / 16 bytes, taken in turn by the
  // calling thread and the helpers; returns the rows.
  std::size_t parse_region(const char* rb, const char* re) {
    const std::size_t piece = std::max<std::size_t>(64, chunk_ / 16);  // 64 KiB for the default chunk
    const auto len = static_cast<std::size_t>(re - rb);
    const std::size_t n = threads_ > 1 ? std::max<std::size_t>(1, len / piece) : 1;
    if (pieces_.size() < n) pieces_.resize(n);
    const char* at = rb;
    for (std::size_t k = 0; k < n; ++k) {
      const char* end = re;
      if (k + 1 < n) {
        end = std::max(at, rb + len * (k + 1) / n);
        const void* nl = std::memchr(end, '\n', static_cast<std::size_t>(re - end));
        end = nl ? static_cast<const char*>(nl) + 1 : re;
      }
      pieces_[k].b = at;
      pieces_[k].e = end;
      at = end;
    }
    if (n > 1 && !pool_) pool_ = std::make_unique<WorkPool>(threads_ - 1);
    if (n > 1) pool_->run(n, [this](std::size_t k) { parse_piece(pieces_[k]); });
    else parse_piece(pieces_[0]);
    // in file order: time checks, then the first failing line
    long base = line_no_;
    std::size_t total = 0;
    for (std::size_t k = 0; k < n; ++k) {
      const Piece& pc = pieces_[k];
      if (use_time_)
        for (std::size_t r = 0; r < pc.rows; ++r)
          check_time(pc.time[r], [&] { return base + 1 + static_cast<long>(std::count(pc.b, pc.time[r].b, '\n')); });
      if (pc.fail_b) raise_row_error(pc.fail_b, pc.fail_e, base + pc.fail_line);
      if (pc.other) std::rethrow_exception(pc.other);
      base += pc.lines;
      total += pc.rows;
    }
    line_no_ = base;
    npieces_ = n;
    return total;
  }

  // Splits a line into fields with the detected delimiter (header and
  // header-detection use only; the data path splits in parse_row).
  std::vector<std::string_view> split(const char* b, const char* e) const {
    std::vector<std::string_view> f;
    if (delim_ == 0) {
      const char* p = b;
      while (p < e) {
        while (p < e && is_space(*p)) ++p;
        if (p == e) break;
        const char* q = p;
        while (q < e && !is_space(*q)) ++q;
        // "speed [rad/s]": a bracketed unit belongs to the name before it
        if (*p == '[' && !f.empty()) {
          f.back() = std::string_view(f.back().data(), static_cast<std::size_t>(q - f.back().data()));
        } else {
          f.emplace_back(p, static_cast<std::size_t>(q - p));
        }
        p = q;
      }
      return f;
    }
    const char* p = b;
    for (;;) {
      const char* q = static_cast<const char*>(std::memchr(p, delim_, static_cast<std::size_t>(e - p)));
      if (!q) q = e;
      f.emplace_back(p, static_cast<std::size_t>(q - p));
      if (q == e) break;
      p = q + 1;
    }
    if (f.size() > 1 && trim(f.back()).empty()) f.pop_back();  // trailing delimiter
    return f;
  }

  void read_header() {
    const char *b, *e;
    for (;;) {
      if (!next_line(b, e))
        throw InputError(where(info_.path) + (line_no_ == 0 ? "the file is empty"
                                                            : "no header or data rows, only comments") +
                         "; expected a header row of channel names and one row per sample");
      if (line_no_ == 1 && e - b >= 3 && std::memcmp(b, "\xEF\xBB\xBF", 3) == 0) b += 3;  // UTF-8 BOM
      const char* p = b;
      while (p < e && is_space(*p)) ++p;
      if (p == e) continue;
      if (*p == '#') {
        std::string_view c(p + 1, static_cast<std::size_t>(e - p - 1));
        c = trim(c);
        if (c.rfind("rate_hz=", 0) == 0) {
          double r = 0;
          auto v = c.substr(8);
          auto res = std::from_chars(v.data(), v.data() + v.size(), r);
          if (res.ec == std::errc() && r > 0 && std::isfinite(r)) comment_rate_ = r;
        }
        continue;
      }
      break;
    }
    header_line_ = line_no_;
    const std::string_view line(b, static_cast<std::size_t>(e - b));
    const auto count = [&](char c) { return std::count(line.begin(), line.end(), c); };
    if (count('\t') > 0) delim_ = '\t';
    else if (count(';') > 0) delim_ = ';';
    else if (count(',') > 0) delim_ = ',';
    else delim_ = 0;
    auto fields = split(b, e);
    if (fields.size() > kMaxColumns)
      throw InputError(where(info_.path, line_no_) + std::to_string(fields.size()) +
                       " columns; expected at most " + std::to_string(kMaxColumns));
    ncols_ = fields.size();

    // A header made of numbers is the first data row of a header-less file.
    bool numeric = true;
    for (auto f : fields) {
      f = trim(f);
      double v;
      if (f.empty() || std::from_chars(f.data(), f.data() + f.size(), v).ec != std::errc()) {
        numeric = false;
        break;
      }
    }
    for (std::size_t i = 0; i < ncols_; ++i) {
      ChannelInfo ch;
      if (numeric) {
        ch.name = std::to_string(i + 1);
      } else {
        std::string_view f = trim(fields[i]);
        if (f.empty())
          throw InputError(where(info_.path, line_no_) + "column " + std::to_string(i + 1) +
                           " has an empty name; expected a channel name in every header field");
        const char close = f.back();
        const std::size_t open = close == ']' ? f.rfind('[') : close == ')' ? f.rfind('(') : std::string_view::npos;
        if ((close == ']' || close == ')') && open != std::string_view::npos && open > 0) {
          ch.unit = std::string(trim(f.substr(open + 1, f.size() - open - 2)));
          ch.name = std::string(trim(f.substr(0, open)));
        } else {
          ch.name = std::string(f);
          ch.unit = unit_from_suffix(ch.name);
        }
        for (std::size_t j = 0; j < i; ++j)
          if (info_.channels[j].name == ch.name)
            throw InputError(where(info_.path, line_no_) + "column name '" + ch.name +
                             "' appears twice (columns " + std::to_string(j + 1) + " and " +
                             std::to_string(i + 1) + "); expected unique names");
      }
      info_.channels.push_back(ch);
    }
    if (numeric) {
      pending_.assign(b, e);
      pending_line_ = line_no_;
    }
    for (std::size_t i = 0; i < ncols_ && info_.time_channel < 0; ++i) {
      TimeName t = time_name(info_.channels[i].name, info_.channels[i].unit);
      if (t.is_time) {
        info_.time_channel = static_cast<int>(i);
        time_scale_ = t.scale_s;
        if (info_.channels[i].unit.empty()) info_.channels[i].unit = t.scale_s == 1.0 ? "s" : t.scale_s == 1e-3 ? "ms" : "us";
      }
    }
    if (opts_.rate_hz > 0) {
      info_.rate_hz = opts_.rate_hz;
      if (info_.time_channel >= 0)
        warnings_.push_back(where(info_.path) + "rate " + std::to_string(opts_.rate_hz) +
                            " Hz given; time column '" +
                            info_.channels[static_cast<std::size_t>(info_.time_channel)].name +
                            "' is not checked or used");
    } else if (info_.time_channel >= 0) {
      use_time_ = true;
      info_.rate_hz = peek_rate();
    } else if (comment_rate_ > 0) {
      info_.rate_hz = comment_rate_;
    } else if (opts_.fallback_rate_hz > 0) {
      info_.rate_hz = opts_.fallback_rate_hz;
    } else {
      throw InputError(where(info_.path, header_line_) +
                       "no time column (time, t, time_s, time_ms...) and no rate; expected a time "
                       "column or --rate HZ");
    }
  }

  // Provisional rate from the first rows still in the buffer (validated while reading).
  double peek_rate() {
    const auto tcol = static_cast<std::size_t>(info_.time_channel);
    std::vector<double> t;
    std::size_t p = pos_;
    if (!pending_.empty()) {
      auto f = split(pending_.data(), pending_.data() + pending_.size());
      double v;
      auto s = trim(f[tcol]);
      if (std::from_chars(s.data(), s.data() + s.size(), v).ec == std::errc()) t.push_back(v);
    }
    while (t.size() < 65 && p < end_) {
      const char* s = buf_.data() + p;
      const char* nl = static_cast<const char*>(std::memchr(s, '\n', end_ - p));
      const char* e = nl ? nl : buf_.data() + end_;
      p = static_cast<std::size_t>(e - buf_.data()) + 1;
      const char* q = s;
      while (q < e && (is_space(*q) || *q == '\r')) ++q;
      if (q == e || *q == '#') continue;
      auto f = split(s, e);
      if (f.size() <= tcol) break;
      double v;
      auto fv = trim(f[tcol]);
      if (std::from_chars(fv.data(), fv.data() + fv.size(), v).ec != std::errc()) break;
      t.push_back(v);
      if (!nl) break;
    }
    if (t.size() >= 2 && t.back() > t.front())
      return static_cast<double>(t.size() - 1) / ((t.back() - t.front()) * time_scale_);
    return 0.0;  // decided (or refused) while reading
  }

  [[noreturn]] void bad_value(long line, std::size_t col, std::string_view f, const char* what) const {
    throw InputError(where(info_.path, line) + "column '" + info_.channels[col].name + "' value '" +
                     shown(f) + "' " + what);
  }

  double parse_number(const char* p, const char* q, std::size_t col, long line) const {
    while (p < q && (is_space(*p) || *p == '"')) ++p;
    while (q > p && (is_space(q[-1]) || q[-1] == '"')) --q;
    if (p == q) bad_value(line, col, "", "is empty; expected a number");
    const char* s = p;
    if (*s == '+') ++s;
    double v;
    std::from_chars_result r;
    char tmp[64];
    if (decimal_comma_ && static_cast<std::size_t>(q - s) < sizeof tmp && std::memchr(s, ',', static_cast<std::size_t>(q - s))) {
      const auto n = static_cast<std::size_t>(q - s);
      std::memcpy(tmp, s, n);
      std::replace(tmp, tmp + n, ',', '.');
      r = std::from_chars(tmp, tmp + n, v);
      r.ptr = s + (r.ptr - tmp);
    } else {
      r = std::from_chars(s, q, v);
    }
    const std::string_view text(p, static_cast<std::size_t>(q - p));
    if (r.ec == std::errc::result_out_of_range)
      bad_value(line, col, text, "is out of the range of a double (about 1e-308 to 1e308)");
    if (r.ec != std::errc() || r.ptr != q) bad_value(line, col, text, "is not a number; expected a decimal number");
    if (!std::isfinite(v)) bad_value(line, col, text, "is not finite; expected a finite number");
    return v;
  }

  // Checks the time stamp of the next row (rows in file order); line_of()
  // gives its line number, needed only for an error.
  template <class LineOf>
  void check_time(const RowTime& rt, LineOf line_of) {
    const char* fb = rt.b;
    const char* fe = rt.e;
    const double t = rt.t * time_scale_;
    const std::size_t k = time_rows_++;  // index of this sample
    const std::size_t len = std::min<std::size_t>(static_cast<std::size_t>(fe - fb), prev_text_.size());
    if (k == 0) {
      t_first_ = t_last_ = t;
      std::memcpy(prev_text_.data(), fb, len);
      prev_len_ = len;
      return;
    }
    if (!(t > t_last_))
      throw InputError(where(info_.path, line_of()) + "time " + fmt(t) + " s is not after the previous " +
                       fmt(t_last_) + " s; expected strictly increasing time");
    const double step = t - t_last_;
    if (k >= 2 && std::fabs(step - dt_nominal_) > opts_.jitter_tolerance * dt_nominal_) {
      // Outside the plain tolerance: allow for the rounding of the printed
      // time stamps (their last decimal place) before refusing.
      const auto quantum = [&](std::string_view s) { return std::pow(10.0, -printed_places(s)) * time_scale_; };
      const double q = std::max(quantum({fb, static_cast<std::size_t>(fe - fb)}), quantum({prev_text_.data(), prev_len_}));
      if (std::fabs(step - dt_nominal_) > opts_.jitter_tolerance * dt_nominal_ + q)
        throw InputError(where(info_.path, line_of()) + "time step " + fmt(step) + " s (at " + fmt(t) +
                         " s); expected " + fmt(dt_nominal_) + " s within " +
                         fmt(opts_.jitter_tolerance * 100) +
                         " % (sampling must be uniform; resample the log, or give --rate HZ to "
                         "ignore the time column)");
    }
    if (k <= 1024) dt_nominal_ = (t - t_first_) / static_cast<double>(k);
    t_last_ = t;
    std::memcpy(prev_text_.data(), fb, len);
    prev_len_ = len;
  }

  static std::string fmt(double v) {
    char b[32];
    std::snprintf(b, sizeof b, "%.9g", v);
    return b;
  }

  // Parses the fields of one data row into out[slot][n] and the time stamp
  // into rt; throws InputError naming `line`.
  void parse_fields(const char* b, const char* e, std::vector<std::vector<double>>& out, std::size_t n, long line,
                    RowTime& rt) const {
    std::size_t col = 0;
    const char* p = b;
    const char* tb = nullptr;
    const char* te = nullptr;
    double t = 0;
    if (delim_ != 0) {
      for (;;) {
        const int s = col < ncols_ ? slot_[col] : -1;
        const char* q = nullptr;  // end of this field
        if (s != -1 && !decimal_comma_) {
          // fast path: the number, then the delimiter or the end of the line
          double v;
          const char* r = parse_decimal_fast(p, e, v);
          if (r && (r == e || *r == delim_)) {
            q = r;
            if (s >= 0) out[static_cast<std::size_t>(s)][n] = v;
            else t = v, tb = p, te = q;
          }
        }
        if (!q) {
          q = static_cast<const char*>(std::memchr(p, delim_, static_cast<std::size_t>(e - p)));
          if (!q) q = e;
          if (col < ncols_) {
            if (s >= 0) out[static_cast<std::size_t>(s)][n] = parse_number(p, q, col, line);
            else if (s == kTimeSlot) t = parse_number(p, q, col, line), tb = p, te = q;
          } else if (col == ncols_ && q == e && trim(std::string_view(p, static_cast<std::size_t>(q - p))).empty()) {
            break;  // trailing delimiter
          }
        }
        ++col;
        if (q == e) break;
        p = q + 1;
      }
    } else {
      for (;;) {
        while (p < e && is_space(*p)) ++p;
        if (p == e) break;
        const char* q = p;
        while (q < e && !is_space(*q)) ++q;
        if (col < ncols_) {
          const int s = slot_[col];
          if (s >= 0) out[static_cast<std::size_t>(s)][n] = parse_number(p, q, col, line);
          else if (s == kTimeSlot) t = parse_number(p, q, col, line), tb = p, te = q;
        }
        ++col;
        p = q;
      }
    }
    if (col != ncols_)
      throw InputError(where(info_.path, line) + std::to_string(col) + " fields; expected " +
                       std::to_string(ncols_) + " as in the header on line " + std::to_string(header_line_));
    if (tb) rt = {t, tb, te};
  }

  ReadOptions opts_;
  int fd_ = -1;
  // Text buffer: bytes are only read where read() has written them, so it is
  // left uninitialised (zeroing 2 MiB costs page faults for nothing on small files).
  struct TextBuffer {
    std::unique_ptr<char[]> bytes;
    std::size_t n = 0;
    void resize(std::size_t k) { bytes.reset(new char[k]), n = k; }
    char* data() { return bytes.get(); }
    std::size_t size() const { return n; }
  } buf_;
  std::size_t pos_ = 0, end_ = 0;
  bool eof_ = false;
  long line_no_ = 0;
  long header_line_ = 0;
  char delim_ = ',';
  bool decimal_comma_ = false;
  std::size_t ncols_ = 0;
  std::vector<int> slot_;
  std::string pending_;
  long pending_line_ = 0;
  double comment_rate_ = 0;
  // time column
  bool use_time_ = false;
  double time_scale_ = 1.0;
  double t_first_ = 0, t_last_ = 0, dt_nominal_ = 0;
  std::array<char, 48> prev_text_{};  // previous time stamp as printed
  std::size_t prev_len_ = 0;
  std::size_t time_rows_ = 0;  // rows whose time stamp has been checked
  std::vector<Piece> pieces_;  // the parsed chunk: npieces_ pieces, delivered from cur_piece_, cur_row_
  std::size_t npieces_ = 0, cur_piece_ = 0, cur_row_ = 0;
  std::unique_ptr<WorkPool> pool_;  // helper threads, started at the first chunk worth splitting
  std::size_t threads_ = 1;  // parse threads
  std::size_t chunk_ = kChunk;  // bytes parsed per step
  static constexpr std::size_t kNone = static_cast<std::size_t>(-1);
  std::size_t nul_ = kNone;  // index in buf_ of the first NUL byte read

  void detect_decimal_comma() {
    if (delim_ == ',') return;
    // look at the first data row in the buffer
    std::size_t p = pos_;
    while (p < end_) {
      const char* s = buf_.data() + p;
      const char* nl = static_cast<const char*>(std::memchr(s, '\n', end_ - p));
      const char* e = nl ? nl : buf_.data() + end_;
      const char* q = s;
      while (q < e && (is_space(*q) || *q == '\r')) ++q;
      if (q < e && *q != '#') {
        decimal_comma_ = std::memchr(s, ',', static_cast<std::size_t>(e - s)) != nullptr;
        return;
      }
      if (!nl) return;
      p = static_cast<std::size_t>(nl - buf_.data()) + 1;
    }
  }
};

}  // namespace

std::unique_ptr<RecordReader> open_csv(const std::string& path, const ReadOptions& opts) {
  return std::make_unique<CsvReader>(path, opts);
}

std::string unit_from_suffix(const std::string& name) {
  static const std::pair<const char*, const char*> kSuffix[] = {
      {"_v", "V"},       {"_mv", "mV"},    {"_a", "A"},     {"_ma", "mA"},  {"_rads", "rad/s"},
      {"_rad", "rad"},   {"_deg", "deg"},  {"_degs", "deg/s"}, {"_rpm", "rpm"}, {"_m", "m"},
      {"_mm", "mm"},     {"_um", "um"},    {"_mps", "m/s"}, {"_mps2", "m/s^2"}, {"_n", "N"},
      {"_nm", "N m"},    {"_hz", "Hz"},    {"_s", "s"},     {"_pct", "%"},  {"_w", "W"},
      {"_pa", "Pa"},     {"_bar", "bar"},  {"_degc", "degC"}, {"_g", "g"}};
  const std::string n = lower(name);
  for (const auto& [suf, unit] : kSuffix) {
    const std::size_t len = std::strlen(suf);
    if (n.size() > len && n.compare(n.size() - len, len, suf) == 0) return unit;
  }
  return "";
}

}  // namespace benchid::ident::detail
