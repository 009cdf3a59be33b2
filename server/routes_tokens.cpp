// API tokens of the caller's organisation (admin): list and revoke. Tokens
// are issued by `taut token create` (the plain token is shown once); the
// list shows what identifies a token, never its secret or hash.
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/routes.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;

json TokenJson(const storage::Token& t) {
  return {{"id", t.id},
          {"public_id", t.public_id},
          {"role", storage::RoleName(t.role)},
          {"label", t.label},
          {"created_at", FormatIsoUtc(t.created_at_unix_ms)},
          {"revoked_at", t.revoked_at_unix_ms ? json(FormatIsoUtc(*t.revoked_at_unix_ms)) : json(nullptr)}};
}

void ListTokens(Call& c) {
  std::vector<storage::Token> list;
  Check(c.repo.ListTokens(c.who.organisation_id, &list));
  json out = json::array();
  for (const auto& t : list) out.push_back(TokenJson(t));
  SendJson(c.res, 200, {{"tokens", out}});
}

// Revokes at once: the next request with the token is 401. Revoking the
// token of this very request is allowed (the admin locks themself out).
void RevokeToken(Call& c) {
  Check(c.repo.RevokeToken(c.who.organisation_id, c.ids[0], c.now_unix_ms));
  c.res.status = 204;
}

}  // namespace

void RegisterTokenRoutes(Router& r) {
  r.Add("GET", "/v1/tokens", storage::Role::kAdmin, ListTokens);
  r.Add("DELETE", "/v1/tokens/{id}", storage::Role::kAdmin, RevokeToken);
}

}  // namespace taut::server
