// Output files: written whole to a temporary name beside the target and
// renamed into place, so a failed run never leaves half a file; a target that
// is one of the inputs is refused.
#pragma once

#include <string>

#include <CLI/CLI.hpp>
#include <vector>

namespace benchid::cli {

// SIGINT and SIGTERM: remove the temporaries of outputs not yet renamed
// into place, print one line, exit 130 or 143. Installed once by main().
void install_stop_handlers();

// Throws InputError when `out` names the same file as any of `inputs`.
void refuse_overwriting_input(const std::string& out, const std::vector<std::string>& inputs);

// What an output file holds, told from its first bytes when it exists.
enum class OutputKind {
  frf_csv,        // "# benchid frf" (frf -o, report --keep)
  frf_text,       // "benchid frequency-response report" (frf --report)
  model_json,     // {"format": "benchid.model/1"} (fit -o, report --keep)
  loop_json,      // {"format": "benchid.loop/1"} (loop -o, report --keep)
  replay_csv,     // "# benchid replay" (replay -o)
  signal,         // "# benchid excite" CSV, or a sound file whose software tag is benchid's (excite -o)
  sidecar,        // {"format": "benchid.excitation/1"} (excite --sidecar/--plan)
  html_report,    // <title>benchid report: (report -o)
  batch_results,  // JSON lines starting {"unit": (batch -o)
  compare_csv,    // "# benchid compare" (compare -o)
  controller_json,  // {"format": "benchid.controller/1"} (tune -o)
};
// The overwrite rule for every output file: an output may replace an
// existing file only when that file is empty or is benchid's own earlier
// result of the same kind (or --force was given); never an input, never a
// directory. Throws InputError naming the file and what was expected. "-"
// (standard output) and "" (no output) pass.
void check_output(const std::string& out, OutputKind kind, const std::vector<std::string>& inputs);
// Adds --force (replace existing outputs that are not benchid's own) to a command.
void add_force_flag(CLI::App* command);
// Writes `content` to `path` atomically ("-" writes to stdout).
void write_file_atomically(const std::string& path, const std::string& content);

// A temporary file beside `path` for writers that need a path (libsndfile):
// write to temp_path(), then commit() renames it into place; destroyed
// uncommitted, it is removed.
class PendingFile {
 public:
  explicit PendingFile(const std::string& path);
  ~PendingFile();
  PendingFile(const PendingFile&) = delete;
  PendingFile& operator=(const PendingFile&) = delete;
  const std::string& temp_path() const { return temp_; }
  void commit();

 private:
  std::string path_, temp_;
  bool done_ = false;
};

}  // namespace benchid::cli
