// Loads a calibration-kit definition (config/kits/*.jsonc) into a checked CalKit. Every mistake
// throws drivers::ConfigError naming file, line and key path. Edge code; thread-safe.
#pragma once

#include <filesystem>
#include <string>

#include "daemon/core/cal_kit.hpp"

namespace echoline::core {

CalKit load_cal_kit(const std::filesystem::path& file);
// Same from text; `file_name` names the source in messages.
CalKit parse_cal_kit(std::string text, std::string file_name);

}  // namespace echoline::core
