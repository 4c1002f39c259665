// benchid batch MANIFEST.csv -o RESULTS.jsonl [--jobs N] [--shard I/N] [--resume] [--limits FILE.json]
//
// Fleet mode for production test: one unit per manifest row goes through the
// pipeline (frf, fit in the trusted band, loop when a controller is given)
// and gets one JSON line with its key figures and pass/fail against limits.
// A unit that fails (bad file, no fit) gets a line with its error and the
// batch goes on. Lines are appended and flushed as units finish, so an
// interrupted run keeps what it did and --resume carries on from there; a
// run that completes rewrites the file in manifest order.
//
// Exit status: 0 every unit passed; 3 a unit failed its limits; 1 a unit
// could not be analysed; 2 bad usage or a bad manifest (nothing is run).
#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <map>
#include <memory>
#include <mutex>
#include <set>
#include <sstream>
#include <thread>

#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "cli/manifest.h"
#include "cli/output.h"
#include "cli/parse.h"
#include "cli/report.h"
#include "cli/stages.h"
#include "fit/model.h"
#include "ident/compare.h"
#include "ident/error.h"
#include "ident/frf_csv.h"
#include "ident/json_file.h"
#include "loop/controller.h"

namespace benchid::cli {

namespace fs = std::filesystem;
using ojson = nlohmann::ordered_json;

namespace {

struct BatchArgs {
  std::string manifest, out, shard, limits;
  unsigned jobs = 1;
  bool resume = false, quiet = false;
};

ojson number(double v) { return std::isfinite(v) ? ojson(v) : ojson(nullptr); }

// The pipeline on one unit; throws on bad input or no result.
// read_threads: threads reading each record (1 when units already run in parallel)
ojson analyse(const Unit& u, ojson& line, bool& pass, std::size_t read_threads) {
  const auto& c = u.cell;
  const auto get = [&](const std::string& k) {
    const auto it = c.find(k);
    return it == c.end() ? std::string() : it->second;
  };
  FrfArgs fa;
  fa.threads = read_threads;
  fa.record = get("record");
  fa.input = get("input");
  fa.output = get("output");
  fa.reference = get("reference");
  fa.excitation = get("excitation");
  if (!get("rate").empty()) fa.rate_hz = parse_number(get("rate"), "rate");
  FitArgs fit_args;
  fit_args.delay = "auto";
  if (!get("order").empty()) fit_args.order = get("order");
  if (!get("delay").empty()) fit_args.delay = get("delay");
  if (!get("band").empty()) fit_args.band = get("band");
  if (!get("integrators").empty()) fit_args.integrators = static_cast<int>(parse_number(get("integrators"), "integrators"));
  fit::FitOptions fo = fit_options(fit_args);
  fo.threads = static_cast<int>(read_threads);  // one thread per unit when units run in parallel
  const ident::Frf frf = compute_frf(fa);
  const fit::FrfFit ft = fit_pipeline(frf, fit_args, fo);
  const fit::RationalModel& m = ft.result.model;
  ojson fit;
  fit["order"] = m.order();
  fit["band_hz"] = {ft.data.freq_hz.front(), ft.data.freq_hz.back()};
  fit["nrmse"] = ft.result.nrmse;
  fit["max_err_db"] = ft.result.max_err_db;
  fit["max_err_deg"] = ft.result.max_err_deg;
  fit["delay_s"] = m.delay_s;
  line["fit"] = fit;
  line["dc_gain"] = number(m.dc_gain());
  ojson res = ojson::array();
  double first_res = std::numeric_limits<double>::quiet_NaN();
  std::vector<std::pair<double, double>> modes;
  for (const fit::cplx& p : m.zpk().poles) {
    const fit::cplx s = m.domain == fit::Domain::z ? std::log(p) / m.sample_time_s : p;
    if (s.imag() <= 0) continue;
    const fit::Mode md = fit::mode_of(s);
    // a resonance: a complex pair under critical damping/sqrt(2) that peaks in the fitted band
    if (md.damping < 0.7 && md.freq_hz >= ft.data.freq_hz.front() && md.freq_hz <= ft.data.freq_hz.back())
      modes.emplace_back(md.freq_hz, md.damping);
  }
  std::sort(modes.begin(), modes.end());
  for (const auto& [f, z] : modes) res.push_back({{"freq_hz", f}, {"damping", z}});
  if (!modes.empty()) first_res = modes.front().first;
  line["resonances"] = res;
  ojson checks = ojson::array();
  const auto check = [&](const std::string& name, double limit, double value, bool ok) {
    checks.push_back({{"name", name}, {"limit", limit}, {"value", number(value)}, {"pass", ok}});
    pass = pass && ok;
  };
  const auto lim = [&](const char* k, double& v) {
    const auto it = u.limit.find(k);
    if (it == u.limit.end()) return false;
    v = it->second;
    return true;
  };
  double v = 0;
  const double dc = m.dc_gain();
  if (lim("dc_gain_min", v)) check("dc_gain >=", v, dc, dc >= v);
  if (lim("dc_gain_max", v)) check("dc_gain <=", v, dc, dc <= v);
  if (lim("resonance_hz_min", v)) check("first resonance_hz >=", v, first_res, first_res >= v);
  if (lim("resonance_hz_max", v)) check("first resonance_hz <=", v, first_res, first_res <= v);
  if (lim("nrmse_max", v)) check("nrmse <=", v, ft.result.nrmse, ft.result.nrmse <= v);
  if (!get("envelope").empty()) {  // the good units' band as a limit
    std::vector<ident::Frf> good;
    std::vector<std::string> names;
    const std::string& cell = get("envelope");
    for (std::size_t from = 0; from <= cell.size();) {
      const std::size_t to = std::min(cell.find(';', from), cell.size());
      names.push_back(cell.substr(from, to - from));
      good.push_back(ident::read_frf_csv(names.back()));
      from = to + 1;
    }
    std::vector<const ident::Frf*> refs;
    for (const auto& g : good) refs.push_back(&g);
    const ident::CompareResult cr = ident::compare_frf(frf, refs, names);
    ojson env;
    env["units"] = names.size();
    env["lines_compared"] = cr.lines.size();
    env["lines_outside"] = cr.outside;
    ojson out_hz = ojson::array();
    for (const auto& l : cr.lines)
      if (l.outside && out_hz.size() < 50) out_hz.push_back(l.freq_hz);
    env["outside_hz"] = out_hz;  // the first 50
    line["envelope"] = env;
    const double most = u.limit.at("envelope_outside_max");
    check("lines outside envelope <=", most, static_cast<double>(cr.outside), static_cast<double>(cr.outside) <= most);
  }
  if (!get("controller").empty()) {
    LoopArgs la;
    la.controller = get("controller");
    la.pm_min = u.limit.at("pm_min");
    la.gm_min = u.limit.at("gm_min");
    la.ms_max_db = u.limit.at("ms_max_db");
    la.draws = 0;  // the batch reports the figures; spreads are for the single-unit report
    const LoopAnalysis a = analyse_loop(la, get("unit"), &m, nullptr, ft.data.freq_hz.front(), ft.data.freq_hz.back());
    ojson lp;
    lp["controller"] = la.controller;
    lp["phase_margin_deg"] = number(a.m.phase_margin_deg);
    lp["crossover_hz"] = number(a.m.crossover_hz);
    lp["gain_margin_db"] = number(a.m.gain_margin_db);
    lp["gain_margin_hz"] = number(a.m.gain_margin_hz);
    lp["delay_margin_s"] = number(a.m.delay_margin_s);
    lp["peak_sensitivity_db"] = number(20 * std::log10(a.m.ms));
    lp["bandwidth_hz"] = number(a.m.bandwidth_hz);
    lp["closed_loop_stable"] = a.st.judged ? ojson(a.st.stable) : ojson(nullptr);
    line["loop"] = lp;
    for (const auto& k : a.checks) check(k.name, k.threshold, k.value, k.pass);
    const bool stable = a.st.judged && a.st.stable;
    checks.push_back({{"name", "closed loop stable"}, {"limit", nullptr}, {"value", lp["closed_loop_stable"]}, {"pass", stable}});
    pass = pass && stable;
  }
  return checks;
}

ojson run_unit(const Unit& u, std::size_t read_threads) {
  ojson line;
  line["unit"] = u.cell.at("unit");
  line["record"] = u.cell.at("record");
  bool pass = true;
  try {
    ojson body;
    const ojson checks = analyse(u, body, pass, read_threads);
    line["status"] = pass ? "pass" : "fail";
    for (auto& [k, v] : body.items()) line[k] = v;
    line["checks"] = checks;
  } catch (const std::exception& e) {  // InputError, NoResult, and anything else a unit throws
    line["status"] = "error";
    line["error"] = e.what();
  }
  return line;
}

struct Shard {
  std::size_t index = 0, count = 1;
};

Shard parse_shard(const std::string& s) {
  Shard sh;
  const auto slash = s.find('/');
  if (slash == std::string::npos) throw InputError("--shard " + s + ": expected I/N, e.g. 0/4 (I from 0 to N-1)");
  const double i = parse_number(s.substr(0, slash), "--shard index"), n = parse_number(s.substr(slash + 1), "--shard count");
  if (n < 1 || n != std::floor(n) || i < 0 || i != std::floor(i) || i >= n)
    throw InputError("--shard " + s + ": expected I/N with whole numbers, N >= 1 and 0 <= I < N");
  sh.index = static_cast<std::size_t>(i);
  sh.count = static_cast<std::size_t>(n);
  return sh;
}

// Unit ids already in a results file (complete lines only) and those lines.
std::map<std::string, std::string> done_units(const std::string& path) {
  std::map<std::string, std::string> done;
  std::ifstream in(path, std::ios::binary);
  std::string all((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  std::size_t start = 0;
  while (true) {
    const std::size_t nl = all.find('\n', start);
    if (nl == std::string::npos) break;  // a last line without its newline was cut off: run that unit again
    const std::string line = all.substr(start, nl - start);
    start = nl + 1;
    try {
      const nlohmann::json j = nlohmann::json::parse(line);
      if (j.contains("unit") && j["unit"].is_string()) done[j["unit"].get<std::string>()] = line;
    } catch (const nlohmann::json::exception&) {
      throw InputError(path + ": a line is not JSON; expected a results file written by 'benchid batch'");
    }
  }
  return done;
}

int run_batch(const BatchArgs& a) {
  if (a.out.empty()) throw InputError("no results file; expected -o RESULTS.jsonl");
  if (a.jobs < 1 || a.jobs > 256) throw InputError("--jobs " + std::to_string(a.jobs) + ": expected 1 to 256");
  const Shard shard = a.shard.empty() ? Shard{} : parse_shard(a.shard);
  const std::vector<Unit> all = read_manifest(a.manifest, read_limits(a.limits));
  std::vector<std::string> inputs{a.manifest};
  if (!a.limits.empty()) inputs.push_back(a.limits);
  for (const Unit& u : all) inputs.push_back(u.cell.at("record"));
  check_output(a.out, OutputKind::batch_results, inputs);
  std::map<std::string, std::string> done;
  if (fs::exists(a.out)) {
    if (!a.resume)
      throw InputError(a.out + ": exists; expected a new results file, or --resume to carry on with this one");
    done = done_units(a.out);
  }
  std::vector<const Unit*> todo, mine;
  for (std::size_t i = shard.index; i < all.size(); i += shard.count) {
    mine.push_back(&all[i]);
    if (!done.count(all[i].cell.at("unit"))) todo.push_back(&all[i]);
  }
  // The results file's text: this shard's units in manifest order, then any
  // lines of units outside the shard, as they were.
  std::set<std::string> mine_ids;
  for (const Unit* u : mine) mine_ids.insert(u->cell.at("unit"));
  const auto ordered = [&](const std::map<std::string, std::string>& lines) {
    std::string text;
    for (const Unit* u : mine)
      if (const auto it = lines.find(u->cell.at("unit")); it != lines.end()) text += it->second + "\n";
    for (const auto& [id, line] : lines)
      if (!mine_ids.count(id)) text += line + "\n";
    return text;
  };
  // drop a cut-off last line, then append as units finish: an interrupted run keeps every finished unit
  if (!done.empty()) write_file_atomically(a.out, ordered(done));
  std::ofstream out(a.out, std::ios::binary | std::ios::app);
  if (!out) throw InputError(a.out + ": cannot write");
  std::mutex m;
  std::map<std::string, std::string> results = done;
  std::atomic<std::size_t> next{0};
  std::size_t finished = 0;
  const auto worker = [&] {
    for (std::size_t k = next++; k < todo.size(); k = next++) {
      const std::string line = run_unit(*todo[k], a.jobs > 1 ? 1 : 0).dump();
      const std::lock_guard<std::mutex> lock(m);
      out << line << '\n';
      out.flush();
      results[todo[k]->cell.at("unit")] = line;
      ++finished;
      if (!a.quiet)
        std::cerr << "\rbenchid batch: " << finished << "/" << todo.size() << " units" << std::flush;
    }
  };
  std::vector<std::thread> pool;
  const unsigned n_threads = std::min<unsigned>(a.jobs, static_cast<unsigned>(std::max<std::size_t>(1, todo.size())));
  for (unsigned t = 1; t < n_threads; ++t) pool.emplace_back(worker);
  worker();
  for (auto& t : pool) t.join();
  out.close();
  if (!a.quiet && !todo.empty()) std::cerr << "\n";
  // complete: rewrite in manifest order
  std::size_t pass = 0, fail = 0, error = 0;
  for (const Unit* u : mine) {
    const std::string status = nlohmann::json::parse(results.at(u->cell.at("unit"))).value("status", "");
    pass += status == "pass", fail += status == "fail", error += status == "error";
  }
  write_file_atomically(a.out, ordered(results));
  if (!a.quiet)
    std::cout << "benchid batch: " << mine.size() << " units" << (shard.count > 1 ? " in shard " + a.shard : "") << " ("
              << todo.size() << " run now, " << mine.size() - todo.size() << " already done): " << pass << " pass, "
              << fail << " fail, " << error << " error; wrote " << a.out << "\n";
  return error ? 1 : fail ? 3 : 0;
}

}  // namespace

void add_batch_command(CLI::App& app) {
  auto a = std::make_shared<BatchArgs>();
  CLI::App* c = app.add_subcommand(
      "batch", "Fleet mode: run every unit of a manifest through frf, fit and (with a controller) loop, and write "
               "one JSON line per unit with its key figures and pass/fail against limits. A unit that fails gets a "
               "line with its error; the batch goes on. Exit status 0 all pass, 3 a unit failed a limit, 1 a unit "
               "could not be analysed, 2 bad manifest.");
  c->add_option("manifest", a->manifest, "CSV, one unit per row; columns unit, record (relative to the manifest's "
                "folder), input, output, and optionally reference, excitation, rate, controller, order, delay, band, "
                "integrators, and the limits pm_min (deg), gm_min (dB), ms_max_db (dB), dc_gain_min, dc_gain_max (output "
                "unit per input unit), resonance_hz_min, resonance_hz_max (Hz, the lowest resonance), nrmse_max "
                "(fraction) (an empty cell: not used)")->required();
  c->add_option("-o,--out", a->out, "Results, JSON lines (one per unit, manifest order)")->required();
  add_force_flag(c);
  c->add_option("--jobs", a->jobs, "Units analysed at once on this machine (default 1)");
  c->add_option("--shard", a->shard, "I/N: only every N-th unit starting at the I-th (I from 0), for a job array "
                "spread over machines; merge the shards' files with cat and sort (default: all units)");
  c->add_flag("--resume", a->resume, "Carry on with an existing results file: units already in it are skipped");
  c->add_option("--limits", a->limits, "JSON object of default limits, e.g. {\"pm_min\": 50, \"dc_gain_min\": 35} "
                "(a manifest cell overrides; default: none, and for a unit with a controller pm_min 45, gm_min 10, "
                "ms_max_db 6)");
  c->add_flag("-q,--quiet", a->quiet, "No progress or summary");
  c->callback([a] {
    const int code = run_batch(*a);
    if (code != 0) std::exit(code);
  });
}

}  // namespace benchid::cli
