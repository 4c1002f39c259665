#include "cli/text_report.h"

#include "ident/error.h"

#include <cmath>
#include <cstdio>
#include <ctime>
#include <numbers>
#include <set>
#include <sstream>

namespace benchid::cli {

const char* const kCaution =
    "CAUTION: a frequency response, and any model or margin derived from it, holds only within the\n"
    "measured band and where the coherence is high. Injecting excitation into a running machine can\n"
    "damage it or hurt people: limit the level, keep a way to stop, follow the machine's safety\n"
    "rules and defer to licensed practice. benchid recommends nothing it has not computed.\n";

std::string frf_text_report(const ident::Frf& f, const std::string& command_line, std::size_t rows) {
  std::ostringstream s;
  const std::time_t now = std::time(nullptr);
  char when[64];
  std::strftime(when, sizeof when, "%Y-%m-%d %H:%M UTC", std::gmtime(&now));
  s << "benchid frequency-response report\n=================================\n\n";
  s << "Recording  " << f.source << "\n";
  s << "Command    " << command_line << "\n";
  s << "Written    " << when << " by benchid 0.1.0\n\n";
  s << "Summary\n-------\n" << ident::summary(f) << "\n\n";
  s << "Error bars are one standard deviation of the random error (Bendat & Piersol), from "
    << fmt("%.4g", f.effective_averages) << " effective averages";
  if (f.estimator == ident::Estimator::periodic) s << " (period-to-period variance)";
  s << ". Lines marked '-' have coherence at or below the "
    << fmt("%.3g", f.confidence * 100) << " % zero-coherence bound " << fmt("%.3g", f.coherence_bound)
    << ": no evidence that output follows input there.\n\n";

  // log-spaced selection of lines
  std::set<std::size_t> pick;
  if (f.size() > 0) {
    const double lo = std::log(f.freq_hz.front()), hi = std::log(f.freq_hz.back());
    for (std::size_t r = 0; r < rows; ++r) {
      const double target = std::exp(lo + (hi - lo) * static_cast<double>(r) / static_cast<double>(rows - 1));
      std::size_t best = 0;
      for (std::size_t i = 0; i < f.size(); ++i)
        if (std::fabs(f.freq_hz[i] - target) < std::fabs(f.freq_hz[best] - target)) best = i;
      pick.insert(best);
    }
  }
  const auto mag = f.mag_db();
  const auto ph = f.phase_deg();
  std::string unit = f.output_unit.empty() ? std::string("out") : f.output_unit;
  unit += '/';
  unit += f.input_unit.empty() ? std::string("in") : f.input_unit;
  s << "Selected lines (the FRF CSV holds all " << f.size() << "); |H| in dB re 1 " << unit << "\n";
  s << "   freq_hz     mag_db    +-dB   phase_deg   +-deg  coherence  ok\n";
  for (std::size_t i : pick) {
    const double e = f.rel_err[i];
    s << fmt("%10.4g", f.freq_hz[i]) << fmt("%11.2f", mag[i]);
    s << (std::isfinite(e) ? fmt("%8.2f", 20 * std::log10(1 + e)) : std::string("       ?"));
    s << fmt("%12.1f", ph[i]);
    s << (std::isfinite(e) ? fmt("%8.1f", e * 180 / std::numbers::pi) : std::string("       ?"));
    s << (std::isfinite(f.coherence[i]) ? fmt("%11.3f", f.coherence[i]) : std::string("          ?"));
    s << (f.reliable[i] ? "   +" : "   -") << "\n";
  }
  s << "\nWarnings\n--------\n";
  if (f.warnings.empty()) s << "none\n";
  for (const auto& w : f.warnings) s << "- " << w << "\n";
  s << "\n" << kCaution;
  return s.str();
}

}  // namespace benchid::cli
