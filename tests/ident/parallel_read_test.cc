// Reading on several threads gives the same numbers as reading on one.
//
// The CSV reader splits each chunk of text into pieces parsed on separate
// threads, and `frf` reads blocks on a background thread while it computes
// spectra. Neither may change a single bit of the result, nor which error is
// reported first and on which line. These tests compare the threaded paths
// with the single-threaded one bit for bit, with chunks so small that a
// piece holds one or two rows and every seam between pieces, chunks and
// blocks is crossed many times.
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <random>
#include <sstream>

#include "ident/error.h"
#include "ident/frf.h"
#include "ident/record.h"
#include "tests/support/temp_dir.h"

using namespace benchid::ident;
using benchid::InputError;
using benchid::test::TempDir;

namespace {

struct Setting {
  std::size_t threads, chunk_bytes;
};
// One thread with the default chunk is the reference; the others split the
// text at every size from a row or two (64-byte pieces) to many rows.
const Setting kSettings[] = {{1, 4u << 20}, {2, 64}, {2, 1000}, {3, 333}, {4, 5000}, {8, 100000}, {2, 1u << 20}};

ReadOptions options(const Setting& s) {
  ReadOptions o;
  o.threads = s.threads;
  o.chunk_bytes = s.chunk_bytes;
  return o;
}

// A log as a DAQ writes it, with the things a parser must step over:
// comment and blank lines, CRLF and LF endings, exponents, a leading '+',
// numbers with 17 significant digits (outside the fast path), and values
// that round differently if parsed carelessly.
std::string make_log(std::size_t rows, unsigned seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> g(0.0, 1.0);
  std::ostringstream s;
  s << "# invented log for the reader tests\n# rate_hz=1000\ntime_s,drive [V],speed_rads,temp_degc\n";
  for (std::size_t i = 0; i < rows; ++i) {
    if (i % 97 == 13) s << "# marker " << i << "\n";
    if (i % 131 == 7) s << "\n";
    char t[32], a[40], b[40];
    std::snprintf(t, sizeof t, "%.3f", static_cast<double>(i) / 1000.0);
    const double u = g(rng), y = g(rng) * 1e-5;
    if (i % 5 == 0) std::snprintf(a, sizeof a, "%.17g", u);
    else if (i % 5 == 1) std::snprintf(a, sizeof a, "%+.6e", u);
    else std::snprintf(a, sizeof a, "%.9g", u);
    std::snprintf(b, sizeof b, "%.12g", y);
    s << t << "," << a << "," << b << "," << 20 + (i % 7) * 0.1 << (i % 3 == 0 ? "\r\n" : "\n");
  }
  return s.str();
}

bool same_bits(const std::vector<double>& a, const std::vector<double>& b) {
  return a.size() == b.size() && (a.empty() || std::memcmp(a.data(), b.data(), a.size() * sizeof(double)) == 0);
}

std::string error_of(const std::string& path, const ReadOptions& o) {
  try {
    read_record(path, o);
  } catch (const InputError& e) {
    return e.what();
  }
  return "(no error)";
}

TEST(ParallelRead, ValuesAndRateAreBitIdenticalForAnyThreadsAndChunk) {
  TempDir d;
  const auto p = d.write("log.csv", make_log(4000, 7));
  const Record ref = read_record(p, options(kSettings[0]));
  ASSERT_EQ(ref.samples.size(), 3u);
  ASSERT_EQ(ref.samples[0].size(), 4000u);
  for (const Setting& s : kSettings) {
    SCOPED_TRACE("threads " + std::to_string(s.threads) + ", chunk " + std::to_string(s.chunk_bytes));
    const Record r = read_record(p, options(s));
    ASSERT_EQ(r.samples.size(), ref.samples.size());
    for (std::size_t c = 0; c < r.samples.size(); ++c) EXPECT_TRUE(same_bits(r.samples[c], ref.samples[c]));
    EXPECT_EQ(std::memcmp(&r.rate_hz, &ref.rate_hz, sizeof(double)), 0);
  }
  // and the values are the ones printed (strtod as the outside reference)
  std::istringstream in(make_log(4000, 7));
  std::string line;
  std::size_t row = 0;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || line[0] == 't' || line == "\r") continue;
    const auto c1 = line.find(','), c2 = line.find(',', c1 + 1);
    ASSERT_EQ(ref.samples[0][row], std::strtod(line.c_str() + c1 + 1, nullptr)) << "row " << row;
    ASSERT_EQ(ref.samples[1][row], std::strtod(line.c_str() + c2 + 1, nullptr)) << "row " << row;
    ++row;
  }
  EXPECT_EQ(row, 4000u);
}

// Each defect sits on a known line, with a second defect of another kind
// further down; every setting must name the first one, with the same words.
TEST(ParallelRead, FirstErrorAndItsLineDoNotDependOnThreadsOrChunk) {
  struct Defect {
    const char* name;
    std::string bad_row;  // replaces data row 2500 (file line = 2500 + header lines + extras)
    const char* fragment;
  };
  const Defect defects[] = {
      {"text in a number", "2.500,1.0,abc,20", "value 'abc' is not a number"},
      {"ragged row", "2.500,1.0,2.0", "3 fields; expected 4"},
      {"time jump", "2.600,1.0,2.0,20", "time step"},
      {"time backwards", "2.400,1.0,2.0,20", "is not after the previous"},
      {"NUL byte", std::string("2.500,1.0,\0,20", 14), "NUL byte"},
      {"infinite value", "2.500,inf,2.0,20", "is not finite"},
      {"line over 1 MiB", "2.500,1.0,2.0,20" + std::string(1100000, ' '), "line longer than 1 MiB"},
  };
  for (const Defect& df : defects) {
    SCOPED_TRACE(df.name);
    std::ostringstream s;
    s << "# invented\ntime_s,u,y,temp\n";
    std::size_t line = 2, defect_line = 0;
    for (int i = 0; i < 4000; ++i) {
      if (i % 50 == 0) s << "# every fiftieth row a comment\n", ++line;
      ++line;
      if (i == 2500) {
        s << df.bad_row << "\n";
        defect_line = line;
      } else if (i == 3500) {
        s << "3.500,1.0,2.0,x\n";  // a later defect, never to be reported
      } else {
        s << i / 1000.0 << "," << std::sin(i * 0.1) << "," << std::cos(i * 0.1) << ",20\n";
      }
    }
    TempDir d;
    const auto p = d.write("bad.csv", s.str());
    const std::string ref = error_of(p, options(kSettings[0]));
    EXPECT_NE(ref.find(df.fragment), std::string::npos) << ref;
    EXPECT_NE(ref.find(":" + std::to_string(defect_line) + ": "), std::string::npos)
        << ref << " (expected line " << defect_line << ")";
    for (const Setting& st : kSettings) {
      SCOPED_TRACE("threads " + std::to_string(st.threads) + ", chunk " + std::to_string(st.chunk_bytes));
      EXPECT_EQ(error_of(p, options(st)), ref);
    }
  }
}

// The FRF is computed from the same blocks whether they are read ahead on a
// background thread or not: every number of the result is bit-identical.
TEST(ParallelRead, FrfIsBitIdenticalWithPrefetchAndParseThreads) {
  TempDir d;
  std::mt19937_64 rng(11);
  std::normal_distribution<double> g(0.0, 1.0);
  std::ostringstream s;
  s << "time_s,u,y\n";
  double y1 = 0, y2 = 0;
  for (int i = 0; i < 60000; ++i) {
    const double u = g(rng);
    const double y = 0.6 * u + 1.2 * y1 - 0.5 * y2;  // a resonant low-pass, invented
    y2 = y1, y1 = y;
    char row[96];
    std::snprintf(row, sizeof row, "%.5f,%.9g,%.9g\n", i / 2000.0, u, y + 0.01 * g(rng));
    s << row;
  }
  const auto p = d.write("rec.csv", s.str());
  auto run = [&](const Setting& st, bool prefetch, std::size_t block_frames) {
    auto reader = open_record(p, options(st));
    FrfOptions o;
    o.welch.segment = 1024;
    o.prefetch = prefetch;
    o.block_frames = block_frames;
    FrfChannels ch;
    ch.input = "u";
    ch.output = "y";
    return estimate_frf(*reader, ch, o);
  };
  const Frf ref = run(kSettings[0], false, 65536);
  ASSERT_GT(ref.size(), 500u);
  for (const Setting& st : kSettings)
    for (bool prefetch : {false, true})
      for (std::size_t block : {std::size_t{65536}, std::size_t{777}}) {
        SCOPED_TRACE("threads " + std::to_string(st.threads) + ", chunk " + std::to_string(st.chunk_bytes) +
                     ", prefetch " + std::to_string(prefetch) + ", block " + std::to_string(block));
        const Frf f = run(st, prefetch, block);
        ASSERT_EQ(f.size(), ref.size());
        EXPECT_EQ(std::memcmp(f.h.data(), ref.h.data(), f.size() * sizeof(f.h[0])), 0);
        EXPECT_TRUE(same_bits(f.coherence, ref.coherence));
        EXPECT_TRUE(same_bits(f.rel_err, ref.rel_err));
        EXPECT_EQ(std::memcmp(&f.rate_hz, &ref.rate_hz, sizeof(double)), 0);
        EXPECT_EQ(f.samples, ref.samples);
      }
}

// An error met by the background reader reaches the caller as the same
// error, after the blocks before it.
TEST(ParallelRead, PrefetcherDeliversBlocksThenTheReadersError) {
  TempDir d;
  std::ostringstream s;
  s << "time_s,u\n";
  for (int i = 0; i < 5000; ++i) s << i / 100.0 << "," << (i == 4321 ? "oops" : "1.5") << "\n";
  const auto p = d.write("e.csv", s.str());
  for (bool threaded : {false, true}) {
    auto reader = open_record(p, options({2, 200}));
    reader->select({reader->channel_index("u")});
    BlockPrefetcher pf(*reader, 1000, static_cast<std::size_t>(-1), threaded);
    std::vector<std::vector<double>> block;
    std::size_t frames = 0;
    std::string err;
    try {
      while (std::size_t n = pf.next(block)) frames += n;
    } catch (const InputError& e) {
      err = e.what();
    }
    EXPECT_EQ(frames, 4000u) << "threaded " << threaded;  // four whole blocks precede the bad row
    EXPECT_NE(err.find(":4323: "), std::string::npos) << err;
  }
}

// A consumer that stops early (its own error) leaves no thread behind:
// destroying the prefetcher mid-stream returns, and leaves the reader
// between two whole blocks, ready to be read on the caller's thread.
TEST(ParallelRead, PrefetcherStopsCleanlyWhenTheConsumerStopsEarly) {
  TempDir d;
  std::ostringstream s;
  s << "time_s,u\n";
  for (int i = 0; i < 20000; ++i) s << i / 100.0 << "," << i << "\n";
  const auto p = d.write("s.csv", s.str());
  auto reader = open_record(p, options({2, 1000}));
  reader->select({reader->channel_index("u")});
  std::vector<std::vector<double>> block;
  {
    BlockPrefetcher pf(*reader, 100, static_cast<std::size_t>(-1), true);
    ASSERT_EQ(pf.next(block), 100u);
    EXPECT_EQ(block[0][3], 3.0);
  }  // the destructor stops and joins the reading thread; a hang here fails by the test timeout
  ASSERT_EQ(reader->read_block(100, block), 100u);
  const double first = block[0][0];
  EXPECT_GE(first, 100.0);
  EXPECT_EQ(std::fmod(first, 100.0), 0.0);
  for (std::size_t j = 0; j < 100; ++j) EXPECT_EQ(block[0][j], first + static_cast<double>(j));
}

}  // namespace
