// Structures: create, list, read, delete.
#include "server/http_router.h"
#include "server/routes.h"
#include "server/row_json.h"
#include "server/safe_text.h"
#include "server/service_limits.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

void CreateStructure(Call& c) {
  const json j = ParseBodyJson(c.body);
  for (const auto& [key, v] : j.items()) {
    if (key != "name" && key != "description") {
      Fail(422, "unprocessable", "$." + Excerpt(key, 64) + ": unknown key (known: name, description)");
    }
  }
  if (!j.contains("name") || !j["name"].is_string()) Fail(422, "unprocessable", "$.name: required string");
  const std::string name = j["name"].get<std::string>();
  if (name.empty() || name.size() > kMaxStructureNameLength) {
    Fail(422, "unprocessable",
         "$.name: " + std::to_string(name.size()) + " bytes; must be 1.." +
             std::to_string(kMaxStructureNameLength));
  }
  std::string description;
  if (j.contains("description")) {
    if (!j["description"].is_string()) Fail(422, "unprocessable", "$.description: must be a string");
    description = j["description"].get<std::string>();
    if (description.size() > kMaxStructureDescriptionLength) {
      Fail(422, "unprocessable",
           "$.description: " + std::to_string(description.size()) + " bytes; at most " +
               std::to_string(kMaxStructureDescriptionLength));
    }
  }
  Id id = 0;
  Check(c.repo.CreateStructure(c.who.organisation_id, name, description, c.now_unix_ms, &id));
  storage::Structure s;
  Check(c.repo.GetStructure(c.who.organisation_id, id, &s));
  SendJson(c.res, 201, StructureJson(s));
}

void ListStructures(Call& c) {
  std::vector<storage::Structure> list;
  Check(c.repo.ListStructures(c.who.organisation_id, &list));
  json out = json::array();
  for (const auto& s : list) out.push_back(StructureJson(s));
  SendJson(c.res, 200, {{"structures", out}});
}

void GetStructure(Call& c) {
  storage::Structure s;
  Check(c.repo.GetStructure(c.who.organisation_id, c.ids[0], &s));
  SendJson(c.res, 200, StructureJson(s));
}

void DeleteStructure(Call& c) {
  Check(c.repo.DeleteStructure(c.who.organisation_id, c.ids[0], c.now_unix_ms));
  c.res.status = 204;
}

}  // namespace

void RegisterStructureRoutes(Router& r) {
  using storage::Role;
  r.Add("POST", "/v1/structures", Role::kAdmin, CreateStructure);
  r.Add("GET", "/v1/structures", Role::kRead, ListStructures);
  r.Add("GET", "/v1/structures/{id}", Role::kRead, GetStructure);
  r.Add("DELETE", "/v1/structures/{id}", Role::kAdmin, DeleteStructure);
}

}  // namespace taut::server
