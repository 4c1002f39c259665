#include "ident/chain.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <numbers>

#include "ident/error.h"
#include "ident/trusted.h"

namespace benchid::ident {

void correct_chain(Frf& f, const ChainCorrection& c) {
  const double dlag_s = c.output_lag_s - c.input_lag_s;
  if (!std::isfinite(dlag_s)) throw InputError("lag: expected finite seconds");
  const double record_s = f.rate_hz > 0 ? static_cast<double>(f.samples) / f.rate_hz : 0;
  for (const auto& [lag, which] : {std::pair{c.input_lag_s, "input"}, std::pair{c.output_lag_s, "output"}})
    if (record_s > 0 && std::fabs(lag) >= record_s)
      throw InputError(std::string("--lag of the ") + which + " " + fmt_num(lag) + " s is not shorter than the record (" +
                       fmt_num(record_s) + " s); expected a lag of a few samples to a few segments");
  if (dlag_s != 0) {
    for (std::size_t k = 0; k < f.size(); ++k) {
      const std::complex<double> turn = std::polar(1.0, 2 * std::numbers::pi * f.freq_hz[k] * dlag_s);
      f.h[k] *= turn;
      if (k < f.guy.size()) f.guy[k] *= turn;
    }
    const double seg_s = f.rate_hz > 0 ? static_cast<double>(f.segment) / f.rate_hz : 0;
    if (seg_s > 0 && std::fabs(dlag_s) > seg_s / 8)
      f.warnings.push_back("the channels are shifted by " + fmt_num(dlag_s) + " s, more than 1/8 of a segment (" +
                           fmt_num(seg_s) + " s): the estimate is biased low and the coherence reads low; shift the "
                           "samples before recording, or use longer segments");
    if (c.input_lag_s != 0) f.corrections.push_back("input lag " + fmt_num(c.input_lag_s) + " s");
    if (c.output_lag_s != 0) f.corrections.push_back("output lag " + fmt_num(c.output_lag_s) + " s");
  }
  if (c.invert_input != c.invert_output) {
    for (auto& h : f.h) h = -h;
    for (auto& g : f.guy) g = -g;
  }
  if (c.invert_input) f.corrections.push_back("input polarity inverted");
  if (c.invert_output) f.corrections.push_back("output polarity inverted");

  if (!c.calibration) return;
  const Frf& cal = *c.calibration;
  const std::string name = c.calibration_name.empty() ? "the calibration FRF" : c.calibration_name;
  auto grid = [](const Frf& g) {
    return std::to_string(g.size()) + " lines from " + fmt_num(g.freq_hz.front()) + " to " + fmt_num(g.freq_hz.back()) + " Hz";
  };
  if (cal.size() != f.size())
    throw InputError(name + ": " + grid(cal) + ", but the measurement has " + grid(f) +
                     "; expected a loopback measured with the same rate, segment (or period) and band");
  for (std::size_t k = 0; k < f.size(); ++k)
    if (std::fabs(cal.freq_hz[k] - f.freq_hz[k]) > 1e-9 * std::max(1.0, f.freq_hz[k]))
      throw InputError(name + ": line " + std::to_string(k + 1) + " is at " + fmt_num(cal.freq_hz[k]) +
                       " Hz, the measurement's at " + fmt_num(f.freq_hz[k]) +
                       " Hz; expected a loopback measured with the same rate and segment (or period)");
  double peak = 0;
  for (const auto& h : cal.h) peak = std::max(peak, std::abs(h));
  std::size_t dead = 0, no_error = 0;
  for (std::size_t k = 0; k < f.size(); ++k) {
    const std::complex<double> hc = cal.h[k];
    if (!(std::abs(hc) > 1e-12 * peak)) {  // the chain passes nothing here: nothing to divide by
      ++dead;
      if (k < f.reliable.size()) f.reliable[k] = 0;
      if (k < f.rel_err.size()) f.rel_err[k] = std::numeric_limits<double>::quiet_NaN();
      continue;
    }
    f.h[k] /= hc;
    if (k < f.guy.size()) f.guy[k] /= hc;
    const double ec = k < cal.rel_err.size() ? cal.rel_err[k] : std::numeric_limits<double>::quiet_NaN();
    if (k < f.rel_err.size()) {
      if (std::isfinite(ec)) f.rel_err[k] = std::hypot(f.rel_err[k], ec);
      else ++no_error;
    }
    if (k < f.reliable.size() && k < cal.reliable.size() && !cal.reliable[k]) f.reliable[k] = 0;
    // the combined error is held to the same limit as a measured line's (trusted.h)
    if (k < f.reliable.size() && k < f.rel_err.size() && f.rel_err[k] > TrustOptions{}.max_rel_err)
      f.reliable[k] = 0;
  }
  f.corrections.push_back("calibrated by " + name);
  if (dead)
    f.warnings.push_back(std::to_string(dead) + " lines where the calibration response is zero are left uncorrected "
                         "and flagged unreliable");
  if (no_error)
    f.warnings.push_back(name + " gives no random error on " + std::to_string(no_error) +
                         " lines: their error is the measurement's alone");
}

}  // namespace benchid::ident
