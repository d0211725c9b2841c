// UTC time text for run records.
#include "daemon/service/clock.hpp"

#include <charconv>
#include <chrono>
#include <cmath>
#include <ctime>

#include <fmt/format.h>

namespace echoline::service {
namespace {

std::tm to_tm(double unix_s) {
  std::time_t t = static_cast<std::time_t>(std::floor(unix_s));
  std::tm tm{};
  gmtime_r(&t, &tm);
  return tm;
}

bool read_int(std::string_view text, std::size_t pos, std::size_t len, int& out) {
  if (pos + len > text.size()) return false;
  auto r = std::from_chars(text.data() + pos, text.data() + pos + len, out);
  return r.ec == std::errc() && r.ptr == text.data() + pos + len;
}

}  // namespace

double unix_now_s() {
  using namespace std::chrono;
  return duration<double>(system_clock::now().time_since_epoch()).count();
}

std::string utc_iso8601(double unix_s) {
  // Round to the millisecond first so 0.123 (stored as 0.12299...) prints as .123.
  const long long total_ms = std::llround(unix_s * 1000.0);
  long long secs = total_ms / 1000;
  long long ms = total_ms % 1000;
  if (ms < 0) {
    ms += 1000;
    secs -= 1;
  }
  std::tm tm = to_tm(static_cast<double>(secs));
  return fmt::format("{:04}-{:02}-{:02}T{:02}:{:02}:{:02}.{:03}Z", tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday,
                     tm.tm_hour, tm.tm_min, tm.tm_sec, ms);
}

std::string compact_utc(double unix_s) {
  std::tm tm = to_tm(unix_s);
  return fmt::format("{:04}{:02}{:02}T{:02}{:02}{:02}Z", tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday, tm.tm_hour,
                     tm.tm_min, tm.tm_sec);
}

std::optional<double> parse_utc_iso8601(std::string_view text) {
  // YYYY-MM-DDTHH:MM:SS[.fff]Z
  int y, mo, d, h, mi, s;
  if (text.size() < 20 || text[4] != '-' || text[7] != '-' || text[10] != 'T' || text[13] != ':' || text[16] != ':') {
    return std::nullopt;
  }
  if (!read_int(text, 0, 4, y) || !read_int(text, 5, 2, mo) || !read_int(text, 8, 2, d) || !read_int(text, 11, 2, h) ||
      !read_int(text, 14, 2, mi) || !read_int(text, 17, 2, s)) {
    return std::nullopt;
  }
  double frac = 0;
  std::size_t pos = 19;
  if (pos < text.size() && text[pos] == '.') {
    std::size_t start = ++pos;
    while (pos < text.size() && text[pos] >= '0' && text[pos] <= '9') ++pos;
    if (pos == start) return std::nullopt;
    double scale = 0.1;
    for (std::size_t i = start; i < pos; ++i, scale /= 10) frac += (text[i] - '0') * scale;
  }
  if (pos + 1 != text.size() || text[pos] != 'Z') return std::nullopt;
  std::tm tm{};
  tm.tm_year = y - 1900;
  tm.tm_mon = mo - 1;
  tm.tm_mday = d;
  tm.tm_hour = h;
  tm.tm_min = mi;
  tm.tm_sec = s;
  return static_cast<double>(timegm(&tm)) + frac;
}

}  // namespace echoline::service
