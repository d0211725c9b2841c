// Lines typed by the operator or a barcode scanner (or fed from a pipe by a script): trimmed,
// with one line of look-ahead so a prompt can leave a serial for the scan loop.
// One user thread at a time.
#pragma once

#include <istream>
#include <optional>
#include <string>

namespace echoline::client {

class LineInput {
 public:
  // `interactive`: a person at a terminal (prompts wait for them); false for a pipe or file.
  LineInput(std::istream& in, bool interactive) : in_(in), interactive_(interactive) {}
  LineInput(const LineInput&) = delete;
  LineInput& operator=(const LineInput&) = delete;

  // The next line with surrounding blanks and control characters removed; nullopt at EOF.
  std::optional<std::string> next();
  // The line next() would return, without consuming it.
  std::optional<std::string> peek();
  bool interactive() const { return interactive_; }

 private:
  std::istream& in_;
  bool interactive_;
  std::optional<std::string> ahead_;
  bool has_ahead_ = false;
};

// Removes leading/trailing spaces, tabs, CR and other control characters (scanners add some).
std::string trim_scanned(const std::string& text);

}  // namespace echoline::client
