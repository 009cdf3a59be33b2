// Webhook subscriptions of an organisation (delivery: webhook_delivery.h).
#include "server/hashing.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/routes.h"
#include "server/safe_text.h"
#include "server/service_limits.h"
#include "server/webhook_policy.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

void CreateWebhook(Call& c) {
  const json j = ParseBodyJson(c.body);
  for (const auto& [key, v] : j.items()) {
    if (key != "url" && key != "secret")
      Fail(422, "unprocessable", "$." + Excerpt(key, 64) + ": unknown key (known: url, secret)");
  }
  if (!j.contains("url") || !j["url"].is_string()) Fail(422, "unprocessable", "$.url: required string");
  const std::string url = j["url"].get<std::string>();
  if (url.size() > kMaxWebhookUrlLength) {
    Fail(422, "unprocessable",
         "$.url: " + std::to_string(url.size()) + " bytes; at most " + std::to_string(kMaxWebhookUrlLength));
  }
  WebhookTarget target;
  if (Status s = ResolveWebhookTarget(url, c.options.webhook_policy, &target); !s.ok()) {
    Fail(422, "unprocessable", "$.url = \"" + Excerpt(url) + "\": " + s.message);
  }
  std::vector<storage::Webhook> active;
  Check(c.repo.ListWebhooks(c.who.organisation_id, /*active_only=*/true, &active));
  if (active.size() >= c.options.max_webhooks_per_organisation) {
    Fail(422, "unprocessable",
         "the organisation has " + std::to_string(active.size()) +
             " active webhooks, the limit (delete one first)");
  }
  std::string secret;
  if (j.contains("secret")) {
    if (!j["secret"].is_string() || j["secret"].get<std::string>().empty()) {
      Fail(422, "unprocessable", "$.secret: a non-empty string");
    }
    secret = j["secret"].get<std::string>();
  } else {
    secret = RandomHex(kTokenSecretBytes);  // shown once, in this response
  }
  Id id = 0;
  Check(c.repo.CreateWebhook(c.who.organisation_id, url, secret, c.now_unix_ms, &id));
  SendJson(c.res, 201, {{"id", id}, {"url", url}, {"secret", secret}, {"active", true}});
}

void ListWebhooks(Call& c) {
  std::vector<storage::Webhook> list;
  Check(c.repo.ListWebhooks(c.who.organisation_id, /*active_only=*/false, &list));
  json out = json::array();
  for (const auto& w : list) {
    out.push_back({{"id", w.id},
                   {"url", w.url},
                   {"active", w.active},
                   {"created_at", FormatIsoUtc(w.created_at_unix_ms)}});
  }
  SendJson(c.res, 200, {{"webhooks", out}});
}

void DeleteWebhook(Call& c) {
  Check(c.repo.DeactivateWebhook(c.who.organisation_id, c.ids[0]));
  c.res.status = 204;
}

}  // namespace

void RegisterWebhookRoutes(Router& r) {
  using storage::Role;
  r.Add("POST", "/v1/webhooks", Role::kAdmin, CreateWebhook);
  r.Add("GET", "/v1/webhooks", Role::kAdmin, ListWebhooks);
  r.Add("DELETE", "/v1/webhooks/{id}", Role::kAdmin, DeleteWebhook);
}

}  // namespace taut::server
