// The dashboard's static files (server/ui/, embedded at build time). They
// need no token: they hold no data, and every call they make does.
#include "server/http_router.h"
#include "server/routes.h"
#include "server/ui_assets.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

void UiRedirect(Call& c) {
  c.res.status = 302;
  c.res.set_header("Location", "/ui/");
}

// server/ui/ as embedded at build time. Revalidated on every load
// (no-cache + ETag) so a new build is picked up at once; the policy
// allows scripts, styles and connections to this origin only.
void UiFile(Call& c) {
  if (c.req.path == "/ui") {
    c.res.status = 301;
    c.res.set_header("Location", "/ui/");
    return;
  }
  std::string rel = c.req.path.substr(4);  // after "/ui/"
  if (rel.empty()) rel = "index.html";
  const UiAsset* asset = FindUiAsset(rel);
  if (!asset) Fail(404, "not-found", "no dashboard file " + c.req.path);
  c.res.set_header("ETag", std::string(asset->etag));
  c.res.set_header("Cache-Control", "no-cache");
  c.res.set_header("X-Content-Type-Options", "nosniff");
  c.res.set_header("Referrer-Policy", "no-referrer");
  c.res.set_header("Content-Security-Policy",
                   "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
                   "connect-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'");
  if (c.req.get_header_value("If-None-Match") == asset->etag) {
    c.res.status = 304;
    return;
  }
  SendUncompressed(c.res, 200, std::string(asset->body), std::string(asset->content_type).c_str());
}

}  // namespace

void RegisterUiRoutes(Router& r) {
  r.Add("GET", "/", storage::Role::kRead, UiRedirect, /*auth=*/false);
  r.Add("GET", "/ui/**", storage::Role::kRead, UiFile, /*auth=*/false);
}

}  // namespace taut::server
