// The release number and the --version line (echoline/version.hpp); the commit is generated.
#include "echoline/version.hpp"

namespace echoline {

std::string_view version() { return ECHOLINE_VERSION; }

std::string version_line(std::string_view program) {
  std::string line(program);
  line += ' ';
  line += version();
  line += " (";
  line += commit();
  line += ')';
  return line;
}

}  // namespace echoline
