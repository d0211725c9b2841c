// Loads a sweep recipe (config/recipes/*.jsonc) into a checked Recipe value.
// Every mistake throws drivers::ConfigError naming file, line and key path. Edge code (config
// load); thread-safe (no shared state).
#pragma once

#include <filesystem>
#include <string>

#include "daemon/core/recipe.hpp"

namespace echoline::core {

// Reads, parses and validates the file; sets content_hash (hex SHA-256 of the file bytes) and
// source_path. Throws drivers::ConfigError.
Recipe load_recipe(const std::filesystem::path& file);

// Same from text already in memory; `file_name` is used in error messages and source_path.
Recipe parse_recipe(std::string text, std::string file_name);

}  // namespace echoline::core
