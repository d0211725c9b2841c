// Scanner and keyboard lines: trimming, look-ahead, serials held back at prompts.
#include "daemon/client/line_input.hpp"

namespace echoline::client {

std::string trim_scanned(const std::string& text) {
  std::size_t b = 0, e = text.size();
  auto blank = [](char c) { return static_cast<unsigned char>(c) <= 0x20 || c == 0x7f; };
  while (b < e && blank(text[b])) ++b;
  while (e > b && blank(text[e - 1])) --e;
  return text.substr(b, e - b);
}

std::optional<std::string> LineInput::peek() {
  if (!has_ahead_) {
    std::string line;
    if (std::getline(in_, line)) {
      ahead_ = trim_scanned(line);
    } else {
      ahead_.reset();
    }
    has_ahead_ = true;
  }
  return ahead_;
}

std::optional<std::string> LineInput::next() {
  if (!held_.empty()) {
    std::string serial = std::move(held_.front());
    held_.pop_front();
    return serial;
  }
  return next_typed();
}

std::optional<std::string> LineInput::next_typed() {
  auto line = peek();
  has_ahead_ = false;
  ahead_.reset();
  return line;
}

}  // namespace echoline::client
