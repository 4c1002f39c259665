// One function per subcommand: registers its options on the app.
#pragma once

#include <CLI/CLI.hpp>

namespace benchid::cli {

void add_frf_command(CLI::App& app);

}  // namespace benchid::cli
