// Fuzz target for instrument profiles: the JSON-with-comments reader (drivers/jsonc.hpp, from
// text) and the profile loader (drivers/profile.hpp, which reads a file: the input is written to
// a scratch file first). drivers::ConfigError naming the file is the expected outcome for bad
// input; anything else (crash, another exception type, a hang) is a finding. Single-threaded.
#include <cmath>
#include <cstdint>
#include <string>

#include "drivers/jsonc.hpp"
#include "drivers/profile.hpp"
#include "tests/fuzz/config_fuzz_support.hpp"

namespace drivers = echoline::drivers;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text = echoline::fuzz::as_text(data, size);

  // The reader alone: any parsed document knows a line for its root and for each top-level key.
  echoline::fuzz::expect_config_error_only(
      [&] {
        auto doc = drivers::JsoncDocument::parse(std::string(text), "fuzz-text.jsonc");
        FUZZ_CHECK(doc.line_of(drivers::JsonPointer("")) >= 1, "root without a line");
        if (doc.root().is_object()) {
          for (const auto& [key, value] : doc.root().items()) {
            drivers::JsonPointer at = drivers::JsonPointer("") / key;
            const int line = doc.line_of(at);
            FUZZ_CHECK(line >= 1, "key without a line: " + key);
            (void)value;
          }
        }
      },
      "fuzz-text.jsonc");

  const auto path = echoline::fuzz::write_scratch("fuzz-profile.jsonc", text);
  drivers::Profile profile;
  const bool loaded =
      echoline::fuzz::expect_config_error_only([&] { profile = drivers::load_profile(path); }, "fuzz-profile.jsonc");
  if (!loaded) return 0;
  FUZZ_CHECK(profile.role == "source" || profile.role == "receiver" || profile.role == "switch",
             "accepted profile with role " + profile.role);
  FUZZ_CHECK(profile.io.timeout.count() > 0, "accepted profile with a non-positive timeout");
  FUZZ_CHECK(profile.min_frequency_hz <= profile.max_frequency_hz, "frequency range reversed");
  FUZZ_CHECK(std::isfinite(profile.max_safe_input_dbm), "max safe input not finite");
  return 0;
}
