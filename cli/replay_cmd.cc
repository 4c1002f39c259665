// benchid replay MODEL.json RECORD --input CH --output CH: run the recorded
// input through the model and say how well it explains the recorded output.
#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <memory>
#include <sstream>

#include "cli/commands.h"
#include "cli/output.h"
#include "cli/stages.h"
#include "fit/model_json.h"
#include "fit/replay.h"
#include "ident/error.h"
#include "ident/record.h"

namespace benchid::cli {

namespace {
// The input and output channels of a recording, block by block, for
// replay_stream (which may open it twice) and read_channel_pair. The rate,
// final at the end of a pass, is shared with whoever writes the time column
// (rate may be null).
class RecordSource final : public fit::ReplaySource {
 public:
  RecordSource(const std::string& record, const std::string& input, const std::string& output,
               const ident::ReadOptions& ro, std::shared_ptr<double> rate = nullptr)
      : reader_(ident::open_record(record, ro)), rate_(std::move(rate)) {
    const std::size_t iu = reader_->channel_index(input), iy = reader_->channel_index(output);
    if (iu == iy) throw InputError(record + ": input and output are the same channel; expected two channels");
    reader_->select({iu, iy});
  }
  std::size_t next(std::vector<double>& u, std::vector<double>& y) override {
    const std::size_t n = reader_->read_block(1 << 16, block_);
    if (n == 0) {
      if (rate_) *rate_ = reader_->rate_hz();
      return 0;
    }
    std::swap(u, block_[0]);
    std::swap(y, block_[1]);
    return n;
  }
  double rate_hz() const override { return reader_->rate_hz(); }

 private:
  std::unique_ptr<ident::RecordReader> reader_;
  std::vector<std::vector<double>> block_;
  std::shared_ptr<double> rate_;
};

}  // namespace

ChannelPair read_channel_pair(const std::string& record, const std::string& input, const std::string& output,
                              const ident::ReadOptions& ro) {
  RecordSource src(record, input, output, ro);
  ChannelPair p;
  std::vector<double> u, y;
  while (std::size_t n = src.next(u, y)) {
    p.u.insert(p.u.end(), u.begin(), u.begin() + static_cast<long>(n));
    p.y.insert(p.y.end(), y.begin(), y.begin() + static_cast<long>(n));
  }
  p.rate_hz = src.rate_hz();
  return p;
}

namespace {

struct ReplayArgs {
  std::string model, record, input, output, out;
  double rate_hz = 0;
  std::size_t lags = fit::ReplayOptions{}.lags;
  double practical = fit::ReplayOptions{}.practical;
  bool strict = false;
  std::string hold = "measured";
  double split = 0;
  std::size_t stream_above = fit::StreamReplayOptions{}.in_memory_limit;
};

void run_replay(const ReplayArgs& a) {
  check_output(a.out, OutputKind::replay_csv, {a.model, a.record});
  const fit::RationalModel m = fit::read_model_json(a.model);
  ident::ReadOptions ro;
  ro.rate_hz = a.rate_hz;
  fit::ReplayOptions o;
  if (a.lags < 1 || a.lags > 10000) throw InputError("--lags " + std::to_string(a.lags) + ": expected 1 to 10000");
  if (!(a.practical > 0 && a.practical < 1)) throw InputError("--practical " + fmt_num(a.practical) + ": expected a value in (0, 1)");
  o.lags = a.lags;
  o.holdout_fraction = a.split;
  if (a.hold != "measured" && a.hold != "zoh") throw InputError("--hold '" + a.hold + "' is unknown; expected measured or zoh");
  o.hold = a.hold == "zoh" ? fit::Hold::zoh : fit::Hold::as_measured;
  o.practical = a.practical;
  fit::StreamReplayOptions so;
  so.in_memory_limit = a.stream_above;
  auto rate = std::make_shared<double>(0.0);
  // The per-sample CSV is written as the record is replayed, to a temporary
  // file renamed into place only when the replay has succeeded.
  std::unique_ptr<PendingFile> pending;
  std::FILE* csv = nullptr;
  if (!a.out.empty() && a.out != "-") {
    pending = std::make_unique<PendingFile>(a.out);
    csv = std::fopen(pending->temp_path().c_str(), "w");
    if (!csv) throw InputError("cannot write '" + a.out + "'");
  } else if (a.out == "-") {
    csv = stdout;
  }
  struct Closer {
    std::FILE*& f;
    ~Closer() {
      if (f && f != stdout) std::fclose(f);
    }
  } closer{csv};
  if (csv)
    std::fprintf(csv, "# benchid replay of %s on %s; the verdict is the last line\ntime_s,measured,simulated,residual\n",
                 a.model.c_str(), a.record.c_str());
  fit::ReplaySink sink;
  if (csv)
    sink = [&](std::size_t first, const std::vector<double>& y, const std::vector<double>& ys) {
      for (std::size_t k = 0; k < y.size(); ++k)
        std::fprintf(csv, "%.10g,%.10g,%.10g,%.10g\n", static_cast<double>(first + k) / *rate, y[k], ys[k], y[k] - ys[k]);
    };
  const fit::ReplayResult r = fit::replay_stream(
      m, [&] { return std::make_unique<RecordSource>(a.record, a.input, a.output, ro, rate); }, o, so, sink);
  const std::size_t n = r.settle + r.samples;
  const double rt = *rate;
  if (csv) {
    std::fprintf(csv, "# verdict: %s\n", r.verdict.c_str());
    if (csv != stdout) {
      const bool ok = std::fflush(csv) == 0 && !std::ferror(csv);
      std::fclose(csv);
      csv = nullptr;
      if (!ok) throw InputError("cannot write '" + a.out + "' (disk full?)");
      pending->commit();
    }
  }
  std::ostream& info = a.out == "-" ? std::cerr : std::cout;
  info << "benchid replay: " << a.model << " on " << a.record << " (" << n << " samples at " << fmt_num(rt)
       << " Hz; " << (r.hold == fit::Hold::zoh ? "input held between samples" : "model response applied to the samples")
       << (r.streamed ? "; streamed in two passes" : "") << ")\n"
       << "  " << r.verdict << "\n";
  if (!r.note.empty()) info << "  note: " << r.note << "\n";
  info << "  left out: the first " << r.settle << " samples (" << fmt_num(static_cast<double>(r.settle) / rt)
       << (a.split > 0 ? " s: the part used for fitting, --split" : " s: the model starts at rest")
       << "); means removed from input and output\n"
       << "  residual independence, " << r.samples << " samples, lags 1.." << a.lags << " (whiteness) and -"
       << a.lags << ".." << a.lags << " (input): 99 % bounds " << fmt_num(r.whiteness.bound) << " and "
       << fmt_num(r.cross.bound) << "; a lag fails above max(bound, " << fmt_num(a.practical)
       << ") and a test allows 1 % of its lags (at least 1)\n"
       << "  match % = 100 (1 - ||y - y_model|| / ||y - mean y||); measurement noise and content outside the "
          "model's band lower it\n";
  if (!a.out.empty() && a.out != "-") info << "  wrote " << a.out << "\n";
  if (a.strict && !(r.whiteness.pass && r.cross.pass)) std::exit(3);
}

}  // namespace

void add_replay_command(CLI::App& app) {
  auto a = std::make_shared<ReplayArgs>();
  CLI::App* c = app.add_subcommand(
      "replay", "Run a recorded input through a model (its delay exact) and "
                "compare with the recorded output: match %, and the residual-independence tests (whiteness, "
                "cross-correlation with the input) with a length-aware verdict.");
  c->add_option("model", a->model, "Model JSON from 'benchid fit'")->required();
  c->add_option("record", a->record, "Recording (CSV or sound file), ideally not the one the model was fitted on")
      ->required();
  c->add_option("--input", a->input, "Input channel: name or 1-based number")->required();
  c->add_option("--output", a->output, "Output channel: name or 1-based number")->required();
  c->add_option("--rate", a->rate_hz, "Sampling rate in Hz when the log has no time column (default: from the time column or sound file)");
  c->add_option("--hold", a->hold, "measured: the model came from a measured FRF, which already holds the converters "
                "and hold, so its response is applied to the samples as they are; zoh: the model is a continuous "
                "plant fed by an input held between samples (default measured; models with integrators use zoh)");
  c->add_option("--lags", a->lags, "Lags of the correlation tests (default 25)");
  c->add_option("--practical", a->practical, "Correlations below this never fail a lag, so long records are not "
                "failed for negligible correlation (default 0.1)");
  c->add_option("-o,--out", a->out, "CSV of time, measured, simulated and residual output, written as the record is "
                "replayed ('-': stdout); the verdict is its last line");
  add_force_flag(c);
  c->add_option("--split", a->split, "Score only the last fraction F of the record: the part that 'frf --split F' "
                "left out of the estimate, so the model is validated on data it was not fitted to (default 0: all)");
  c->add_option("--stream-above", a->stream_above, "Records longer than this many samples are replayed in two "
                "streaming passes in bounded memory instead of being held whole (default 4194304, about 250 MB held)");
  c->add_flag("--strict", a->strict, "Exit status 3 when the residual-independence verdict fails");
  c->callback([a] { run_replay(*a); });
}

}  // namespace benchid::cli
