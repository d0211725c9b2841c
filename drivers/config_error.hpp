// ConfigError: the one exception type for bad configuration files (profiles, station, recipes).
// Thrown only at the edges (loading at start-up or on request); never on the runtime path.
// what() reads "<file>:<line>: <key>: <message>"; key is a JSON pointer such as "/commands/set_frequency".
#pragma once

#include <stdexcept>
#include <string>
#include <utility>

namespace echoline::drivers {

struct ConfigError : std::runtime_error {
  // line <= 0 means "no line known" (e.g. the file cannot be read); key "" means the whole file.
  ConfigError(std::string file_, int line_, std::string key_, std::string message_)
      : std::runtime_error(format(file_, line_, key_, message_)),
        file(std::move(file_)), line(line_), key(std::move(key_)), message(std::move(message_)) {}

  std::string file;     // as given to the loader (path string)
  int line = 0;         // 1-based line of the offending key or value
  std::string key;      // JSON pointer of the offending key ("/io/timeout_ms"); "/" for the root
  std::string message;  // what is wrong, without the location

  // "<file>:<line>: <key>: <message>"; the line part is left out when line <= 0,
  // the key part when key is empty.
  static std::string format(const std::string& file, int line, const std::string& key,
                            const std::string& message) {
    std::string s = file;
    if (line > 0) s += ":" + std::to_string(line);
    s += ": ";
    if (!key.empty()) s += key + ": ";
    s += message;
    return s;
  }
};

}  // namespace echoline::drivers
