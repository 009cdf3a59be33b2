// The member rows of server/triage.h over HTTP:
//   GET /v1/structures/{id}/portfolio[?format=csv]   read  one structure
//   GET /v1/triage[?structure_id=&format=csv]         read  every member of
//                                                       every structure, worst first
#include <httplib.h>

#include <nlohmann/json.hpp>

#include "server/csv_export.h"
#include "server/extra_routes.h"
#include "server/iso_time.h"
#include "server/triage.h"

namespace taut::server {

using nlohmann::json;
using storage::Id;

namespace {

json StructureBrief(const storage::Structure& s) {
  return {{"id", s.id},
          {"name", s.name},
          {"description", s.description},
          {"created_at", FormatIsoUtc(s.created_at_unix_ms)}};
}

std::vector<json> Rows(RouteCall& c, const storage::Structure& s) {
  std::vector<storage::Member> members;
  RouteCheck(c.repo.ListMembers(c.organisation_id, s.id, &members));
  std::vector<json> rows;
  for (const auto& m : members) {
    json row;
    RouteCheck(MemberRowJson(c.repo, c.organisation_id, m, &row));
    row["structure_name"] = s.name;
    rows.push_back(std::move(row));
  }
  return rows;
}

void SendRows(RouteCall& c, const std::vector<json>& rows, const std::string& filename, json head) {
  if (WantsCsv(c.req)) {
    CsvTable t(MemberRowCsvHeader());
    for (const json& r : rows) t.Row(MemberRowCsv(r, r["structure_name"].get<std::string>()));
    return SendCsv(c.res, filename, t.Text());
  }
  head["members"] = rows;
  SendJsonBody(c.res, 200, head.dump());
}

void Portfolio(RouteCall& c) {
  storage::Structure s;
  RouteCheck(c.repo.GetStructure(c.organisation_id, c.ids[0], &s));
  SendRows(c, Rows(c, s), "portfolio-" + std::to_string(s.id) + ".csv", {{"structure", StructureBrief(s)}});
}

void Triage(RouteCall& c) {
  std::vector<storage::Structure> structures;
  RouteCheck(c.repo.ListStructures(c.organisation_id, &structures));
  std::optional<Id> only;
  if (c.req.has_param("structure_id")) {
    const std::string v = c.req.get_param_value("structure_id");
    if (v.empty() || v.size() > 18 || v.find_first_not_of("0123456789") != std::string::npos) {
      RouteFail(400, "bad-request", "structure_id = \"" + v + "\": not an id");
    }
    only = std::stoll(v);
  }
  std::vector<json> rows;
  json list = json::array();
  for (const auto& s : structures) {
    list.push_back({{"id", s.id}, {"name", s.name}});
    if (only && s.id != *only) continue;
    for (auto& r : Rows(c, s)) rows.push_back(std::move(r));
  }
  SortWorstFirst(&rows);
  SendRows(c, rows, "triage.csv",
           {{"generated_at", FormatIsoUtc(c.now_unix_ms)},
            {"structures", list},
            {"order",
             "open alerts of tier alert, then of tier watch, then the top of the force-ratio interval "
             "(lowest first)"}});
}

}  // namespace

std::vector<ExtraRoute> TriageRoutes() {
  using storage::Role;
  return {
      {"GET", "/v1/structures/{id}/portfolio", Role::kRead, Portfolio, {}},
      {"GET", "/v1/triage", Role::kRead, Triage, {}},
  };
}

}  // namespace taut::server
