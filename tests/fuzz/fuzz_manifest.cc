// Fuzz target: a `batch` manifest. Properties: every unit has the four
// required cells, unit names are unique, limits are finite.
#include <cmath>
#include <set>
#include <string>

#include "cli/manifest.h"
#include "ident/error.h"
#include "tests/fuzz/fuzz_file.h"

using namespace benchid;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string path = fuzz::fuzz_file(data, size, ".csv");
  std::vector<cli::Unit> units;
  try {
    units = cli::read_manifest(path, {});
  } catch (const InputError& e) {
    fuzz::require(*e.what() != '\0', "an error without a message");
    return 0;
  }
  std::set<std::string> names;
  for (const auto& u : units) {
    for (const auto& r : cli::kManifestRequired)
      fuzz::require(u.cell.count(r) && !u.cell.at(r).empty(), "a unit without a required cell");
    fuzz::require(names.insert(u.cell.at("unit")).second, "a unit name twice");
    for (const auto& [k, v] : u.limit) fuzz::require(std::isfinite(v), "a limit that is not finite");
  }
  return 0;
}
