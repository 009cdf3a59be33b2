#include "server/triage.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "estimation/drift.h"
#include "model/modal.h"
#include "server/api_json.h"
#include "server/csv_export.h"
#include "server/iso_time.h"
#include "server/member_json.h"

namespace taut::server {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

namespace {

bool Usable(const storage::Estimate& e) { return e.verdict_code != "unusable"; }

// One standard deviation of a stored estimate's force: the stored std, or
// the half-width of its 95 % interval over z_0.975.
double ForceStd(const storage::Estimate& e) {
  if (e.force_std_n) return *e.force_std_n;
  return (e.force_ci95_high_n - e.force_ci95_low_n) / (2 * estimation::kZ975);
}

json Num(const std::optional<double>& v) { return v && std::isfinite(*v) ? json(*v) : json(nullptr); }

// Phi^-1(1 - 0.05 / (2 k)), k = 1..3 (scipy.stats.norm.ppf; see triage.h).
constexpr double kBonferroniZ[] = {1.959963984540054, 2.241402727604947, 2.3939797998185104};

struct Bound {
  double value, lo, hi;
  bool free;
};

// value and +- std of a stored quantity {"value", "std"?, "fixed"?}.
std::optional<Bound> StoredBound(const json& q) {
  if (!q.is_object() || !q.contains("value") || !q["value"].is_number()) return std::nullopt;
  const double v = q["value"].get<double>();
  const bool free = !q.value("fixed", false) && q.contains("std") && q["std"].is_number();
  const double s = free ? q["std"].get<double>() : 0.0;
  return Bound{v, v - s, v + s, free};  // lo/hi scaled by z below
}

}  // namespace

json CriticalCompressionJson(const std::string& description_json, const storage::Estimate& e) {
  const json result = StoredJson(e.result_json);
  if (!result.is_object()) return nullptr;
  const json fix = result.value("end_fixity", json::object());
  auto ei = StoredBound(result.value("bending_stiffness_nm2", json()));
  auto left = StoredBound(fix.value("left", json()));
  auto right = StoredBound(fix.value("right", json()));
  model::Member member;
  if (!ei || !left || !right || !(ei->value > 0) ||
      !ParseMember(description_json, &member, MemberReadOptions{.require_id = true}).ok()) {
    return nullptr;
  }
  const int k = (ei->free ? 1 : 0) + (left->free ? 1 : 0) + (right->free ? 1 : 0);
  const double z = k > 0 ? kBonferroniZ[k - 1] : 0.0;
  for (Bound* b : {&*ei, &*left, &*right}) {
    const double s = (b->hi - b->value) * z;
    b->lo = b->value - s;
    b->hi = b->value + s;
  }
  ei->lo = std::max(ei->lo, 1e-6 * ei->value);
  for (Bound* b : {&*left, &*right}) {
    b->value = std::clamp(b->value, 0.0, 1.0);
    b->lo = std::clamp(b->lo, 0.0, 1.0);
    b->hi = std::clamp(b->hi, 0.0, 1.0);
  }
  const model::Direction plane = result.value("plane", "vertical") == "lateral" ? model::Direction::kLateral
                                                                                : model::Direction::kVertical;
  const model::ModalModel modal(member, plane, model::ModalOptions{60});
  const auto at = [&](double ei_v, double l, double r, double* n) {
    model::ModalParameters p;
    p.bending_stiffness_nm2 = ei_v;
    p.fixity_left = l;
    p.fixity_right = r;
    return modal.CriticalCompression(p, n).ok();
  };
  double v = 0, lo = 0, hi = 0;
  if (!at(ei->value, left->value, right->value, &v) || !at(ei->lo, left->lo, right->lo, &lo) ||
      !at(ei->hi, left->hi, right->hi, &hi)) {
    return nullptr;
  }
  return {{"value_n", v},
          {"ci95_n", {std::min(lo, v), std::max(hi, v)}},
          {"free_parameters", k},
          {"estimate_id", e.id}};
}

StorageStatus MemberRowJson(storage::Repository& repo, Id org, const storage::Member& m, json* out) {
  const json description = StoredJson(m.description_json);
  std::optional<double> design;
  if (description.is_object() && description.contains("design_axial_force_n") &&
      description["design_axial_force_n"].is_number()) {
    design = description["design_axial_force_n"].get<double>();
  }
  json row = {{"member_id", m.id},
              {"external_id", m.external_id},
              {"structure_id", m.structure_id},
              {"design_axial_force_n", Num(design)},
              {"latest", nullptr},
              {"force_ratio", nullptr},
              {"change_30d", nullptr},
              {"critical_compression", nullptr},
              {"last_record_at", nullptr}};
  // The newest estimate, usable or not, is shown; the ratio and the change
  // use usable ones only.
  std::vector<storage::Estimate> all;
  storage::Estimate newest;
  StorageStatus st = repo.LatestEstimate(org, m.id, &newest);
  if (!st.ok() && !st.not_found()) return st;
  if (st.ok()) {
    const json result = StoredJson(newest.result_json);
    json latest = {
        {"estimate_id", newest.id},
        {"measured_at", FormatIsoUtc(newest.measured_at_unix_ms)},
        {"temperature_c", Num(newest.temperature_c)},
        {"axial_force_n", newest.axial_force_n},
        {"std_n", Num(newest.force_std_n)},
        {"ci95_n", {newest.force_ci95_low_n, newest.force_ci95_high_n}},
        {"bending_stiffness_nm2", Num(newest.bending_stiffness_nm2)},
        {"bending_stiffness_std_nm2", Num(newest.bending_stiffness_std_nm2)},
        {"verdict", result.is_object() && result.contains("verdict") ? result["verdict"] : json(nullptr)},
        {"cautions", result.is_object() && result.contains("cautions") ? result["cautions"] : json::array()}};
    row["latest"] = latest;
    if (StorageStatus h = repo.ForceHistory(org, m.id, newest.measured_at_unix_ms - kChangeWindow_ms,
                                            newest.measured_at_unix_ms + 1, &all);
        !h.ok()) {
      return h;
    }
  }
  std::vector<const storage::Estimate*> usable;
  for (const auto& e : all) {
    if (Usable(e)) usable.push_back(&e);
  }
  if (!usable.empty()) {
    const storage::Estimate& last = *usable.back();
    if (design && *design != 0) {
      const double a = last.force_ci95_low_n / *design, b = last.force_ci95_high_n / *design;
      row["force_ratio"] = {{"value", last.axial_force_n / *design},
                            {"ci95", {std::min(a, b), std::max(a, b)}},
                            {"estimate_id", last.id}};
    }
    // The critical compression at the newest usable estimate, with the
    // member description version it was made with (result from storage).
    storage::Estimate full;
    storage::Member version;
    row["critical_compression"] = nullptr;
    if (repo.GetEstimate(org, last.id, &full).ok() &&
        repo.GetMemberVersion(org, m.id, last.member_version, &version).ok()) {
      row["critical_compression"] = CriticalCompressionJson(version.description_json, full);
    }
    if (usable.size() >= 2) {
      const storage::Estimate& first = *usable.front();
      const double d = last.axial_force_n - first.axial_force_n;
      const double s = std::hypot(ForceStd(last), ForceStd(first));
      row["change_30d"] = {{"value_n", d},
                           {"std_n", s},
                           {"ci95_n", {d - estimation::kZ975 * s, d + estimation::kZ975 * s}},
                           {"from_estimate_id", first.id},
                           {"from", FormatIsoUtc(first.measured_at_unix_ms)},
                           {"to_estimate_id", last.id},
                           {"to", FormatIsoUtc(last.measured_at_unix_ms)}};
    }
  }
  std::int64_t last_record = 0;
  st = repo.LatestRecordTime(org, m.id, &last_record);
  if (st.ok()) row["last_record_at"] = FormatIsoUtc(last_record);
  if (!st.ok() && !st.not_found()) return st;
  std::vector<storage::Alert> open;
  if (StorageStatus a = repo.ListAlerts(org, {m.id, storage::AlertState::kOpen}, &open); !a.ok()) return a;
  int alert = 0, watch = 0;
  json rules = json::array();
  for (const auto& a : open) {
    (std::string(estimation::RuleTier(a.rule)) == "watch" ? watch : alert) += 1;
    rules.push_back(a.rule);
  }
  row["open_alerts"] = open.size();
  row["open_alerts_by_tier"] = {{"alert", alert}, {"watch", watch}};
  row["open_rules"] = rules;
  *out = std::move(row);
  return {};
}

void SortWorstFirst(std::vector<json>* rows) {
  const auto top = [](const json& r) {
    return r["force_ratio"].is_object() ? r["force_ratio"]["ci95"][1].get<double>()
                                        : std::numeric_limits<double>::infinity();
  };
  std::stable_sort(rows->begin(), rows->end(), [&](const json& a, const json& b) {
    const int aa = a["open_alerts_by_tier"]["alert"], ba = b["open_alerts_by_tier"]["alert"];
    if (aa != ba) return aa > ba;
    const int aw = a["open_alerts_by_tier"]["watch"], bw = b["open_alerts_by_tier"]["watch"];
    if (aw != bw) return aw > bw;
    const double ta = top(a), tb = top(b);
    if (ta != tb) return ta < tb;
    return a["external_id"].get<std::string>() < b["external_id"].get<std::string>();
  });
}

std::vector<std::string> MemberRowCsvHeader() {
  return {"structure",
          "member_id",
          "member",
          "open_alerts",
          "open_alerts_confident",
          "open_alerts_watch",
          "measured_at_utc",
          "force_n",
          "force_ci95_low_n",
          "force_ci95_high_n",
          "verdict",
          "design_force_n",
          "force_ratio",
          "force_ratio_ci95_low",
          "force_ratio_ci95_high",
          "change_30d_n",
          "change_30d_ci95_low_n",
          "change_30d_ci95_high_n",
          "critical_compression_n",
          "critical_compression_ci95_low_n",
          "critical_compression_ci95_high_n",
          "last_record_at_utc"};
}

std::vector<std::string> MemberRowCsv(const json& r, const std::string& structure_name) {
  const auto num = [](const json& v) { return v.is_number() ? CsvNum(v.get<double>()) : std::string(); };
  const json& l = r["latest"];
  const json& fr = r["force_ratio"];
  const json& ch = r["change_30d"];
  const bool hl = l.is_object(), hr = fr.is_object(), hc = ch.is_object();
  const bool cc = r.contains("critical_compression") && r["critical_compression"].is_object();
  return {structure_name,
          CsvInt(r["member_id"].get<Id>()),
          r["external_id"].get<std::string>(),
          CsvInt(r["open_alerts"].get<std::int64_t>()),
          CsvInt(r["open_alerts_by_tier"]["alert"].get<std::int64_t>()),
          CsvInt(r["open_alerts_by_tier"]["watch"].get<std::int64_t>()),
          hl ? l["measured_at"].get<std::string>() : "",
          hl ? num(l["axial_force_n"]) : "",
          hl ? num(l["ci95_n"][0]) : "",
          hl ? num(l["ci95_n"][1]) : "",
          hl && l["verdict"].is_object() ? l["verdict"].value("code", "") : "",
          num(r["design_axial_force_n"]),
          hr ? num(fr["value"]) : "",
          hr ? num(fr["ci95"][0]) : "",
          hr ? num(fr["ci95"][1]) : "",
          hc ? num(ch["value_n"]) : "",
          hc ? num(ch["ci95_n"][0]) : "",
          hc ? num(ch["ci95_n"][1]) : "",
          cc ? num(r["critical_compression"]["value_n"]) : "",
          cc ? num(r["critical_compression"]["ci95_n"][0]) : "",
          cc ? num(r["critical_compression"]["ci95_n"][1]) : "",
          r["last_record_at"].is_string() ? r["last_record_at"].get<std::string>() : ""};
}

}  // namespace taut::server
