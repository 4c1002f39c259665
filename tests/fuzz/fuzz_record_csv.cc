// Fuzz target: a recording as benchid reads it (`frf`, `replay`, `report`).
// Properties besides "no crash, no leak, no undefined behaviour":
//  - every value delivered is finite, and when there are samples the rate is
//    finite and positive;
//  - the parallel reader (2 threads, 64-byte chunks, so many pieces) gives
//    the same values, rate and first error as one thread with 1 MiB chunks.
#include <cmath>
#include <string>

#include "ident/error.h"
#include "ident/record.h"
#include "tests/fuzz/fuzz_file.h"

using namespace benchid;

namespace {
struct Outcome {
  bool ok = false;
  std::string error;
  ident::Record rec;
};
Outcome read(const std::string& path, std::size_t threads, std::size_t chunk) {
  Outcome o;
  ident::ReadOptions opts;
  opts.threads = threads;
  opts.chunk_bytes = chunk;
  try {
    o.rec = ident::read_record(path, opts);
    o.ok = true;
  } catch (const InputError& e) {
    o.error = e.what();
  }
  return o;
}
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string path = fuzz::fuzz_file(data, size, ".csv");
  const Outcome a = read(path, 1, 1u << 20);
  const Outcome b = read(path, 2, 64);
  fuzz::require(a.ok == b.ok, "the same file read by one thread and by two: one succeeds, one fails");
  if (!a.ok) {
    fuzz::require(a.error == b.error, "one thread and two threads give different first errors");
    fuzz::require(!a.error.empty(), "an error without a message");
    return 0;
  }
  const bool empty = a.rec.samples.empty() || a.rec.samples[0].empty();
  fuzz::require(empty || (std::isfinite(a.rec.rate_hz) && a.rec.rate_hz > 0), "samples at a rate not finite and positive");
  fuzz::require(a.rec.rate_hz == b.rec.rate_hz, "rate depends on the thread count");
  fuzz::require(a.rec.samples == b.rec.samples, "values depend on the thread count");
  fuzz::require(a.rec.samples.size() == a.rec.channels.size(), "a channel without samples");
  for (const auto& ch : a.rec.samples) {
    fuzz::require(ch.size() == a.rec.samples[0].size(), "channels of different lengths");
    for (double v : ch) fuzz::require(std::isfinite(v), "a value that is not finite");
  }
  return 0;
}
