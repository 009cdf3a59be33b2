// Members (versioned descriptions, docs/FORMATS.md section 1) and their drift
// settings.
#include "estimation/drift.h"
#include "server/api_json.h"
#include "server/http_router.h"
#include "server/member_json.h"
#include "server/routes.h"
#include "server/row_json.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

model::Member StoredDescription(const storage::Member& m) {
  model::Member member;
  if (Status s = ParseMember(m.description_json, &member, kStoredMember); !s.ok()) {
    Fail(500, "internal", "stored description of member " + std::to_string(m.id) + ": " + s.message);
  }
  return member;
}

// Drift settings of a member: the stored ones over the defaults, and the
// values taken from its description (design force, nominal EI).
json DriftSettingsBody(Call& c, const storage::Member& m) {
  estimation::DriftSettings settings;
  std::string text;
  StorageStatus st = c.repo.GetDriftSettings(c.who.organisation_id, m.id, &text);
  if (!st.ok() && !st.not_found()) Check(st);
  const bool stored = st.ok();
  if (stored) {
    if (Status s = DriftSettingsFromJson(StoredJson(text), &settings); !s.ok()) {
      Fail(500, "internal", "stored drift settings of member " + std::to_string(m.id) + ": " + s.message);
    }
  }
  json j = DriftSettingsToJson(settings);
  j["defaults"] = !stored;
  return j;
}

namespace {

// Validates a member description body (docs/FORMATS.md section 1, id required).
model::Member ParseMemberBody(const std::string& body) {
  model::Member member;
  if (Status s = ParseMember(body, &member, MemberReadOptions{.require_id = true, .require_sensors = true});
      !s.ok()) {
    Fail(422, "unprocessable", s.message);
  }
  return member;
}

void CreateMember(Call& c) {
  const model::Member member = ParseMemberBody(c.body);
  Id id = 0;
  Check(c.repo.CreateMember(c.who.organisation_id, c.ids[0], member.id, c.body, c.now_unix_ms, &id));
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, id, &m));
  SendJson(c.res, 201, MemberJson(m));
}

void ListMembers(Call& c) {
  storage::Structure s;
  Check(c.repo.GetStructure(c.who.organisation_id, c.ids[0], &s));
  std::vector<storage::Member> list;
  Check(c.repo.ListMembers(c.who.organisation_id, c.ids[0], &list));
  json out = json::array();
  for (const auto& m : list) out.push_back(MemberJson(m));
  SendJson(c.res, 200, {{"members", out}});
}

void GetMember(Call& c) {
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  SendJson(c.res, 200, MemberJson(m));
}

void GetMemberVersion(Call& c) {
  storage::Member m;
  Check(c.repo.GetMemberVersion(c.who.organisation_id, c.ids[0], c.ids[1], &m));
  SendJson(c.res, 200, MemberJson(m));
}

void UpdateMember(Call& c) {
  storage::Member current;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &current));
  const model::Member member = ParseMemberBody(c.body);
  if (member.id != current.external_id) {
    Fail(422, "unprocessable",
         "$.id = \"" + member.id + "\": a member keeps its id (\"" + current.external_id + "\")");
  }
  std::int64_t version = 0;
  Check(c.repo.UpdateMember(c.who.organisation_id, c.ids[0], c.body, c.now_unix_ms, &version));
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  SendJson(c.res, 200, MemberJson(m));
}

void DeleteMember(Call& c) {
  Check(c.repo.DeleteMember(c.who.organisation_id, c.ids[0], c.now_unix_ms));
  c.res.status = 204;
}

void GetDriftSettings(Call& c) {
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  SendJson(c.res, 200, DriftSettingsBody(c, m));
}

void PutDriftSettings(Call& c) {
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  estimation::DriftSettings settings;  // a PUT replaces: absent keys take the defaults
  if (Status s = DriftSettingsFromJson(ParseBodyJson(c.body), &settings); !s.ok()) {
    Fail(422, "unprocessable", s.message);
  }
  Check(c.repo.SetDriftSettings(c.who.organisation_id, m.id, DriftSettingsToJson(settings).dump(),
                                c.now_unix_ms));
  SendJson(c.res, 200, DriftSettingsBody(c, m));
}

}  // namespace

void RegisterMemberRoutes(Router& r) {
  using storage::Role;
  r.Add("POST", "/v1/structures/{id}/members", Role::kAdmin, CreateMember);
  r.Add("GET", "/v1/structures/{id}/members", Role::kRead, ListMembers);
  r.Add("GET", "/v1/members/{id}", Role::kRead, GetMember);
  r.Add("PUT", "/v1/members/{id}", Role::kAdmin, UpdateMember);
  r.Add("DELETE", "/v1/members/{id}", Role::kAdmin, DeleteMember);
  r.Add("GET", "/v1/members/{id}/drift-settings", Role::kRead, GetDriftSettings);
  r.Add("PUT", "/v1/members/{id}/drift-settings", Role::kAdmin, PutDriftSettings);
  r.Add("GET", "/v1/members/{id}/versions/{version}", Role::kRead, GetMemberVersion);
}

}  // namespace taut::server
