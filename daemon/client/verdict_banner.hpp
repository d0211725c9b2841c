// The large verdict banner of the operator console: block letters drawn from our own 5x5 font,
// framed, optionally coloured (ANSI SGR) when the output is a terminal and NO_COLOR is unset.
// Pure; thread-safe.
#pragma once

#include <string>
#include <string_view>

namespace echoline::client {

// Five lines of block letters for `word` (letters A-Z that the font has, and spaces); letters
// it lacks are drawn as '?'. Each line ends with '\n'.
std::string block_letters(std::string_view word);

// The framed banner for a verdict ("pass", "fail", "inconclusive", "aborted"): the word in block
// letters between two rules. With colour, each line is wrapped in the verdict's SGR sequence.
std::string verdict_banner(std::string_view verdict, bool colour);

// The SGR sequence of a verdict's colour (our own choice: pass bold blue, fail bold magenta,
// inconclusive bold yellow, aborted reverse video); "" for an unknown verdict.
std::string_view verdict_colour(std::string_view verdict);

}  // namespace echoline::client
