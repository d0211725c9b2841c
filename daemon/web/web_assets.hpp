// The pages' files, compiled into the binary from daemon/web/assets/ at build time
// (embed_assets.cmake): nothing is read from disk or fetched at run time. Thread-safe.
#pragma once

#include <string_view>

namespace echoline::web {

struct Asset {
  std::string_view name;         // file name under daemon/web/assets/, e.g. "operator.js"
  std::string_view media_type;   // from the extension
  std::string_view body;
};

// The asset with this file name, or nullptr.
const Asset* find_asset(std::string_view name);

}  // namespace echoline::web
