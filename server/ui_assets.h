// The dashboard's static files (server/ui/), embedded in the executable at
// build time (server/ui_assets.cmake writes ui_assets_data.cpp from them),
// so `taut serve` needs no file next to it and serves exactly the files it
// was built with.
#pragma once

#include <string_view>

namespace taut::server {

struct UiAsset {
  std::string_view path;          // relative to server/ui/, e.g. "index.html", "js/app.js"
  std::string_view content_type;  // from the file name's extension
  std::string_view body;          // the file's bytes (static storage)
  std::string_view etag;          // "\"<first 16 hex digits of the SHA-256 of body>\""
};

// The asset at `path` (relative, no leading '/'), or nullptr.
const UiAsset* FindUiAsset(std::string_view path);

}  // namespace taut::server
