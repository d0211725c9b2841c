#include "daemon/client/verdict_banner.hpp"

#include <array>
#include <cctype>
#include <map>

namespace echoline::client {
namespace {

using Glyph = std::array<const char*, 5>;

// Our own 5x5 font; '#' is ink, '.' is paper.
const std::map<char, Glyph>& font() {
  static const std::map<char, Glyph> f = {
      {'A', {".###.", "#...#", "#####", "#...#", "#...#"}},
      {'B', {"####.", "#...#", "####.", "#...#", "####."}},
      {'C', {".####", "#....", "#....", "#....", ".####"}},
      {'D', {"####.", "#...#", "#...#", "#...#", "####."}},
      {'E', {"#####", "#....", "####.", "#....", "#####"}},
      {'F', {"#####", "#....", "####.", "#....", "#...."}},
      {'I', {"#####", "..#..", "..#..", "..#..", "#####"}},
      {'L', {"#....", "#....", "#....", "#....", "#####"}},
      {'N', {"#...#", "##..#", "#.#.#", "#..##", "#...#"}},
      {'O', {".###.", "#...#", "#...#", "#...#", ".###."}},
      {'P', {"####.", "#...#", "####.", "#....", "#...."}},
      {'R', {"####.", "#...#", "####.", "#..#.", "#...#"}},
      {'S', {".####", "#....", ".###.", "....#", "####."}},
      {'T', {"#####", "..#..", "..#..", "..#..", "..#.."}},
      {'U', {"#...#", "#...#", "#...#", "#...#", ".###."}},
      {'V', {"#...#", "#...#", "#...#", ".#.#.", "..#.."}},
      {' ', {".....", ".....", ".....", ".....", "....."}},
      {'?', {".###.", "#...#", "..##.", ".....", "..#.."}},
  };
  return f;
}

}  // namespace

std::string block_letters(std::string_view word) {
  std::string out;
  for (int row = 0; row < 5; ++row) {
    std::string line;
    for (std::size_t i = 0; i < word.size(); ++i) {
      const char c = static_cast<char>(std::toupper(static_cast<unsigned char>(word[i])));
      auto it = font().find(c);
      const Glyph& g = it != font().end() ? it->second : font().at('?');
      if (i > 0) line += ' ';
      for (const char* p = g[static_cast<std::size_t>(row)]; *p; ++p) line += *p == '#' ? '#' : ' ';
    }
    while (!line.empty() && line.back() == ' ') line.pop_back();
    out += line + '\n';
  }
  return out;
}

std::string_view verdict_colour(std::string_view verdict) {
  if (verdict == "pass") return "\x1b[1;34m";
  if (verdict == "fail") return "\x1b[1;35m";
  if (verdict == "inconclusive") return "\x1b[1;33m";
  if (verdict == "aborted") return "\x1b[7m";
  return "";
}

std::string verdict_banner(std::string_view verdict, bool colour) {
  std::string letters = block_letters(verdict);
  std::size_t width = 0;
  for (std::size_t start = 0; start < letters.size();) {
    const auto nl = letters.find('\n', start);
    width = std::max(width, nl - start);
    start = nl + 1;
  }
  const std::string rule(width + 4, '=');
  std::string body = rule + "\n";
  for (std::size_t start = 0; start < letters.size();) {
    const auto nl = letters.find('\n', start);
    std::string line = letters.substr(start, nl - start);
    line.resize(width, ' ');
    body += "  " + line + "  \n";
    start = nl + 1;
  }
  body += rule + "\n";
  const std::string_view sgr = colour ? verdict_colour(verdict) : std::string_view{};
  if (sgr.empty()) return body;
  std::string out;
  for (std::size_t start = 0; start < body.size();) {
    const auto nl = body.find('\n', start);
    out += std::string(sgr) + body.substr(start, nl - start) + "\x1b[0m\n";
    start = nl + 1;
  }
  return out;
}

}  // namespace echoline::client
