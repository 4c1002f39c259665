// The CSV log reader: layouts a DAQ or drive scope writes, and refusals with
// the line number and the value. Layout facts are common practice.
#include <gtest/gtest.h>

#include "ident/error.h"
#include "ident/record.h"
#include "tests/support/temp_dir.h"

using namespace benchid::ident;
using benchid::InputError;
using benchid::test::TempDir;

namespace {

std::string error_of(const std::string& path, const ReadOptions& o = {}) {
  try {
    read_record(path, o);
  } catch (const InputError& e) {
    return e.what();
  }
  return "(no error)";
}

#define EXPECT_HAS(text, fragment) EXPECT_NE((text).find(fragment), std::string::npos) << (text)

TEST(CsvReader, ReadsCommaHeaderWithUnitsAndTimeColumn) {
  TempDir d;
  const auto p = d.write("a.csv", "# bench log\ntime_s,drive [V],speed_rads\n0,1,2\n0.001,3,4\n0.002,5,6\n");
  const Record r = read_record(p);
  ASSERT_EQ(r.channels.size(), 2u);
  EXPECT_EQ(r.channels[0].name, "drive");
  EXPECT_EQ(r.channels[0].unit, "V");
  EXPECT_EQ(r.channels[1].name, "speed_rads");
  EXPECT_EQ(r.channels[1].unit, "rad/s");
  EXPECT_DOUBLE_EQ(r.rate_hz, 1000.0);
  EXPECT_EQ(r.samples[1], (std::vector<double>{2, 4, 6}));
}

TEST(CsvReader, DetectsSemicolonTabAndWhitespaceDelimiters) {
  TempDir d;
  for (const std::string sep : {";", "\t", "  "}) {
    SCOPED_TRACE("delimiter '" + sep + "'");
    const auto p = d.write("b.csv", "t" + sep + "u" + sep + "y\n0" + sep + "1" + sep + "2\n0.5" + sep + "3" + sep +
                                        "4\n1" + sep + "5" + sep + "6\n");
    const Record r = read_record(p);
    ASSERT_EQ(r.channels.size(), 2u);
    EXPECT_DOUBLE_EQ(r.rate_hz, 2.0);
    EXPECT_EQ(r.samples[0], (std::vector<double>{1, 3, 5}));
  }
}

TEST(CsvReader, AcceptsDecimalCommaWithSemicolons) {
  TempDir d;
  const auto p = d.write("c.csv", "time;u;y\r\n0;1,5;-2,25\r\n0,01;2,5;3\r\n");
  const Record r = read_record(p);
  EXPECT_DOUBLE_EQ(r.samples[0][0], 1.5);
  EXPECT_DOUBLE_EQ(r.samples[1][0], -2.25);
  EXPECT_DOUBLE_EQ(r.rate_hz, 100.0);
}

TEST(CsvReader, WhitespaceHeaderKeepsBracketedUnitWithItsName) {
  TempDir d;
  const auto p = d.write("d.txt", "time [ms]   current [A]  pos [mm]\n0 1 2\n0.5 3 4\n");
  const Record r = read_record(p);
  ASSERT_EQ(r.channels.size(), 2u);
  EXPECT_EQ(r.channels[0].name, "current");
  EXPECT_EQ(r.channels[1].unit, "mm");
  EXPECT_DOUBLE_EQ(r.rate_hz, 2000.0);  // 0.5 ms steps
}

TEST(CsvReader, HeaderlessFileNeedsRateAndNamesColumnsByNumber) {
  TempDir d;
  const auto p = d.write("e.csv", "1,2\n3,4\n");
  EXPECT_HAS(error_of(p), "no time column");
  ReadOptions o;
  o.rate_hz = 50;
  const Record r = read_record(p, o);
  EXPECT_EQ(r.channels[1].name, "2");
  EXPECT_EQ(r.samples[0], (std::vector<double>{1, 3}));
}

TEST(CsvReader, RateCommentIsUsedWithoutTimeColumn) {
  TempDir d;
  const Record r = read_record(d.write("f.csv", "# rate_hz=8000\nu,y\n1,2\n3,4\n"));
  EXPECT_DOUBLE_EQ(r.rate_hz, 8000.0);
}

TEST(CsvReader, TimeRoundedToPrintedDecimalsIsAccepted) {
  // 48 kHz printed with 6 decimals: steps of 20 or 21 us around 20.833 us
  // (a 4.8 % rounding step, inside the printed resolution)
  TempDir d;
  std::string s = "time,u,y\n";
  char b[64];
  for (int i = 0; i < 2000; ++i) {
    std::snprintf(b, sizeof b, "%.6f,%d,%d\n", i / 48000.0, i % 7, i % 5);
    s += b;
  }
  const Record r = read_record(d.write("g.csv", s));
  EXPECT_NEAR(r.rate_hz, 48000.0, 48000.0 * 1e-6 / (1999 / 48000.0));  // endpoint rounding
}

TEST(CsvReader, RefusesJitteryTimeNamingTheLine) {
  TempDir d;
  std::string s = "time,u,y\n";
  for (int i = 0; i < 100; ++i) s += std::to_string(i * 0.001 + (i == 60 ? 0.0003 : 0.0)) + ",1,2\n";
  const auto e = error_of(d.write("h.csv", s));
  EXPECT_HAS(e, "h.csv:62:");  // header is line 1, sample 60 is line 62
  EXPECT_HAS(e, "sampling must be uniform");
}

TEST(CsvReader, RefusesDecreasingOrRepeatedTime) {
  TempDir d;
  const auto e = error_of(d.write("i.csv", "t,u\n0,1\n0.1,2\n0.1,3\n"));
  EXPECT_HAS(e, "i.csv:4:");
  EXPECT_HAS(e, "expected strictly increasing time");
}

TEST(CsvReader, RefusesTextNanAndEmptyValuesNamingColumnAndLine) {
  TempDir d;
  EXPECT_HAS(error_of(d.write("j.csv", "t,u,y\n0,1,2\n1,abc,3\n")), "j.csv:3: column 'u' value 'abc' is not a number");
  EXPECT_HAS(error_of(d.write("k.csv", "t,u,y\n0,1,2\n1,nan,3\n")), "k.csv:3: column 'u' value 'nan' is not finite");
  EXPECT_HAS(error_of(d.write("l.csv", "t,u,y\n0,1,2\n1,inf,3\n")), "is not finite");
  EXPECT_HAS(error_of(d.write("m.csv", "t,u,y\n0,1,2\n1,,3\n")), "m.csv:3: column 'u' value '' is empty");
  EXPECT_HAS(error_of(d.write("n.csv", "t,u,y\n0,1,2\n1,1e999,3\n")), "out of the range of a double");
}

TEST(CsvReader, RefusesRaggedRows) {
  TempDir d;
  EXPECT_HAS(error_of(d.write("o.csv", "t,u,y\n0,1,2\n1,2\n")), "o.csv:3: 2 fields; expected 3 as in the header on line 1");
  EXPECT_HAS(error_of(d.write("p.csv", "t,u,y\n0,1,2,4\n")), "p.csv:2: 4 fields; expected 3");
}

TEST(CsvReader, RefusesEmptyHeaderOnlyBinaryAndUtf16Files) {
  TempDir d;
  EXPECT_HAS(error_of(d.write("q.csv", "")), "q.csv: the file is empty");
  EXPECT_HAS(error_of(d.write("r.csv", "# only a comment\n\n")), "no header or data rows");
  // header only reads as zero frames; the FRF stage refuses it (cli tests)
  EXPECT_EQ(read_record(d.write("s.csv", "t,u,y\n")).samples[0].size(), 0u);
  EXPECT_HAS(error_of(d.write("u.csv", std::string("\xFF\xFEt\0,\0", 6))), "UTF-16");
  EXPECT_HAS(error_of(d.write("v.bin", std::string("\x01\x02\x00\x05garbage", 11))), "not a readable sound file");
  EXPECT_HAS(error_of(d.file("missing.csv")), "cannot open");
}

TEST(CsvReader, RefusesDuplicateColumnNames) {
  TempDir d;
  EXPECT_HAS(error_of(d.write("w.csv", "t,u,u\n0,1,2\n")), "column name 'u' appears twice");
}

TEST(CsvReader, RefusesOverlongLine) {
  TempDir d;
  std::string s = "t,u\n0," + std::string(2u << 20, '1') + "\n";
  EXPECT_HAS(error_of(d.write("x.csv", s)), "line longer than 1 MiB");
}

TEST(CsvReader, ChannelsResolveByNameCaseOrNumberCountingTimeColumn) {
  TempDir d;
  auto r = open_record(d.write("y.csv", "time_s,Drive [V],speed\n0,1,2\n1,3,4\n"));
  EXPECT_EQ(r->channel_index("Drive"), 1u);
  EXPECT_EQ(r->channel_index("drive"), 1u);
  EXPECT_EQ(r->channel_index("Drive [V]"), 1u);
  EXPECT_EQ(r->channel_index("2"), 1u);  // DESIGN.md: numbers count the time column
  EXPECT_EQ(r->channel_index("3"), 2u);
  try {
    r->channel_index("torque");
    FAIL();
  } catch (const InputError& e) {
    EXPECT_HAS(std::string(e.what()), "no channel 'torque'; expected a name or number of 1=time_s, 2=Drive, 3=speed");
  }
  EXPECT_THROW(r->channel_index("4"), InputError);
  EXPECT_THROW(r->select({0}), InputError);  // the time column is not a data channel
}

TEST(CsvReader, StreamsInBlocksAcrossChunkBoundaries) {
  // more than one 4 MiB chunk, read in odd-sized blocks: every sample arrives once, in order
  TempDir d;
  std::string s = "time,u,y\n";
  const int n = 300000;
  char b[96];
  for (int i = 0; i < n; ++i) {
    std::snprintf(b, sizeof b, "%.7f,%d.25,%d\n", i * 1e-4, i, -i);
    s += b;
  }
  auto r = open_record(d.write("z.csv", s));
  EXPECT_EQ(r->count_frames(), static_cast<std::size_t>(n));
  r->select({1, 2});
  std::vector<std::vector<double>> blk;
  std::size_t got = 0;
  bool ordered = true;
  while (std::size_t k = r->read_block(12345, blk)) {
    for (std::size_t i = 0; i < k; ++i)
      ordered &= blk[0][i] == static_cast<double>(got + i) + 0.25 && blk[1][i] == -static_cast<double>(got + i);
    got += k;
  }
  EXPECT_EQ(got, static_cast<std::size_t>(n));
  EXPECT_TRUE(ordered);
  EXPECT_NEAR(r->rate_hz(), 10000.0, 1e-6);
}

}  // namespace
