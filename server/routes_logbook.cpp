// The member logbook over HTTP (docs/API.md "Member logbook"):
//   GET    /v1/members/{id}/logbook   read    entries [?from&to] (?format=csv)
//   POST   /v1/members/{id}/logbook   upload  a new entry
//   GET    /v1/logbook/{id}           read    one entry
//   DELETE /v1/logbook/{id}           admin   removes an entry
// An entry with "new_baseline": true restarts the member's drift baseline
// at its time (server/alert_rules.h); the drift route and the workers read
// it from then on.
#include <httplib.h>

#include <limits>
#include <nlohmann/json.hpp>

#include "server/csv_export.h"
#include "server/extra_routes.h"
#include "server/iso_time.h"
#include "server/json_limits.h"
#include "server/logbook_json.h"
#include "storage/logbook.h"

namespace taut::server {

using nlohmann::json;
using storage::Id;

json LogEntryJson(const storage::LogEntry& e) {
  return {{"id", e.id},
          {"member_id", e.member_id},
          {"kind", e.kind},
          {"note", e.note},
          {"author", e.author},
          {"occurred_at", FormatIsoUtc(e.occurred_at_unix_ms)},
          {"new_baseline", e.new_baseline},
          {"created_at", FormatIsoUtc(e.created_at_unix_ms)}};
}

namespace {

std::int64_t QueryTimeOr(const httplib::Request& req, const char* name, std::int64_t fallback) {
  if (!req.has_param(name)) return fallback;
  std::int64_t ms = 0;
  if (!ParseIsoUtc(req.get_param_value(name), &ms)) {
    RouteFail(400, "bad-request",
              std::string(name) + ": not an ISO 8601 UTC time (e.g. 2026-11-20T10:00:00Z)");
  }
  return ms;
}

void ListEntries(RouteCall& c) {
  storage::Member m;
  RouteCheck(c.repo.GetMember(c.organisation_id, c.ids[0], &m));
  const std::int64_t from = QueryTimeOr(c.req, "from", std::numeric_limits<std::int64_t>::min());
  const std::int64_t to = QueryTimeOr(c.req, "to", std::numeric_limits<std::int64_t>::max());
  std::vector<storage::LogEntry> list;
  storage::Logbook logbook(c.repo.database());
  RouteCheck(logbook.List(c.organisation_id, m.id, from, to, &list));
  if (WantsCsv(c.req)) {
    CsvTable t(
        {"entry_id", "member_id", "member", "occurred_at_utc", "kind", "new_baseline", "author", "note"});
    for (const auto& e : list) {
      t.Row({CsvInt(e.id), CsvInt(m.id), m.external_id, FormatIsoUtc(e.occurred_at_unix_ms), e.kind,
             e.new_baseline ? "true" : "false", e.author, e.note});
    }
    return SendCsv(c.res, "logbook-" + m.external_id + ".csv", t.Text());
  }
  json out = json::array();
  for (const auto& e : list) out.push_back(LogEntryJson(e));
  SendJsonBody(c.res, 200, json{{"member_id", m.id}, {"entries", out}}.dump());
}

void AddEntry(RouteCall& c) {
  storage::Member m;
  RouteCheck(c.repo.GetMember(c.organisation_id, c.ids[0], &m));
  json j;
  if (Status s = ParseJsonBounded(c.body, &j); !s.ok()) RouteFail(400, "bad-request", s.message);
  if (!j.is_object()) RouteFail(400, "bad-request", "the body must be a JSON object");
  storage::NewLogEntry e;
  e.member_id = m.id;
  e.occurred_at_unix_ms = c.now_unix_ms;
  for (const auto& [key, v] : j.items()) {
    if (key == "kind" || key == "note" || key == "author") {
      if (!v.is_string()) RouteFail(422, "unprocessable", "$." + key + ": must be a string");
      (key == "kind" ? e.kind : key == "note" ? e.note : e.author) = v.get<std::string>();
    } else if (key == "occurred_at") {
      if (!v.is_string() || !ParseIsoUtc(v.get<std::string>(), &e.occurred_at_unix_ms)) {
        RouteFail(422, "unprocessable", "$.occurred_at: must be an ISO 8601 UTC time");
      }
    } else if (key == "new_baseline") {
      if (!v.is_boolean()) RouteFail(422, "unprocessable", "$.new_baseline: must be true or false");
      e.new_baseline = v.get<bool>();
    } else {
      RouteFail(422, "unprocessable",
                "$." + key + ": unknown key (known: kind, note, author, occurred_at, new_baseline)");
    }
  }
  if (!storage::IsLogKind(e.kind)) {
    RouteFail(422, "unprocessable",
              "$.kind: required, one of re-tensioned, sensor-replaced, repaired, inspected, other");
  }
  if (e.author.empty()) RouteFail(422, "unprocessable", "$.author: required, the name of who did it");
  if (e.occurred_at_unix_ms > c.now_unix_ms + 60'000) {
    RouteFail(422, "unprocessable", "$.occurred_at: in the future");
  }
  storage::Logbook logbook(c.repo.database());
  Id id = 0;
  RouteCheck(logbook.Add(c.organisation_id, e, c.now_unix_ms, &id));
  storage::LogEntry stored;
  RouteCheck(logbook.Get(c.organisation_id, id, &stored));
  SendJsonBody(c.res, 201, LogEntryJson(stored).dump());
}

void GetEntry(RouteCall& c) {
  storage::Logbook logbook(c.repo.database());
  storage::LogEntry e;
  RouteCheck(logbook.Get(c.organisation_id, c.ids[0], &e));
  SendJsonBody(c.res, 200, LogEntryJson(e).dump());
}

void DeleteEntry(RouteCall& c) {
  storage::Logbook logbook(c.repo.database());
  RouteCheck(logbook.Delete(c.organisation_id, c.ids[0]));
  c.res.status = 204;
}

}  // namespace

std::vector<ExtraRoute> LogbookRoutes() {
  using storage::Role;
  return {
      {"GET", "/v1/members/{id}/logbook", Role::kRead, ListEntries, {}},
      {"POST", "/v1/members/{id}/logbook", Role::kUpload, AddEntry, {}},
      {"GET", "/v1/logbook/{id}", Role::kRead, GetEntry, {}},
      {"DELETE", "/v1/logbook/{id}", Role::kAdmin, DeleteEntry, {}},
  };
}

}  // namespace taut::server
