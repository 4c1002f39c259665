// Reading one of benchid's JSON files (sidecars, plans, models): the whole
// file, at most 64 MiB, parsed; a syntax error names the file and its line.
#pragma once

#include <nlohmann/json.hpp>
#include <string>

namespace benchid {

// `expected` completes the messages: "...; expected <expected>".
nlohmann::json read_json_file(const std::string& path, const std::string& expected);

}  // namespace benchid
