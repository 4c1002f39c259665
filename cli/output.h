// Output files: written whole to a temporary name beside the target and
// renamed into place, so a failed run never leaves half a file; a target that
// is one of the inputs is refused.
#pragma once

#include <string>
#include <vector>

namespace benchid::cli {

// SIGINT and SIGTERM: remove the temporaries of outputs not yet renamed
// into place, print one line, exit 130 or 143. Installed once by main().
void install_stop_handlers();

// Throws InputError when `out` names the same file as any of `inputs`.
void refuse_overwriting_input(const std::string& out, const std::vector<std::string>& inputs);
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
