// One function per subcommand: registers its options on the app.
#pragma once

#include <CLI/CLI.hpp>

namespace benchid::cli {

#include <string>

// command_line: the invocation as typed, quoted in reports.
void add_frf_command(CLI::App& app, const std::string& command_line);
void add_excite_command(CLI::App& app);
void add_fit_command(CLI::App& app);
void add_replay_command(CLI::App& app);
void add_loop_command(CLI::App& app);
void add_report_command(CLI::App& app, const std::string& command_line);
void add_demo_command(CLI::App& app);
void add_batch_command(CLI::App& app);
void add_stitch_command(CLI::App& app);
void add_compare_command(CLI::App& app);
void add_tune_command(CLI::App& app);

}  // namespace benchid::cli
