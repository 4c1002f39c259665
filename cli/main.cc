// benchid: from a bench log to a frequency response, a model and loop margins.
// Exit status: 0 success; 1 the analysis could not produce a result;
// 2 bad usage or bad input; 3 the verdict failed (with --strict).
#include <CLI/CLI.hpp>

#include <exception>
#include <iostream>
#include <new>
#include <string>

#include "cli/commands.h"
#include "cli/output.h"
#include "ident/error.h"

int main(int argc, char** argv) {
  CLI::App app{
      "benchid: frequency response, rational models and loop margins from bench recordings.\n"
      "Frequencies are in Hz, angles in degrees, gains in dB where a name says _db."};
  app.name("benchid");
  app.require_subcommand(1);
  app.set_version_flag("--version", "benchid 0.1.0");
  std::string command_line = "benchid";
  for (int i = 1; i < argc; ++i) (command_line += ' ') += argv[i];
  benchid::cli::add_excite_command(app);
  benchid::cli::add_frf_command(app, command_line);
  benchid::cli::add_fit_command(app);
  benchid::cli::add_replay_command(app);
  benchid::cli::add_loop_command(app);
  benchid::cli::add_report_command(app, command_line);
  benchid::cli::add_demo_command(app);
  benchid::cli::add_batch_command(app);
  benchid::cli::add_stitch_command(app);
  benchid::cli::add_compare_command(app);
  benchid::cli::add_tune_command(app);
  benchid::cli::install_stop_handlers();
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    std::cerr << "benchid: error: " << e.what() << " (see 'benchid --help')\n";
    return 2;
  } catch (const benchid::InputError& e) {
    std::cerr << "benchid: error: " << e.what() << "\n";
    return 2;
  } catch (const std::bad_alloc&) {
    std::cerr << "benchid: error: out of memory\n";
    return 1;
  } catch (const std::exception& e) {
    std::cerr << "benchid: error: " << e.what() << "\n";
    return 1;
  }
  return 0;
}
