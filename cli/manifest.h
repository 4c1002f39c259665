// The batch manifest (one unit per row) and the --limits file of `benchid batch`.
// Both readers throw InputError naming the file, the line and what was expected.
#pragma once

#include <cstddef>
#include <map>
#include <string>
#include <vector>

namespace benchid::cli {

// Manifest columns (header row required; empty cell = not used / default).
inline const std::vector<std::string> kManifestRequired{"unit", "record", "input", "output"};
inline const std::vector<std::string> kManifestSettings{"reference", "excitation", "rate",        "controller",
                                                        "order",     "delay",      "band",        "integrators",
                                                        "envelope"};
// Limits: a manifest cell, else the --limits file, else none (the loop's
// three have the `loop` command's defaults when a controller is given).
inline const std::vector<std::string> kManifestLimits{"pm_min",         "gm_min",           "ms_max_db",        "dc_gain_min",
                                                      "dc_gain_max",    "resonance_hz_min", "resonance_hz_max", "nrmse_max",
                                                      "envelope_outside_max"};
inline const std::map<std::string, double> kLoopLimitDefaults{{"pm_min", 45}, {"gm_min", 10}, {"ms_max_db", 6}};

struct Unit {
  std::size_t line = 0;  // in the manifest
  std::map<std::string, std::string> cell;  // column -> cell text; record/excitation made relative to the manifest
  std::map<std::string, double> limit;
};

// An "envelope" cell lists good units' FRF CSVs separated by ';' (their band
// is the limit, ident/compare.h; envelope_outside_max lines may leave it,
// default 0). Relative record, excitation and envelope paths are taken
// relative to the manifest's directory; a controller cell (spec or JSON file) is checked and becomes its spec.
std::vector<Unit> read_manifest(const std::string& path, const std::map<std::string, double>& file_limits);
// A JSON object of limit: value; an empty path gives no limits.
std::map<std::string, double> read_limits(const std::string& path);

}  // namespace benchid::cli
