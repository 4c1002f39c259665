// benchid stitch A.csv B.csv [...] -o FRF.csv
//
// FRFs of one system measured over different bands or by different methods
// become one FRF, line by line from the source with the lower random error
// (ident/stitch.h); the seams and the band each source gave are printed and
// kept in the FRF CSV's "# corrections=".
#include <iostream>
#include <memory>
#include <sstream>

#include "cli/commands.h"
#include "cli/output.h"
#include "ident/error.h"
#include "ident/frf_csv.h"
#include "ident/stitch.h"

namespace benchid::cli {

namespace {

struct StitchArgs {
  std::vector<std::string> inputs;
  std::string out;
  bool quiet = false;
};

void run_stitch(const StitchArgs& a) {
  check_output(a.out, OutputKind::frf_csv, a.inputs);
  std::vector<ident::Frf> frfs;
  frfs.reserve(a.inputs.size());
  for (const auto& p : a.inputs) frfs.push_back(ident::read_frf_csv(p));
  std::vector<ident::StitchSource> src;
  for (std::size_t i = 0; i < frfs.size(); ++i) src.push_back({&frfs[i], a.inputs[i]});
  const ident::StitchResult r = ident::stitch(src);
  std::ostringstream csv;
  ident::write_frf_csv(csv, r.frf);
  write_file_atomically(a.out.empty() ? "-" : a.out, csv.str());
  if (!a.quiet) {
    std::cerr << "benchid stitch: " << r.frf.size() << " lines\n";
    for (std::size_t i = 0; i < src.size(); ++i) std::cerr << "  " << src[i].name << ": " << r.lines_from[i] << " lines\n";
    for (double s : r.seams_hz) std::cerr << "  seam at " << fmt_num(s) << " Hz\n";
    for (const auto& w : r.frf.warnings) std::cerr << "benchid: warning: " << w << "\n";
    if (!a.out.empty() && a.out != "-") std::cerr << "  wrote " << a.out << "\n";
  }
}

}  // namespace

void add_stitch_command(CLI::App& app) {
  auto a = std::make_shared<StitchArgs>();
  CLI::App* c = app.add_subcommand(
      "stitch", "Join FRFs of one system measured over different bands or by different methods (random noise, "
                "stepped sine) into one FRF, line by line from the source with the lower random error; the seams are "
                "printed and kept in the FRF's metadata.");
  c->add_option("frf", a->inputs, "Two or more FRF CSVs from 'benchid frf' (same channels and units)")->required()->expected(2, -1);
  c->add_option("-o,--out", a->out, "FRF CSV to write (default: stdout)");
  add_force_flag(c);
  c->add_flag("-q,--quiet", a->quiet, "No summary on stderr");
  c->callback([a] { run_stitch(*a); });
}

}  // namespace benchid::cli
