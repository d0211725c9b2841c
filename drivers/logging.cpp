// spdlog set-up. See logging.hpp.
#include "drivers/logging.hpp"

#include <memory>
#include <stdexcept>
#include <vector>

#include <fmt/format.h>
#include <spdlog/sinks/rotating_file_sink.h>
#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

namespace echoline {

namespace {
constexpr std::size_t kMaxFileBytes = 5u * 1024 * 1024;
constexpr std::size_t kMaxFiles = 3;
}  // namespace

void setup_logging(const LogOptions& options) {
  auto level = spdlog::level::from_str(options.level);
  if (level == spdlog::level::off && options.level != "off") {
    throw std::invalid_argument(fmt::format("log level \"{}\": expected trace, debug, info, warn, error, "
                                            "critical or off",
                                            options.level));
  }
  std::vector<spdlog::sink_ptr> sinks;
  if (options.console) sinks.push_back(std::make_shared<spdlog::sinks::stderr_color_sink_mt>());
  if (!options.file.empty()) {
    try {
      sinks.push_back(std::make_shared<spdlog::sinks::rotating_file_sink_mt>(options.file.string(), kMaxFileBytes,
                                                                             kMaxFiles));
    } catch (const spdlog::spdlog_ex& e) {
      throw std::runtime_error(fmt::format("log file \"{}\": {}", options.file.string(), e.what()));
    }
  }
  auto logger = std::make_shared<spdlog::logger>(options.program, sinks.begin(), sinks.end());
  logger->set_level(level);
  logger->flush_on(spdlog::level::warn);
  logger->set_pattern("%Y-%m-%dT%H:%M:%S.%e%z %n %l: %v");
  spdlog::set_default_logger(logger);
}

void shutdown_logging() { spdlog::shutdown(); }

}  // namespace echoline
