// CSV exports of the data tables (docs/API.md "CSV exports"), and the
// member's estimates table:
//   GET /v1/members/{id}/force/history?format=csv   read
//   GET /v1/alerts?format=csv                       read  (member_id, state)
//   GET /v1/members/{id}/estimates[?format=csv]     read  (from, to)
//   GET /v1/estimates/{id}?format=csv               read  the modes
// The JSON forms of the first, second and fourth stay in http_api.cpp.
#include <httplib.h>

#include <limits>
#include <nlohmann/json.hpp>

#include "estimation/drift.h"
#include "server/api_json.h"
#include "server/csv_export.h"
#include "server/extra_routes.h"
#include "server/iso_time.h"
#include "server/service_limits.h"

namespace taut::server {

using nlohmann::json;
using storage::Id;

namespace {

std::optional<std::int64_t> QueryTime(const httplib::Request& req, const char* name) {
  if (!req.has_param(name)) return std::nullopt;
  std::int64_t ms = 0;
  if (!ParseIsoUtc(req.get_param_value(name), &ms)) {
    RouteFail(400, "bad-request",
              std::string(name) + ": not an ISO 8601 UTC time (e.g. 2026-11-20T10:00:00Z)");
  }
  return ms;
}

// [from, to) as the JSON history routes take it (default: the last 30 days).
std::pair<std::int64_t, std::int64_t> Window(const RouteCall& c) {
  const std::int64_t to = QueryTime(c.req, "to").value_or(c.now_unix_ms + 1);
  const std::int64_t from = QueryTime(c.req, "from").value_or(to - kDefaultHistoryWindow_ms);
  if (from > to) RouteFail(400, "bad-request", "from is after to");
  return {from, to};
}

std::string Time(const std::optional<std::int64_t>& ms) { return ms ? FormatIsoUtc(*ms) : ""; }

void ForceHistoryCsv(RouteCall& c) {
  storage::Member m;
  RouteCheck(c.repo.GetMember(c.organisation_id, c.ids[0], &m));
  const auto [from, to] = Window(c);
  std::vector<storage::Estimate> rows;
  RouteCheck(c.repo.ForceHistory(c.organisation_id, m.id, from, to, &rows));
  CsvTable t({"estimate_id", "record_id", "measured_at_utc", "temperature_c", "force_n", "force_std_n",
              "force_ci95_low_n", "force_ci95_high_n", "ei_nm2", "ei_std_nm2", "verdict"});
  for (const auto& e : rows) {
    t.Row({CsvInt(e.id), CsvInt(e.record_id), FormatIsoUtc(e.measured_at_unix_ms), CsvNum(e.temperature_c),
           CsvNum(e.axial_force_n), CsvNum(e.force_std_n), CsvNum(e.force_ci95_low_n),
           CsvNum(e.force_ci95_high_n), CsvNum(e.bending_stiffness_nm2), CsvNum(e.bending_stiffness_std_nm2),
           e.verdict_code});
  }
  SendCsv(c.res, "force-history-" + m.external_id + ".csv", t.Text());
}

void AlertsCsv(RouteCall& c) {
  storage::AlertFilter filter;
  if (c.req.has_param("member_id")) {
    const std::string v = c.req.get_param_value("member_id");
    if (v.empty() || v.size() > 18 || v.find_first_not_of("0123456789") != std::string::npos) {
      RouteFail(400, "bad-request", "member_id = \"" + v + "\": not an id");
    }
    filter.member_id = std::stoll(v);
  }
  if (c.req.has_param("state")) {
    const std::string v = c.req.get_param_value("state");
    if (v == "open") {
      filter.state = storage::AlertState::kOpen;
    } else if (v == "acknowledged") {
      filter.state = storage::AlertState::kAcknowledged;
    } else if (v == "resolved") {
      filter.state = storage::AlertState::kResolved;
    } else {
      RouteFail(400, "bad-request", "state = \"" + v + "\": must be open, acknowledged or resolved");
    }
  }
  std::vector<storage::Alert> list;
  RouteCheck(c.repo.ListAlerts(c.organisation_id, filter, &list));
  std::map<Id, std::string> names;
  CsvTable t({"alert_id", "member_id", "member", "rule", "tier", "state", "raised_at_utc",
              "acknowledged_at_utc", "resolved_at_utc", "estimate_id", "message"});
  for (const auto& a : list) {
    if (!names.count(a.member_id)) {
      storage::Member m;
      names[a.member_id] = c.repo.GetMember(c.organisation_id, a.member_id, &m).ok() ? m.external_id : "";
    }
    t.Row({CsvInt(a.id), CsvInt(a.member_id), names[a.member_id], a.rule, estimation::RuleTier(a.rule),
           storage::AlertStateName(a.state), FormatIsoUtc(a.raised_at_unix_ms),
           Time(a.acknowledged_at_unix_ms), Time(a.resolved_at_unix_ms),
           a.estimate_id ? CsvInt(*a.estimate_id) : "", a.message});
  }
  SendCsv(c.res, "alerts.csv", t.Text());
}

// Stored quantity {"value", "ci95"} of an end fixity: value, low, high.
std::vector<std::string> FixityFields(const json& side) {
  if (!side.is_object()) return {"", "", ""};
  const auto num = [](const json& v) { return v.is_number() ? CsvNum(v.get<double>()) : std::string(); };
  const json ci = side.value("ci95", json());
  return {num(side.value("value", json())), ci.is_array() && ci.size() == 2 ? num(ci[0]) : "",
          ci.is_array() && ci.size() == 2 ? num(ci[1]) : ""};
}

void MemberEstimates(RouteCall& c) {
  storage::Member m;
  RouteCheck(c.repo.GetMember(c.organisation_id, c.ids[0], &m));
  const auto [from, to] = Window(c);
  std::vector<storage::Estimate> rows;
  RouteCheck(c.repo.ForceHistory(c.organisation_id, m.id, from, to, &rows));
  std::vector<storage::Repository::FixityRow> fixity;  // same rows and order
  RouteCheck(c.repo.FixityHistory(c.organisation_id, m.id, from, to, &fixity));
  const auto sides = [&](std::size_t i) {
    json v = i < fixity.size() && !fixity[i].end_fixity_json.empty() ? StoredJson(fixity[i].end_fixity_json)
                                                                     : json();
    return v.is_object() ? v : json::object();
  };
  if (WantsCsv(c.req)) {
    CsvTable t({"estimate_id", "measured_at_utc", "temperature_c", "force_n", "force_ci95_low_n",
                "force_ci95_high_n", "ei_nm2", "ei_std_nm2", "fixity_left", "fixity_left_ci95_low",
                "fixity_left_ci95_high", "fixity_right", "fixity_right_ci95_low", "fixity_right_ci95_high",
                "verdict"});
    for (std::size_t i = 0; i < rows.size(); ++i) {
      const auto& e = rows[i];
      const json f = sides(i);
      std::vector<std::string> r = {CsvInt(e.id),
                                    FormatIsoUtc(e.measured_at_unix_ms),
                                    CsvNum(e.temperature_c),
                                    CsvNum(e.axial_force_n),
                                    CsvNum(e.force_ci95_low_n),
                                    CsvNum(e.force_ci95_high_n),
                                    CsvNum(e.bending_stiffness_nm2),
                                    CsvNum(e.bending_stiffness_std_nm2)};
      for (const char* side : {"left", "right"}) {
        for (auto& x : FixityFields(f.value(side, json()))) r.push_back(std::move(x));
      }
      r.push_back(e.verdict_code);
      t.Row(r);
    }
    return SendCsv(c.res, "estimates-" + m.external_id + ".csv", t.Text());
  }
  json out = json::array();
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const auto& e = rows[i];
    const json f = sides(i);
    out.push_back(
        {{"estimate_id", e.id},
         {"measured_at", FormatIsoUtc(e.measured_at_unix_ms)},
         {"temperature_c", e.temperature_c ? json(*e.temperature_c) : json(nullptr)},
         {"axial_force_n", e.axial_force_n},
         {"ci95_n", {e.force_ci95_low_n, e.force_ci95_high_n}},
         {"bending_stiffness_nm2", e.bending_stiffness_nm2 ? json(*e.bending_stiffness_nm2) : json(nullptr)},
         {"bending_stiffness_std_nm2",
          e.bending_stiffness_std_nm2 ? json(*e.bending_stiffness_std_nm2) : json(nullptr)},
         {"end_fixity", f},
         {"verdict", e.verdict_code.empty() ? json(nullptr) : json(e.verdict_code)}});
  }
  SendJsonBody(
      c.res, 200,
      json{{"member_id", m.id}, {"from", FormatIsoUtc(from)}, {"to", FormatIsoUtc(to)}, {"estimates", out}}
          .dump());
}

void EstimateModesCsv(RouteCall& c) {
  storage::Estimate e;
  RouteCheck(c.repo.GetEstimate(c.organisation_id, c.ids[0], &e));
  const json result = StoredJson(e.result_json);
  CsvTable t({"estimate_id", "order", "paired", "frequency_hz", "frequency_std_hz", "model_frequency_hz",
              "mac", "damping_ratio"});
  const auto num = [](const json& m, const char* k) {
    return m.contains(k) && m[k].is_number() ? CsvNum(m[k].get<double>()) : std::string();
  };
  for (const char* list : {"modes", "unpaired_modes"}) {
    if (!result.is_object() || !result.contains(list) || !result[list].is_array()) continue;
    for (const json& m : result[list]) {
      if (!m.is_object()) continue;
      t.Row({CsvInt(e.id),
             m.contains("order") && m["order"].is_number_integer() ? CsvInt(m["order"].get<int>()) : "",
             std::string(list) == "modes" ? "true" : "false", num(m, "frequency_hz"),
             num(m, "frequency_std_hz"), num(m, "model_frequency_hz"), num(m, "mac"),
             num(m, "damping_ratio")});
    }
  }
  SendCsv(c.res, "estimate-" + std::to_string(e.id) + "-modes.csv", t.Text());
}

}  // namespace

std::vector<ExtraRoute> CsvRoutes() {
  using storage::Role;
  return {
      {"GET", "/v1/members/{id}/force/history", Role::kRead, ForceHistoryCsv, WantsCsv},
      {"GET", "/v1/alerts", Role::kRead, AlertsCsv, WantsCsv},
      {"GET", "/v1/members/{id}/estimates", Role::kRead, MemberEstimates, {}},
      {"GET", "/v1/estimates/{id}", Role::kRead, EstimateModesCsv, WantsCsv},
  };
}

}  // namespace taut::server
