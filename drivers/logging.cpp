// spdlog set-up for every program. See logging.hpp.
#include "drivers/logging.hpp"

#include <sys/stat.h>

#include <charconv>
#include <cstdlib>
#include <memory>
#include <stdexcept>
#include <vector>

#include <fmt/format.h>
#include <spdlog/pattern_formatter.h>
#include <spdlog/sinks/rotating_file_sink.h>
#include <spdlog/sinks/stdout_sinks.h>
#include <spdlog/spdlog.h>

#include "drivers/log_stderr_sink.hpp"

namespace echoline {

namespace {

constexpr const char* kTimestampedPattern = "%Y-%m-%dT%H:%M:%S.%e%z %n %l: %v";
constexpr const char* kJournalPattern = "%*%n: %v";   // journald stamps the time itself

// "%*": the sd-daemon priority prefix of the message's level.
class JournalPriorityFlag final : public spdlog::custom_flag_formatter {
 public:
  void format(const spdlog::details::log_msg& msg, const std::tm&, spdlog::memory_buf_t& dest) override {
    const auto name = spdlog::level::to_string_view(msg.level);
    const std::string_view prefix = journal_prefix(std::string_view(name.data(), name.size()));
    dest.append(prefix.data(), prefix.data() + prefix.size());
  }
  std::unique_ptr<custom_flag_formatter> clone() const override { return std::make_unique<JournalPriorityFlag>(); }
};

std::unique_ptr<spdlog::formatter> journal_formatter() {
  auto f = std::make_unique<spdlog::pattern_formatter>();
  f->add_flag<JournalPriorityFlag>('*').set_pattern(kJournalPattern);
  return f;
}

bool parse_number(std::string_view text, unsigned long long& out) {
  if (text.empty()) return false;
  auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), out);
  return ec == std::errc() && end == text.data() + text.size();
}

}  // namespace

bool stderr_is_journal(const char* journal_stream) {
  if (journal_stream == nullptr || *journal_stream == '\0') return false;
  const std::string_view text(journal_stream);
  const auto colon = text.find(':');
  unsigned long long dev = 0, ino = 0;
  if (colon == std::string_view::npos || !parse_number(text.substr(0, colon), dev) ||
      !parse_number(text.substr(colon + 1), ino)) {
    return false;
  }
  struct stat st{};
  if (::fstat(2, &st) != 0) return false;
  return static_cast<unsigned long long>(st.st_dev) == dev && static_cast<unsigned long long>(st.st_ino) == ino;
}

std::string_view journal_prefix(std::string_view level) {
  // sd-daemon(3): SD_CRIT "<2>", SD_ERR "<3>", SD_WARNING "<4>", SD_INFO "<6>", SD_DEBUG "<7>".
  if (level == "critical") return "<2>";
  if (level == "error") return "<3>";
  if (level == "warning") return "<4>";
  if (level == "info") return "<6>";
  if (level == "debug" || level == "trace") return "<7>";
  return "";
}

void setup_logging(const LogOptions& options) {
  auto level = spdlog::level::from_str(options.level);
  if (level == spdlog::level::off && options.level != "off") {
    throw std::invalid_argument(fmt::format("log level \"{}\": expected trace, debug, info, warn, error, "
                                            "critical or off",
                                            options.level));
  }
  std::vector<spdlog::sink_ptr> sinks;
  if (options.console) {
    spdlog::sink_ptr console;
    if (options.console_never_blocks) console = std::make_shared<DroppingStderrSink>(options.program);
    else console = std::make_shared<spdlog::sinks::stderr_sink_mt>();
    if (stderr_is_journal(std::getenv("JOURNAL_STREAM"))) console->set_formatter(journal_formatter());
    else console->set_pattern(kTimestampedPattern);
    sinks.push_back(std::move(console));
  }
  if (!options.file.empty()) {
    try {
      auto file = std::make_shared<spdlog::sinks::rotating_file_sink_mt>(options.file.string(), options.file_max_bytes,
                                                                         options.file_count);
      file->set_pattern(kTimestampedPattern);
      sinks.push_back(std::move(file));
    } catch (const spdlog::spdlog_ex& e) {
      throw std::runtime_error(fmt::format("log file \"{}\": {}", options.file.string(), e.what()));
    }
  }
  auto logger = std::make_shared<spdlog::logger>(options.program, sinks.begin(), sinks.end());
  logger->set_level(level);
  logger->flush_on(spdlog::level::from_str(options.flush_level));
  spdlog::set_default_logger(logger);
}

void shutdown_logging() { spdlog::shutdown(); }

}  // namespace echoline
