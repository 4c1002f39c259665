// benchid fit FRF.csv [--order N|auto] [--delay auto|SECONDS] [--band LO:HI] [-o MODEL.json]
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <memory>
#include <numbers>
#include <stdexcept>

#include "cli/commands.h"
#include "cli/output.h"
#include "cli/parse.h"
#include "cli/stages.h"
#include "fit/discretize.h"
#include "fit/fit_frf.h"
#include "fit/model_json.h"
#include "ident/error.h"
#include "ident/frf_csv.h"
#include "ident/trusted.h"

namespace benchid::cli {

namespace {

struct FitCommand {
  FitArgs fit;
  std::string frf, out, discretize, domain = "s";
  double sample_time_s = 0, prewarp_hz = 0;
  bool json = false, quiet = false;
};


}  // namespace

fit::FitOptions fit_options(const FitArgs& a) {
  fit::FitOptions o;
  o.weighting = fit::parse_weighting(a.weighting);
  o.vf.integrators = a.integrators;
  o.vf.proper = !a.strictly_proper;
  if (a.strictly_proper && a.direct)
    throw InputError("--strictly-proper and --direct contradict each other; give one");
  o.auto_proper = !a.strictly_proper && !a.direct && !a.improper;
  o.vf.improper = a.improper;
  o.vf.allow_unstable = a.allow_unstable;
  o.vf.max_iterations = a.max_iterations;
  if (a.method != "vf" && a.method != "sk") throw InputError("--method '" + a.method + "' is unknown; expected vf or sk");
  o.polynomial = a.method == "sk";
  o.max_order = a.max_order;
  if (a.order == "auto") {
    o.auto_order = true;
  } else {
    const double n = parse_number(a.order, "--order");
    if (n != std::floor(n) || n < 1 || n > 200) throw InputError("--order " + a.order + ": expected a whole number 1..200 or auto");
    o.vf.order = static_cast<int>(n);
  }
  if (a.delay == "auto") {
    o.auto_delay = true;
  } else {
    o.vf.delay_s = parse_number(a.delay, "--delay");
  }
  if (!a.band.empty()) {
    const Band b = parse_band(a.band, "--band");
    o.band_given = true;
    o.band_lo_hz = b.lo_hz;
    o.band_hi_hz = b.hi_hz;
  }
  return o;
}

void require_converged(const fit::FrfFit& f) {
  if (!f.result.converged)
    throw NoResult("the fit did not converge in " + std::to_string(f.result.iterations) +
                   " iterations at order " +
                   std::to_string(f.result.model.order() - f.result.model.integrators) + "; " +
                   (f.alternative.empty()
                        ? "try a lower --order, a narrower --band or --weighting relative"
                        : f.alternative));
}

fit::FitSummary fit_record(const fit::FrfFit& f, const std::string& source) {
  fit::FitSummary fs;
  fs.order = static_cast<int>(f.result.model.order());
  fs.band_lo_hz = f.data.freq_hz.front();
  fs.band_hi_hz = f.data.freq_hz.back();
  fs.points = f.data.freq_hz.size();
  fs.left_out = f.left_out_unreliable + f.left_out_band;
  fs.weighting = fit::weighting_name(f.weighting);
  fs.nrmse = f.result.nrmse;
  fs.max_err_db = f.result.max_err_db;
  fs.max_err_deg = f.result.max_err_deg;
  fs.chi2 = f.result.chi2;
  fs.dof = f.result.dof;
  fs.iterations = f.result.iterations;
  fs.converged = f.result.converged;
  fs.source = source;
  return fs;
}

namespace {

void run_fit(const FitCommand& a) {
  check_output(a.out, OutputKind::model_json, {a.frf});
  if (!a.discretize.empty() && !(a.sample_time_s > 0))
    throw InputError("--discretize needs --sample-time SECONDS (the firmware's sample period)");
  const ident::Frf frf = ident::read_frf_csv(a.frf);
  fit::FitOptions o = fit_options(a.fit);
  if (a.domain != "s" && a.domain != "z") throw InputError("--domain '" + a.domain + "' is unknown; expected s or z");
  if (a.domain == "z") {
    if (!(a.sample_time_s > 0)) throw InputError("--domain z needs --sample-time SECONDS (the controller's sample period)");
    if (!a.discretize.empty()) throw InputError("--discretize makes a z model from an s fit; with --domain z the fit is already in z");
    o.vf.domain = fit::Domain::z;
    o.vf.sample_time_s = a.sample_time_s;
  }
  const fit::FrfFit f = [&] {
    try {
      return fit::fit_frf(frf, o);
    } catch (const InputError& e) {
      const std::string what = e.what();
      if (what.rfind(a.frf, 0) == 0) throw;
      throw InputError(where(a.frf) + what);  // what the FRF cannot support, naming it
    }
  }();
  const std::string summary = fit::fit_summary(f, a.frf);
  (a.json ? std::cerr : std::cout) << (a.quiet ? std::string() : summary + "\n");
  require_converged(f);
  const fit::FitSummary fs = fit_record(f, a.frf);
  fit::RationalModel out_model = f.result.model;
  std::ostream& say = a.json ? std::cerr : std::cout;
  if (!a.discretize.empty()) {
    fit::DiscretizeOptions d;
    d.method = fit::parse_discretization(a.discretize);
    d.sample_time_s = a.sample_time_s;
    d.prewarp_hz = a.prewarp_hz;
    const fit::Discretized z = fit::discretize(f.result.model, d);
    out_model = z.model;
    // how far the discrete model departs from the continuous one in the band
    double worst_db = 0, worst_deg = 0, at_db = 0, at_deg = 0;
    for (double fr : f.data.freq_hz) {
      if (fr >= 0.5 / d.sample_time_s) break;
      const std::complex<double> q = z.model.response(fr) / f.result.model.response(fr);
      const double db = std::fabs(20 * std::log10(std::abs(q))), deg = std::fabs(std::arg(q)) * 180 / std::numbers::pi;
      if (db > worst_db) worst_db = db, at_db = fr;
      if (deg > worst_deg) worst_deg = deg, at_deg = fr;
    }
    if (!a.quiet) {
      say << "  discrete (" << a.discretize << ", T = " << fmt_num(d.sample_time_s) << " s" << (d.prewarp_hz > 0 ? ", prewarped at " + fmt_num(d.prewarp_hz) + " Hz" : "")
          << "): differs from the continuous model by up to " << fmt_num(worst_db) << " dB (at " << fmt_num(at_db)
          << " Hz) and " << fmt_num(worst_deg) << " deg (at " << fmt_num(at_deg) << " Hz) in the band below Nyquist\n";
      if (z.delay_rounding_s != 0)
        say << "  the delay was rounded to whole samples by " << fmt_num(z.delay_rounding_s * 1e3) << " ms\n";
      const auto sos = fit::second_order_sections(z.model);
      const long delay_samples = std::lround(z.model.delay_s / d.sample_time_s);
      say << "  second-order sections, y = sections(u delayed by " << delay_samples
          << " samples); each (b0 + b1 z^-1 + b2 z^-2)/(1 + a1 z^-1 + a2 z^-2):\n";
      char b[200];
      for (const auto& sec : sos) {
        std::snprintf(b, sizeof b, "    b = [% .12e, % .12e, % .12e]  a = [1, % .12e, % .12e]\n", sec[0], sec[1], sec[2],
                      sec[4], sec[5]);
        say << b;
      }
    }
  }
  const std::string js = fit::model_json(out_model, &fs);
  if (!a.out.empty()) write_file_atomically(a.out, js);
  if (a.json) std::cout << js;
  if (!a.out.empty() && !a.quiet) (a.json ? std::cerr : std::cout) << "  wrote " << a.out << "\n";
}

}  // namespace

void add_fit_options(CLI::App* c, FitArgs& a, bool pipeline) {
  // a recording straight off the bench always carries some delay: `fit`,
  // `report` and `batch` all estimate it unless told
  (void)pipeline;
  a.delay = "auto";
  c->add_option("--order", a.order,
                "Poles to fit besides integrators: N (1..200), or auto: from the lowest "
                "converged order, a higher one only when its residual is at least 10 % lower, a "
                "new pole lies in the "
                "band, stays put over the next two orders, and the lines near it stood beyond the "
                "noise before; the "
                "sweep stops 4 orders past the choice (default auto)");
  c->add_option("--max-order", a.max_order, "Order sweep limit for --order auto (default 20)");
  c->add_option("--delay", a.delay,
                "Pure delay in s, or auto: a start from the phase slope over the top 30 % of the "
                "trusted lines, refined at the chosen order, and the order chosen again with it "
                "(default auto)");
  c->add_option("--band", a.band,
                "Fit only lines in LO:HI, Hz (default: the trusted band, " +
                    ident::trusted_band_rule() + ")");
  c->add_option("--integrators", a.integrators, "Poles fixed at the origin, e.g. 1 for voltage to position of a "
                "motor (default 0)");
  c->add_option("--weighting", a.weighting, "variance (1/standard error from the FRF's rel_err, floored at a tenth "
                "of the median), relative (1/|H|) or uniform (default variance)");
  c->add_flag("--strictly-proper", a.strictly_proper,
              "No direct term: the model falls off at high frequency "
              "(default: decided by the slope of |H| over the top fifth of the band, a direct term "
              "only where it "
              "is flat, above -6 dB/decade)");
  c->add_flag("--direct", a.direct, "Always fit a direct term d (relative degree 0) (default off: decided by the slope, see --strictly-proper)");
  c->add_flag("--improper", a.improper, "Allow a term proportional to s (rising response)");
  c->add_flag("--allow-unstable", a.allow_unstable, "Keep right-half-plane poles instead of reflecting them");
  c->add_option("--method", a.method, "vf (vector fitting) or sk (Sanathanan-Koerner iteration on the polynomial "
                "form: the classic method, ill-conditioned above about order 10; for comparison) (default vf)");
  c->add_option("--max-iterations", a.max_iterations, "Pole relocations before giving up (default 50)");
}

void add_fit_command(CLI::App& app) {
  auto a = std::make_shared<FitCommand>();
  CLI::App* c = app.add_subcommand(
      "fit", "Fit a rational model (poles, residues, delay) to an FRF CSV by vector fitting (Gustavsen & Semlyen "
             "1999, relaxed form of 2006); print poles and zeros as frequency and damping, and the fit quality.");
  c->add_option("frf", a->frf, "FRF CSV from 'benchid frf'")->required();
  c->add_option("-o,--out", a->out, "Model JSON to write (benchid.model/1)");
  add_force_flag(c);
  add_fit_options(c, a->fit, false);
  c->add_option("--domain", a->domain, "s (continuous, default) or z: fit a discrete-time model directly, for a plant "
                "measured through a digital controller (needs --sample-time)");
  c->add_option("--discretize", a->discretize, "Also make a discrete-time model for firmware: zoh (exact for a held "
                "input; fractional delays kept) or tustin (bilinear; delay rounded to whole samples); the JSON is "
                "then the z-domain model and the second-order sections are printed (default: none, continuous only)");
  c->add_option("--sample-time", a->sample_time_s, "Sample period of the discrete model, s (needed with --discretize or --domain z; no default)");
  c->add_option("--prewarp", a->prewarp_hz, "Tustin: frequency in Hz where the discrete response is exact (default: none)");
  c->add_flag("--json", a->json, "Print the model JSON on stdout (the summary goes to stderr)");
  c->add_flag("-q,--quiet", a->quiet, "No summary");
  c->callback([a] {
    try {
      run_fit(*a);
    } catch (const NoResult& e) {
      std::cerr << "benchid: error: " << a->frf << ": " << e.what() << "\n";
      std::exit(1);
    }
  });
}

}  // namespace benchid::cli
