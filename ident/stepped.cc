#include "ident/stepped.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "ident/error.h"
#include "ident/sine_fit.h"

namespace benchid::ident {

std::vector<Step> steps_from_list(const std::vector<double>& freqs_hz, double step_s, double settle_s, double rate_hz) {
  if (freqs_hz.empty()) throw InputError("no step frequencies; expected --step-freqs F1,F2,...");
  if (!(step_s > 0) || !(settle_s >= 0) || !(settle_s < step_s))
    throw InputError("step " + fmt_num(step_s) + " s, settle " + fmt_num(settle_s) +
                     " s: expected step > settle >= 0 seconds");
  std::vector<Step> steps;
  for (std::size_t i = 0; i < freqs_hz.size(); ++i) {
    Step s;
    s.freq_hz = freqs_hz[i];
    if (!(s.freq_hz > 0 && s.freq_hz < rate_hz / 2))
      throw InputError("step frequency " + fmt_num(s.freq_hz) + " Hz: expected 0 < f < Nyquist (" +
                       fmt_num(rate_hz / 2) + " Hz)");
    s.start = static_cast<std::size_t>(std::llround(static_cast<double>(i) * step_s * rate_hz));
    s.measure_start = s.start + static_cast<std::size_t>(std::llround(settle_s * rate_hz));
    s.end = static_cast<std::size_t>(std::llround(static_cast<double>(i + 1) * step_s * rate_hz));
    s.measure_samples = s.end - s.measure_start;
    steps.push_back(s);
  }
  return steps;
}

Frf estimate_stepped(RecordReader& reader, const FrfChannels& ch, const std::vector<Step>& steps_in,
                     double plan_rate_hz, const SteppedOptions& o) {
  const RecordInfo& info = reader.info();
  std::vector<std::size_t> sel{reader.channel_index(ch.input), reader.channel_index(ch.output)};
  if (sel[0] == sel[1])
    throw InputError(where(info.path) + "input and output are the same channel '" + info.channels[sel[0]].name +
                     "'; expected two different channels");
  reader.select(sel);
  if (!std::isfinite(o.offset_s))
    throw InputError("plan offset " + fmt_num(o.offset_s) + " s: expected a finite time");
  const double rate0 = reader.rate_hz();
  if (rate0 > 0 && std::fabs(rate0 - plan_rate_hz) > 1e-6 * plan_rate_hz)
    throw InputError(where(info.path) + "recorded at " + fmt_num(rate0) + " Hz but the plan is for " +
                     fmt_num(plan_rate_hz) + " Hz; expected the same rate");
  const long long shift = std::llround(o.offset_s * plan_rate_hz);
  // windows in record samples, in band
  struct Span {
    const Step* step;
    long long begin, end;
  };
  std::vector<Span> win;
  std::size_t skipped_band = 0, before_start = 0;
  for (const Step& s : steps_in) {
    if ((o.band_lo_hz > 0 && s.freq_hz < o.band_lo_hz) || (o.band_hi_hz > 0 && s.freq_hz > o.band_hi_hz)) {
      ++skipped_band;
      continue;
    }
    const long long b = static_cast<long long>(s.measure_start) + shift;
    if (b < 0) {
      ++before_start;
      continue;
    }
    win.push_back({&s, b, b + static_cast<long long>(s.measure_samples)});
  }
  if (win.empty())
    throw InputError("no step to measure (" + std::to_string(skipped_band) + " outside the band, " +
                     std::to_string(before_start) + " before the record starts); expected steps within the record");

  Frf f;
  f.estimator = Estimator::stepped;
  f.window = Window::rect;
  f.detrend = Detrend::none;
  f.averages = 1;
  f.effective_averages = 0;
  f.coherence_bound = 0;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  std::vector<double> bu, by;
  std::vector<std::vector<double>> block;
  long long pos = 0;  // record index of block[0][0]
  std::size_t w = 0, weak_input = 0;
  std::string weak_example;
  while (w < win.size()) {
    const std::size_t n = reader.read_block(o.block_frames, block);
    if (n == 0) break;
    const long long end = pos + static_cast<long long>(n);
    while (w < win.size()) {
      const Span& cw = win[w];
      const long long from = std::max(cw.begin, pos), to = std::min(cw.end, end);
      if (from < to) {
        bu.insert(bu.end(), block[0].begin() + (from - pos), block[0].begin() + (to - pos));
        by.insert(by.end(), block[1].begin() + (from - pos), block[1].begin() + (to - pos));
      }
      if (cw.end > end) break;  // window continues in the next block
      // window complete: fit
      const double rate = plan_rate_hz;
      const double t0 = static_cast<double>(cw.begin) / rate;
      const std::size_t m = bu.size();
      SineFit fu = o.refine_frequency ? fit_sine4(bu.data(), m, cw.step->freq_hz, rate, t0)
                                      : fit_sine3(bu.data(), m, cw.step->freq_hz, rate, t0);
      SineFit fy = fit_sine3(by.data(), m, fu.freq_hz, rate, t0);
      const double pu = fu.amplitude * fu.amplitude / 2, py = fy.amplitude * fy.amplitude / 2;
      const double ru2 = fu.residual_rms * fu.residual_rms, ry2 = fy.residual_rms * fy.residual_rms;
      if (!(pu > 0))
        throw InputError(where(info.path) + "channel '" + info.channels[sel[0]].name + "' has no energy at step " +
                         fmt_num(cw.step->freq_hz) + " Hz; expected the stepped sine on the input");
      if (pu < ru2) {  // under half the input power in the fundamental
        if (weak_input++ == 0) weak_example = fmt_num(cw.step->freq_hz);
      }
      const std::complex<double> h = std::polar(fy.amplitude / fu.amplitude, fy.phase_rad - fu.phase_rad);
      const double nm = static_cast<double>(m);
      const double err = std::sqrt(2.0 / nm) * std::sqrt(ru2 / (2 * pu) + ry2 / (2 * py));
      f.freq_hz.push_back(fu.freq_hz);
      f.h.push_back(h);
      f.coherence.push_back(pu / (pu + ru2) * (py > 0 ? py / (py + ry2) : 0.0));
      f.rel_err.push_back(py > 0 ? err : nan);
      f.distortion_pct.push_back(py > 0 ? 100.0 * std::sqrt(ry2 / py) : nan);
      f.guu.push_back(pu);
      f.gyy.push_back(py);
      f.guy.push_back(std::conj(std::polar(fu.amplitude, fu.phase_rad)) * std::polar(fy.amplitude, fy.phase_rad) / 2.0);
      f.reliable.push_back(py > 0 && err <= o.max_rel_err);
      bu.clear();
      by.clear();
      ++w;
    }
    pos = end;
  }
  // drain the reader so a CSV is checked to its end and the rate is final
  while (reader.read_block(o.block_frames, block) > 0) {
  }
  const double rate = reader.rate_hz();
  if (std::fabs(rate - plan_rate_hz) > 1e-6 * plan_rate_hz)
    throw InputError(where(info.path) + "recorded at " + fmt_num(rate) + " Hz but the plan is for " +
                     fmt_num(plan_rate_hz) + " Hz; expected the same rate");
  if (f.size() == 0)
    throw InputError(where(info.path) + "the record ends (" + std::to_string(reader.frames_read()) +
                     " samples) before the first step's measuring window ends; expected the whole stepped-sine "
                     "test (or a different --plan-offset)");
  f.rate_hz = rate;
  f.segment = 0;
  f.samples = reader.frames_read();
  f.source = info.path;
  f.input = info.channels[sel[0]].name;
  f.input_unit = info.channels[sel[0]].unit;
  f.output = info.channels[sel[1]].name;
  f.output_unit = info.channels[sel[1]].unit;
  if (w < win.size())
    f.warnings.push_back(std::to_string(win.size() - w) + " steps lie beyond the end of the record and were left out");
  if (weak_input > 0)
    f.warnings.push_back("at " + std::to_string(weak_input) + " steps (first at " + weak_example +
                         " Hz) less than half of the input's power is a sine at the planned frequency: check "
                         "--plan-offset and the input channel");
  if (skipped_band > 0) f.warnings.push_back(std::to_string(skipped_band) + " steps outside --band left out");
  // order by frequency (plans may step downwards)
  std::vector<std::size_t> idx(f.size());
  for (std::size_t i = 0; i < idx.size(); ++i) idx[i] = i;
  std::sort(idx.begin(), idx.end(), [&](std::size_t a, std::size_t b) { return f.freq_hz[a] < f.freq_hz[b]; });
  auto reorder = [&](auto& v) {
    auto c = v;
    for (std::size_t i = 0; i < idx.size(); ++i) v[i] = c[idx[i]];
  };
  reorder(f.freq_hz), reorder(f.h), reorder(f.coherence), reorder(f.rel_err), reorder(f.distortion_pct);
  reorder(f.guu), reorder(f.gyy), reorder(f.guy), reorder(f.reliable);
  for (const auto& wmsg : reader.warnings()) f.warnings.insert(f.warnings.begin(), wmsg);
  return f;
}

}  // namespace benchid::ident
