// benchid compare FRF.csv --against REF.csv [REF.csv ...] [-o COMPARE.csv] [--strict]
//
// An FRF against a reference FRF (difference), or against the band of
// several good units (golden-unit envelope): the lines outside the band by
// more than the tolerance plus the FRF's own random error (ident/compare.h).
// Exit status 3 with --strict when a line is outside.
#include <cstdio>
#include <iostream>
#include <memory>
#include <sstream>

#include "cli/commands.h"
#include "cli/output.h"
#include "ident/compare.h"
#include "ident/error.h"
#include "ident/frf_csv.h"

namespace benchid::cli {

namespace {

struct CompareArgs {
  std::string frf, out;
  std::vector<std::string> against;
  ident::CompareOptions opts;
  bool strict = false;
  std::size_t show = 20;
};

void run_compare(const CompareArgs& a) {
  std::vector<std::string> inputs{a.frf};
  inputs.insert(inputs.end(), a.against.begin(), a.against.end());
  check_output(a.out, OutputKind::compare_csv, inputs);
  const ident::Frf frf = ident::read_frf_csv(a.frf);
  std::vector<ident::Frf> refs;
  for (const auto& p : a.against) refs.push_back(ident::read_frf_csv(p));
  std::vector<const ident::Frf*> ptrs;
  for (const auto& r : refs) ptrs.push_back(&r);
  const ident::CompareResult r = ident::compare_frf(frf, ptrs, a.against, a.opts);

  std::ostringstream t;
  t << "benchid compare: " << a.frf << " against "
    << (refs.size() == 1 ? "the reference " + a.against[0]
                         : "the band of " + std::to_string(refs.size()) + " good units");
  if (refs.size() > 1)
    for (std::size_t i = 0; i < a.against.size(); ++i) t << (i ? ", " : " (") << a.against[i];
  t << (refs.size() > 1 ? ")\n" : "\n");
  t << "  allowed beyond the band: " << fmt_num(a.opts.tolerance_db) << " dB and " << fmt_num(a.opts.tolerance_deg)
    << " deg, plus " << fmt_num(a.opts.sigmas) << " x the FRF's random error\n";
  t << "  " << r.lines.size() << " lines compared (" << r.unreliable << " unreliable left out, " << r.not_covered
    << " where no reference has trusted lines)\n";
  if (r.outside == 0) {
    t << "  every line inside the band\n";
  } else {
    double lo = 0, hi = 0, worst = -1;
    const ident::CompareLine* w = nullptr;
    for (const auto& c : r.lines) {
      if (!c.outside) continue;
      if (!w) lo = c.freq_hz;
      hi = c.freq_hz;
      const double score = std::max(c.excess_db / std::max(a.opts.tolerance_db, 1e-9),
                                    c.excess_deg / std::max(a.opts.tolerance_deg, 1e-9));
      if (score > worst) worst = score, w = &c;
    }
    t << "  " << r.outside << " lines outside, from " << fmt_num(lo) << " to " << fmt_num(hi) << " Hz; the worst at "
      << fmt_num(w->freq_hz) << " Hz: " << fmt_num(w->mag_db) << " dB against " << fmt_num(w->lo_db) << " to "
      << fmt_num(w->hi_db) << " dB, " << fmt_num(w->phase_deg) << " deg against " << fmt_num(w->lo_deg) << " to "
      << fmt_num(w->hi_deg) << " deg\n";
    t << "     freq Hz     mag dB        band dB         phase deg      band deg\n";
    std::size_t shown = 0;
    for (const auto& c : r.lines) {
      if (!c.outside || shown >= a.show) continue;
      ++shown;
      char row[200];
      std::snprintf(row, sizeof row, "  %10.5g  %9.4g  %7.4g to %-7.4g  %9.4g  %7.4g to %-7.4g\n", c.freq_hz, c.mag_db,
                    c.lo_db, c.hi_db, c.phase_deg, c.lo_deg, c.hi_deg);
      t << row;
    }
    if (r.outside > shown) t << "  ... " << r.outside - shown << " more (all of them in -o)\n";
  }
  t << "  verdict: " << (r.outside == 0 ? "pass" : "FAIL") << "\n";
  std::cout << t.str();
  if (!a.out.empty()) {
    std::ostringstream csv;
    csv << "# benchid compare 1\n# frf=" << a.frf << "\n";
    for (const auto& p : a.against) csv << "# against=" << p << "\n";
    csv << "freq_hz,mag_db,lo_db,hi_db,phase_deg,lo_deg,hi_deg,excess_db,excess_deg,outside\n";
    for (const auto& c : r.lines) {
      char row[320];
      std::snprintf(row, sizeof row, "%.10g,%.6g,%.6g,%.6g,%.6g,%.6g,%.6g,%.4g,%.4g,%d\n", c.freq_hz, c.mag_db, c.lo_db,
                    c.hi_db, c.phase_deg, c.lo_deg, c.hi_deg, c.excess_db, c.excess_deg, c.outside ? 1 : 0);
      csv << row;
    }
    write_file_atomically(a.out, csv.str());
  }
  if (a.strict && r.outside > 0) std::exit(3);
}

}  // namespace

void add_compare_command(CLI::App& app) {
  auto a = std::make_shared<CompareArgs>();
  CLI::App* c = app.add_subcommand(
      "compare", "An FRF against a reference FRF, or against the band of several good units (a golden-unit envelope): "
                 "the lines outside it by more than the tolerance plus the FRF's own random error.");
  c->add_option("frf", a->frf, "FRF CSV to judge")->required();
  c->add_option("--against", a->against, "Reference FRF CSV, or several good units' FRFs (their band)")->required();
  c->add_option("--tolerance-db", a->opts.tolerance_db, "Allowed beyond the band, dB (default 1)");
  c->add_option("--tolerance-deg", a->opts.tolerance_deg, "Allowed beyond the band, deg (default 10)");
  c->add_option("--sigmas", a->opts.sigmas, "Times the FRF's own random error also allowed (default 3)");
  c->add_option("--show", a->show, "Lines outside listed in the table (default 20; all are in -o)");
  c->add_option("-o,--out", a->out, "CSV of every line compared: the FRF, the band, the excess and outside (0/1) (default: none)");
  add_force_flag(c);
  c->add_flag("--strict", a->strict, "Exit status 3 when a line is outside the band");
  c->callback([a] { run_compare(*a); });
}

}  // namespace benchid::cli
