// Fuzz target for the recipe loader (daemon/core/recipe_loader.hpp, parse_recipe from text).
// Bad input must end in drivers::ConfigError naming the file; anything else (crash, another
// exception type, a hang) is a finding. An accepted recipe must describe a plan the station can
// run: segments in order, finite, at most 100000 points in all. Single-threaded.
#include <cmath>
#include <cstdint>
#include <string>

#include "daemon/core/recipe_loader.hpp"
#include "tests/fuzz/config_fuzz_support.hpp"

namespace core = echoline::core;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(echoline::fuzz::as_text(data, size));
  core::Recipe recipe;
  const bool loaded = echoline::fuzz::expect_config_error_only(
      [&] { recipe = core::parse_recipe(text, "fuzz-recipe.jsonc"); }, "fuzz-recipe.jsonc");
  if (!loaded) return 0;

  FUZZ_CHECK(!recipe.segments.empty(), "accepted recipe without segments");
  long total = 0;
  for (std::size_t i = 0; i < recipe.segments.size(); ++i) {
    const auto& s = recipe.segments[i];
    FUZZ_CHECK(std::isfinite(s.start_hz) && std::isfinite(s.stop_hz), "segment bound not finite");
    FUZZ_CHECK(s.start_hz <= s.stop_hz, "segment start above stop");
    FUZZ_CHECK(s.points >= 1, "segment without points");
    if (i > 0) FUZZ_CHECK(s.start_hz >= recipe.segments[i - 1].stop_hz, "segments overlap");
    total += s.points;
  }
  FUZZ_CHECK(total <= 100000, "plan larger than the loader's own 100000-point limit");
  const auto freqs = core::plan_frequencies(recipe);
  FUZZ_CHECK(!freqs.empty() && static_cast<long>(freqs.size()) <= total, "plan_frequencies size");
  for (std::size_t i = 0; i < freqs.size(); ++i) {
    FUZZ_CHECK(std::isfinite(freqs[i]) && freqs[i] > 0, "plan frequency not finite and positive");
    if (i > 0) FUZZ_CHECK(freqs[i] > freqs[i - 1], "plan frequencies not strictly increasing");
  }
  FUZZ_CHECK(std::isfinite(recipe.source.power_dbm), "source power not finite");
  FUZZ_CHECK(recipe.receiver.rbw_hz > 0 && std::isfinite(recipe.receiver.rbw_hz), "RBW not positive");
  FUZZ_CHECK(recipe.receiver.averages >= 1, "averages below 1");
  FUZZ_CHECK(recipe.source_path == "fuzz-recipe.jsonc", "source_path not the given name");
  FUZZ_CHECK(recipe.content_hash.size() == 64, "content_hash is not a hex SHA-256");
  return 0;
}
