// Output files: written whole to a temporary name beside the target and
// renamed into place, so a failed run never leaves half a file; a target that
// is one of the inputs is refused.
#pragma once

#include <string>
#include <vector>

namespace benchid::cli {

// Throws InputError when `out` names the same file as any of `inputs`.
void refuse_overwriting_input(const std::string& out, const std::vector<std::string>& inputs);
// Writes `content` to `path` atomically ("-" writes to stdout).
void write_file_atomically(const std::string& path, const std::string& content);

}  // namespace benchid::cli
