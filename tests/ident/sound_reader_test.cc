// Sound-file recordings through libsndfile: rate and channels from the
// header, full-scale normalisation, calibration scale, clipping warnings and
// truncated files.
#include <gtest/gtest.h>
#include <sndfile.h>

#include <cmath>
#include <filesystem>

#include "ident/error.h"
#include "ident/record.h"
#include "tests/support/temp_dir.h"

using namespace benchid::ident;
using benchid::test::TempDir;

namespace {

// Writes a 2-channel 16-bit WAV: ch1 a 100 Hz sine at half scale, ch2 the
// same at 1.5x (clipped by libsndfile's float-to-int conversion).
std::string write_wav(const TempDir& d, const std::string& name, int frames, int rate = 8000) {
  SF_INFO info{};
  info.samplerate = rate;
  info.channels = 2;
  info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_16;
  const std::string p = d.file(name);
  SNDFILE* f = sf_open(p.c_str(), SFM_WRITE, &info);
  sf_command(f, SFC_SET_CLIPPING, nullptr, SF_TRUE);
  std::vector<double> buf(static_cast<std::size_t>(frames) * 2);
  for (int i = 0; i < frames; ++i) {
    const double s = std::sin(2 * M_PI * 100.0 * i / rate);
    buf[2 * static_cast<std::size_t>(i)] = 0.5 * s;
    buf[2 * static_cast<std::size_t>(i) + 1] = 1.5 * s;
  }
  sf_writef_double(f, buf.data(), frames);
  sf_close(f);
  return p;
}

TEST(SoundReader, ReadsRateChannelsAndFullScaleValues) {
  TempDir d;
  const Record r = read_record(write_wav(d, "a.wav", 8000));
  EXPECT_DOUBLE_EQ(r.rate_hz, 8000.0);
  ASSERT_EQ(r.channels.size(), 2u);
  EXPECT_EQ(r.channels[0].name, "ch1");
  EXPECT_EQ(r.channels[0].unit, "FS");
  ASSERT_EQ(r.samples[0].size(), 8000u);
  // 16-bit quantisation: half an LSB = 1/65536
  EXPECT_NEAR(r.samples[0][20], 0.5 * std::sin(2 * M_PI * 100.0 * 20 / 8000), 1.0 / 65536 + 1e-12);
}

TEST(SoundReader, ScaleTurnsFullScaleIntoUnits) {
  TempDir d;
  auto rd = open_record(write_wav(d, "b.wav", 800));
  rd->set_scale(0, 12.5);  // e.g. a 12.5 A per full scale current probe
  rd->select({0});
  std::vector<std::vector<double>> blk;
  rd->read_block(800, blk);
  EXPECT_NEAR(blk[0][20], 12.5 * 0.5 * std::sin(2 * M_PI * 100.0 * 20 / 8000), 12.5 / 65536 + 1e-12);
}

TEST(SoundReader, WarnsOfClippedSamplesWithCountAndFirstTime) {
  TempDir d;
  auto rd = open_record(write_wav(d, "c.wav", 8000));
  rd->select({0, 1});
  std::vector<std::vector<double>> blk;
  while (rd->read_block(1000, blk) > 0) {
  }
  ASSERT_EQ(rd->warnings().size(), 1u);  // only channel 2 clips
  const std::string w = rd->warnings()[0];
  EXPECT_NE(w.find("channel 2"), std::string::npos) << w;
  EXPECT_NE(w.find("samples at full scale"), std::string::npos) << w;
  // 1.5 sin exceeds 1 where |sin| > 2/3: first at asin(2/3)/(2 pi 100) = 1.16 ms, sample 10
  EXPECT_NE(w.find("the first at 0.00125"), std::string::npos) << w;
}

TEST(SoundReader, RefusesTruncatedFile) {
  TempDir d;
  const std::string p = write_wav(d, "d.wav", 8000);
  std::filesystem::resize_file(p, std::filesystem::file_size(p) / 2);
  try {
    read_record(p);
    FAIL() << "no error";
  } catch (const benchid::InputError& e) {
    EXPECT_NE(std::string(e.what()).find("truncated"), std::string::npos) << e.what();
  }
}

TEST(SoundReader, ReadsOddLengthDataChunkAndRefusesTruncatedFlac) {
  // a mono 24-bit WAV of an odd number of frames has an odd-length data chunk,
  // which libsndfile notes in its log; it is a complete file
  TempDir d;
  SF_INFO info{};
  info.samplerate = 1000;
  info.channels = 1;
  info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_24;
  SNDFILE* f = sf_open(d.file("odd.wav").c_str(), SFM_WRITE, &info);
  std::vector<double> x(1001, 0.25);
  sf_writef_double(f, x.data(), 1001);
  sf_close(f);
  EXPECT_EQ(read_record(d.file("odd.wav")).samples[0].size(), 1001u);
  info.format = SF_FORMAT_FLAC | SF_FORMAT_PCM_16;
  std::vector<double> y(20000);
  for (std::size_t i = 0; i < y.size(); ++i) y[i] = 0.5 * std::sin(0.37 * static_cast<double>(i * i % 1000));
  f = sf_open(d.file("cut.flac").c_str(), SFM_WRITE, &info);
  sf_writef_double(f, y.data(), 20000);
  sf_close(f);
  std::filesystem::resize_file(d.file("cut.flac"), std::filesystem::file_size(d.file("cut.flac")) / 2);
  try {
    read_record(d.file("cut.flac"));
    FAIL() << "no error";
  } catch (const benchid::InputError& e) {
    EXPECT_NE(std::string(e.what()).find("truncated"), std::string::npos) << e.what();
  }
}

// Found by the scaling benchmark: libsndfile's FLAC encoder stops at a
// sample beyond full scale (unless clipping is on) and leaves a header with
// no length and no frames. Its "length" then reads as the largest count; the
// reader must say that nothing could be decoded, not quote that count.
TEST(SoundReader, RefusesFlacWithoutLengthOrFramesPlainly) {
  TempDir d;
  SF_INFO info{};
  info.samplerate = 10000;
  info.channels = 2;
  info.format = SF_FORMAT_FLAC | SF_FORMAT_PCM_24;
  SNDFILE* f = sf_open(d.file("empty.flac").c_str(), SFM_WRITE, &info);
  ASSERT_NE(f, nullptr);
  std::vector<double> x(2 * 5000, 1.5);  // beyond full scale
  sf_writef_double(f, x.data(), 5000);
  sf_close(f);
  try {
    read_record(d.file("empty.flac"));
    FAIL() << "no error";
  } catch (const benchid::InputError& e) {
    const std::string m = e.what();
    EXPECT_NE(m.find("no audio frames could be decoded"), std::string::npos) << m;
    EXPECT_EQ(m.find("9223372036854775807"), std::string::npos) << m;
  }
}

TEST(SoundReader, RefusesFileWithLyingHeader) {
  TempDir d;
  const auto p = d.write("e.wav", std::string("RIFF\x24\x00\x00\x00WAVEjunkjunkjunk", 24));
  EXPECT_THROW(read_record(p), benchid::InputError);
}

}  // namespace
