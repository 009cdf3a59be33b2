// Estimates, the force of a member (latest and history) and the dashboard's
// chart data (computed in dashboard_data.h). The portfolio of a structure is
// served by routes_triage.cpp.
#include <cmath>
#include <limits>

#include "server/alert_rules.h"
#include "server/api_json.h"
#include "server/dashboard_data.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/routes.h"
#include "server/row_json.h"
#include "server/service_limits.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

void GetEstimate(Call& c) {
  storage::Estimate e;
  Check(c.repo.GetEstimate(c.who.organisation_id, c.ids[0], &e));
  SendJson(c.res, 200, EstimateJson(e));
}

void LatestForce(Call& c) {
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  storage::Estimate e;
  Check(c.repo.LatestEstimate(c.who.organisation_id, c.ids[0], &e));
  SendJson(c.res, 200, EstimateJson(e));
}

// [from, to) of a history query: default the last 30 days.
std::pair<std::int64_t, std::int64_t> HistoryWindow(const Call& c) {
  const std::int64_t to = QueryTime(c.req, "to").value_or(c.now_unix_ms + 1);
  const std::int64_t from = QueryTime(c.req, "from").value_or(to - kDefaultHistoryWindow_ms);
  if (from > to) Fail(400, "bad-request", "from is after to");
  return {from, to};
}

// A member's history in the query's window: `read(member, from, to,
// &rows)` fetches the rows (a storage range query), `point(row)` makes
// one JSON point of each.
template <typename Row, typename ReadFn, typename PointFn>
void SendHistory(Call& c, ReadFn read, PointFn point) {
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  const auto [from, to] = HistoryWindow(c);
  std::vector<Row> rows;
  Check(read(m.id, from, to, &rows));
  json points = json::array();
  for (const auto& r : rows) points.push_back(point(r));
  SendJson(c.res, 200,
           {{"member_id", m.id},
            {"from", FormatIsoUtc(from)},
            {"to", FormatIsoUtc(to)},
            {"truncated", rows.size() >= storage::kMaxHistoryRows},
            {"points", points}});
}

void ForceHistory(Call& c) {
  SendHistory<storage::Estimate>(
      c,
      [&](Id m, std::int64_t from, std::int64_t to, auto* rows) {
        return c.repo.ForceHistory(c.who.organisation_id, m, from, to, rows);
      },
      HistoryPointJson);
}

// The end fixities of the stored results (dashboard_data.h).
void FixityHistory(Call& c) {
  SendHistory<storage::Repository::FixityRow>(
      c,
      [&](Id m, std::int64_t from, std::int64_t to, auto* rows) {
        return c.repo.FixityHistory(c.who.organisation_id, m, from, to, rows);
      },
      [](const storage::Repository::FixityRow& r) { return FixityPointJson(r); });
}

void EstimateSpectrum(Call& c) {
  storage::Estimate e;
  Check(c.repo.GetEstimate(c.who.organisation_id, c.ids[0], &e));
  storage::Record r;
  Check(c.repo.GetRecord(c.who.organisation_id, e.record_id, &r));
  const double points = QueryNumber(c.req, "max_points").value_or(kDefaultSpectrumPoints);
  if (points != std::floor(points) || points < kMinSpectrumPoints || points > kMaxSpectrumPoints) {
    Fail(400, "bad-request",
         "max_points must be an integer in " + std::to_string(kMinSpectrumPoints) + ".." +
             std::to_string(kMaxSpectrumPoints));
  }
  json out;
  if (Status s = EstimateSpectrumJson(e, r, static_cast<int>(points), &out); !s.ok())
    Fail(422, "unprocessable", s.message);
  SendJson(c.res, 200, out);
}

void EstimateModelShapes(Call& c) {
  storage::Estimate e;
  Check(c.repo.GetEstimate(c.who.organisation_id, c.ids[0], &e));
  storage::Member version;
  Check(c.repo.GetMemberVersion(c.who.organisation_id, e.member_id, e.member_version, &version));
  json out;
  if (Status s = ModelShapesJson(e, StoredDescription(version), &out); !s.ok())
    Fail(422, "unprocessable", s.message);
  SendJson(c.res, 200, out);
}

void MemberDrift(Call& c) {
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  const model::Member member = StoredDescription(m);
  const auto [from, to] = HistoryWindow(c);
  std::string text;
  const StorageStatus st = c.repo.GetDriftSettings(c.who.organisation_id, m.id, &text);
  if (!st.ok() && !st.not_found()) Check(st);
  estimation::DriftSettings settings;
  if (Status s = EffectiveDriftSettings(member, st.ok() ? &text : nullptr, member.MajorityPlane(), &settings);
      !s.ok()) {
    Fail(500, "internal", "stored drift settings of member " + std::to_string(m.id) + ": " + s.message);
  }
  Check(ApplyLogbookBaseline(c.repo, c.who.organisation_id, m.id, &settings));
  std::vector<storage::Estimate> all;  // the rules run over the whole series, as the workers do
  Check(c.repo.ForceHistory(c.who.organisation_id, m.id, std::numeric_limits<std::int64_t>::min(),
                            std::numeric_limits<std::int64_t>::max(), &all));
  json out;
  if (Status s = MemberDriftJson(member, settings, DriftSettingsBody(c, m), all, from, to, &out); !s.ok())
    Fail(500, "internal", "drift of member " + std::to_string(m.id) + ": " + s.message);
  out["member_id"] = m.id;
  SendJson(c.res, 200, out);
}

}  // namespace

void RegisterEstimateRoutes(Router& r) {
  using storage::Role;
  r.Add("GET", "/v1/members/{id}/force", Role::kRead, LatestForce);
  r.Add("GET", "/v1/members/{id}/force/history", Role::kRead, ForceHistory);
  r.Add("GET", "/v1/estimates/{id}", Role::kRead, GetEstimate);
  // The dashboard's data (docs/API.md "Dashboard").
  r.Add("GET", "/v1/estimates/{id}/spectrum", Role::kRead, EstimateSpectrum);
  r.Add("GET", "/v1/estimates/{id}/model-shapes", Role::kRead, EstimateModelShapes);
  r.Add("GET", "/v1/members/{id}/drift", Role::kRead, MemberDrift);
  r.Add("GET", "/v1/members/{id}/fixity/history", Role::kRead, FixityHistory);
}

}  // namespace taut::server
