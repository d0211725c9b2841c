// Lines typed by the operator or a barcode scanner (or fed from a pipe by a script): trimmed,
// with one line of look-ahead, and a queue of serials held back: a serial scanned while a
// prompt waits for an answer is held and handed to the scan loop later, never dropped.
// One user thread at a time.
#pragma once

#include <deque>
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

  // The next serial held back (hold()), else the next line read; surrounding blanks and
  // control characters removed; nullopt at EOF. For the scan prompt.
  std::optional<std::string> next();
  // The next line read from the input, past any held serials. For prompts that wait for an
  // answer typed after them.
  std::optional<std::string> next_typed();
  // The line next_typed() would return, without consuming it.
  std::optional<std::string> peek();
  // Holds a serial scanned at a prompt; next() returns held serials first, in order.
  void hold(std::string serial) { held_.push_back(std::move(serial)); }
  std::size_t held() const { return held_.size(); }
  bool interactive() const { return interactive_; }

 private:
  std::istream& in_;
  bool interactive_;
  std::optional<std::string> ahead_;
  bool has_ahead_ = false;
  std::deque<std::string> held_;
};

// Removes leading/trailing spaces, tabs, CR and other control characters (scanners add some).
std::string trim_scanned(const std::string& text);

}  // namespace echoline::client
