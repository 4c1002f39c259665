#include "ident/json_file.h"

#include <fstream>
#include <sstream>

#include "ident/error.h"

namespace benchid {

nlohmann::json read_json_file(const std::string& path, const std::string& expected) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError("cannot open '" + path + "': no such file or not readable");
  std::stringstream ss;
  ss << in.rdbuf();
  const std::string text = ss.str();
  if (text.size() > (64u << 20)) throw InputError(where(path) + "larger than 64 MiB; expected " + expected);
  // Nesting deeper than any of benchid's files needs is refused before
  // parsing (the parser's own limits are not ours to rely on).
  constexpr int kMaxDepth = 64;
  int depth = 0;
  bool in_string = false;
  long line = 1;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (c == '\n') ++line;
    if (in_string) {
      if (c == '\\') ++i;
      else if (c == '"') in_string = false;
    } else if (c == '"') {
      in_string = true;
    } else if (c == '[' || c == '{') {
      if (++depth > kMaxDepth)
        throw InputError(where(path, line) + "JSON nested more than " + std::to_string(kMaxDepth) +
                         " levels deep; expected " + expected);
    } else if (c == ']' || c == '}') {
      --depth;
    }
  }
  try {
    return nlohmann::json::parse(text);
  } catch (const nlohmann::json::parse_error& e) {
    long at = 1;
    for (std::size_t i = 0; i < e.byte && i < text.size(); ++i) at += text[i] == '\n';
    // the library's text without its "[json.exception...]" prefix
    std::string what = e.what();
    const auto p = what.find("parse error");
    if (p != std::string::npos) what = what.substr(p);
    throw InputError(where(path, at) + "not valid JSON (" + what.substr(0, 160) + "); expected " + expected);
  } catch (const nlohmann::json::exception& e) {
    // e.g. a number beyond the range of a double
    std::string what = e.what();
    const auto p = what.find("] ");
    if (p != std::string::npos) what = what.substr(p + 2);
    throw InputError(where(path) + "not usable JSON (" + what.substr(0, 160) + "); expected " + expected);
  }
}

}  // namespace benchid
