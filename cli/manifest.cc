#include "cli/manifest.h"

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <set>

#include <nlohmann/json.hpp>

#include "cli/parse.h"
#include "ident/error.h"
#include "ident/json_file.h"
#include "loop/controller.h"

namespace benchid::cli {

namespace fs = std::filesystem;

namespace {

// One CSV record: fields separated by commas, optionally in double quotes
// ("" inside quotes is a quote).
std::vector<std::string> csv_fields(const std::string& line, const std::string& where) {
  std::vector<std::string> f(1);
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') f.back() += '"', ++i;
      else if (c == '"') quoted = false;
      else f.back() += c;
    } else if (c == '"') {
      quoted = true;
    } else if (c == ',') {
      f.emplace_back();
    } else if (c != '\r') {
      f.back() += c;
    }
  }
  if (quoted) throw InputError(where + ": a quote is not closed; expected \"...\"");
  for (auto& s : f) {  // trim spaces
    const auto b = s.find_first_not_of(" \t"), e = s.find_last_not_of(" \t");
    s = b == std::string::npos ? "" : s.substr(b, e - b + 1);
  }
  return f;
}

}  // namespace

std::vector<Unit> read_manifest(const std::string& path, const std::map<std::string, double>& file_limits) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path + ": cannot open the manifest");
  std::string line;
  std::vector<std::string> header;
  std::size_t n = 0;
  std::vector<Unit> units;
  std::set<std::string> ids;
  const fs::path base = fs::path(path).parent_path();
  while (std::getline(in, line)) {
    ++n;
    const std::string where = path + ":" + std::to_string(n);
    if (line.empty() || line[0] == '#' || line.find_first_not_of(" \t\r,") == std::string::npos) continue;
    std::vector<std::string> f = csv_fields(line, where);
    if (header.empty()) {
      header = f;
      for (const auto& h : header) {
        const bool known = std::count(kManifestRequired.begin(), kManifestRequired.end(), h) ||
                           std::count(kManifestSettings.begin(), kManifestSettings.end(), h) || std::count(kManifestLimits.begin(), kManifestLimits.end(), h);
        if (!known)
          throw InputError(where + ": column '" + h + "' is unknown; expected unit, record, input, output, reference, "
                           "excitation, rate, controller, order, delay, band, integrators, envelope or a limit (pm_min, "
                           "gm_min, ms_max_db, dc_gain_min, dc_gain_max, resonance_hz_min, resonance_hz_max, nrmse_max, "
                           "envelope_outside_max)");
        if (std::count(header.begin(), header.end(), h) > 1) throw InputError(where + ": column '" + h + "' appears twice");
      }
      for (const auto& r : kManifestRequired)
        if (!std::count(header.begin(), header.end(), r))
          throw InputError(where + ": no column '" + r + "'; expected a header with unit, record, input and output");
      continue;
    }
    if (f.size() != header.size())
      throw InputError(where + ": " + std::to_string(f.size()) + " fields; expected " + std::to_string(header.size()) +
                       " as in the header");
    Unit u;
    u.line = n;
    for (std::size_t i = 0; i < f.size(); ++i) u.cell[header[i]] = f[i];
    for (const auto& r : kManifestRequired)
      if (u.cell[r].empty()) throw InputError(where + ": '" + r + "' is empty; expected a value");
    if (!ids.insert(u.cell["unit"]).second) throw InputError(where + ": unit '" + u.cell["unit"] + "' appears twice");
    if (!u.cell["envelope"].empty()) {  // FRF CSVs separated by ';'
      std::string joined;
      std::size_t from = 0;
      const std::string& cell = u.cell["envelope"];
      while (from <= cell.size()) {
        std::size_t to = std::min(cell.find(';', from), cell.size());
        std::string item = cell.substr(from, to - from);
        const auto b = item.find_first_not_of(" \t"), e = item.find_last_not_of(" \t");
        item = b == std::string::npos ? "" : item.substr(b, e - b + 1);
        if (item.empty()) throw InputError(where + ": envelope has an empty item; expected FRF CSVs separated by ';'");
        if (fs::path(item).is_relative()) item = (base / item).string();
        joined += (joined.empty() ? "" : ";") + item;
        from = to + 1;
      }
      u.cell["envelope"] = joined;
    }
    for (const char* p : {"record", "excitation"})
      if (!u.cell[p].empty() && fs::path(u.cell[p]).is_relative()) u.cell[p] = (base / u.cell[p]).string();
    u.limit = file_limits;
    for (const auto& l : kManifestLimits)
      if (!u.cell[l].empty()) u.limit[l] = parse_number(u.cell[l], where + ": " + l);
    if (u.cell["envelope"].empty() && u.limit.count("envelope_outside_max"))
      throw InputError(where + ": limit envelope_outside_max needs an envelope; expected an 'envelope' value for unit '" +
                       u.cell["unit"] + "'");
    if (!u.cell["envelope"].empty() && !u.limit.count("envelope_outside_max")) u.limit["envelope_outside_max"] = 0;
    const bool loop = !u.cell["controller"].empty();
    for (const auto& [l, v] : kLoopLimitDefaults) {
      if (u.limit.count(l) && !loop)
        throw InputError(where + ": limit " + l + " needs a controller; expected a 'controller' value for unit '" +
                         u.cell["unit"] + "'");
      if (loop && !u.limit.count(l)) u.limit[l] = v;
    }
    if (loop) {
      try {
        u.cell["controller"] = loop::controller_spec(u.cell["controller"]);
        loop::parse_controller(u.cell["controller"]);
      } catch (const InputError& e) {
        throw InputError(where + ": controller: " + e.what());
      }
    }
    units.push_back(std::move(u));
  }
  if (header.empty()) throw InputError(path + ": empty; expected a header row and one row per unit");
  return units;
}

std::map<std::string, double> read_limits(const std::string& path) {
  std::map<std::string, double> out;
  if (path.empty()) return out;
  const nlohmann::json j = read_json_file(path, "a limits file (JSON object of limit: value)");
  if (!j.is_object()) throw InputError(path + ": expected a JSON object of limit: value");
  for (const auto& [k, v] : j.items()) {
    if (!std::count(kManifestLimits.begin(), kManifestLimits.end(), k))
      throw InputError(path + ": limit '" + k + "' is unknown; expected one of pm_min, gm_min, ms_max_db, dc_gain_min, "
                       "dc_gain_max, resonance_hz_min, resonance_hz_max, nrmse_max, envelope_outside_max");
    if (!v.is_number()) throw InputError(path + ": limit '" + k + "' is not a number");
    out[k] = v.get<double>();
  }
  return out;
}

}  // namespace benchid::cli
