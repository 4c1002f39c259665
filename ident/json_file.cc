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
  try {
    return nlohmann::json::parse(text);
  } catch (const nlohmann::json::parse_error& e) {
    long line = 1;
    for (std::size_t i = 0; i < e.byte && i < text.size(); ++i) line += text[i] == '\n';
    throw InputError(where(path, line) + "not valid JSON (" + std::string(e.what()).substr(0, 120) + "); expected " +
                     expected);
  }
}

}  // namespace benchid
