// Alerts (raised by the drift checks, drift_alerts.h): list, read,
// acknowledge, resolve, and the webhook delivery log of each.
#include "server/api_json.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/routes.h"
#include "server/safe_text.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

void ListAlerts(Call& c) {
  storage::AlertFilter filter;
  filter.member_id = QueryId(c.req, "member_id");
  if (auto state = Query(c.req, "state")) {
    if (*state == "open") {
      filter.state = storage::AlertState::kOpen;
    } else if (*state == "acknowledged") {
      filter.state = storage::AlertState::kAcknowledged;
    } else if (*state == "resolved") {
      filter.state = storage::AlertState::kResolved;
    } else {
      Fail(400, "bad-request", "state = \"" + Excerpt(*state) + "\": must be open, acknowledged or resolved");
    }
  }
  std::vector<storage::Alert> list;
  Check(c.repo.ListAlerts(c.who.organisation_id, filter, &list));
  json out = json::array();
  for (const auto& a : list) out.push_back(AlertToJson(a));
  SendJson(c.res, 200, {{"alerts", out}});
}

void GetAlert(Call& c) {
  storage::Alert a;
  Check(c.repo.GetAlert(c.who.organisation_id, c.ids[0], &a));
  SendJson(c.res, 200, AlertToJson(a));
}

void AcknowledgeAlert(Call& c) {
  Check(c.repo.AcknowledgeAlert(c.who.organisation_id, c.ids[0], c.now_unix_ms));
  GetAlert(c);
}

void ResolveAlert(Call& c) {
  Check(c.repo.ResolveAlert(c.who.organisation_id, c.ids[0], c.now_unix_ms));
  GetAlert(c);
}

void ListDeliveries(Call& c) {
  storage::Alert a;
  Check(c.repo.GetAlert(c.who.organisation_id, c.ids[0], &a));
  std::vector<storage::DeliveryAttempt> list;
  Check(c.repo.ListDeliveries(c.who.organisation_id, c.ids[0], &list));
  json out = json::array();
  for (const auto& d : list) {
    json j = {{"id", d.id},
              {"webhook_id", d.subscription_id},
              {"attempt", d.attempt},
              {"attempted_at", FormatIsoUtc(d.attempted_at_unix_ms)},
              {"http_status", d.http_status ? json(*d.http_status) : json(nullptr)},
              {"succeeded", d.succeeded},
              {"error", d.error}};
    if (d.next_attempt_at_unix_ms) j["next_attempt_at"] = FormatIsoUtc(*d.next_attempt_at_unix_ms);
    out.push_back(j);
  }
  SendJson(c.res, 200, {{"deliveries", out}});
}

}  // namespace

void RegisterAlertRoutes(Router& r) {
  using storage::Role;
  r.Add("GET", "/v1/alerts", Role::kRead, ListAlerts);
  r.Add("GET", "/v1/alerts/{id}", Role::kRead, GetAlert);
  r.Add("POST", "/v1/alerts/{id}/acknowledge", Role::kUpload, AcknowledgeAlert);
  r.Add("POST", "/v1/alerts/{id}/resolve", Role::kUpload, ResolveAlert);
  r.Add("GET", "/v1/alerts/{id}/deliveries", Role::kRead, ListDeliveries);
}

}  // namespace taut::server
