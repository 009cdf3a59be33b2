#include "server/drift_alerts.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <nlohmann/json.hpp>
#include <optional>

#include "estimation/drift.h"
#include "server/alert_rules.h"
#include "server/api_json.h"
#include "server/dashboard_data.h"
#include "server/iso_time.h"
#include "server/member_json.h"

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

json EvidenceJson(const estimation::DriftAlert& alert, const estimation::DriftReport& report,
                  const std::string& quantity) {
  json points = json::array();
  for (const auto& e : alert.evidence) {
    json p = {{"estimate_id", e.id},
              {"measured_at", FormatIsoUtc(static_cast<std::int64_t>(std::llround(e.time_s * 1000.0)))},
              {"value", e.value}};
    if (e.predicted) p["predicted"] = *e.predicted;
    if (e.residual) p["residual"] = *e.residual;
    if (e.z) p["z"] = *e.z;
    if (e.cusum) p["cusum"] = *e.cusum;
    points.push_back(p);
  }
  json j = {{"rule", alert.rule}, {"quantity", quantity}, {"points", points}};
  const auto& baseline = quantity == "bending_stiffness_nm2" ? report.ei_baseline : report.force_baseline;
  if (baseline) {
    j["baseline"] = {{"points", baseline->n},
                     {"temperature_slope", baseline->has_slope},
                     {"mean_temperature_c", baseline->mean_temperature_c},
                     {"intercept", baseline->intercept},
                     {"slope_per_c", baseline->slope_per_c},
                     {"residual_std", std::sqrt(baseline->residual_variance)}};
  }
  json cautions = json::array();
  for (const auto& c : report.cautions) cautions.push_back({{"code", c.code}, {"message", c.message}});
  j["analysis_cautions"] = cautions;
  j["notice"] = report.notice;
  return j;
}

}  // namespace

bool CheckDriftAndRaiseAlerts(storage::Repository& repo, Id organisation_id, Id member_id, Id estimate_id,
                              const LogLine& log) {
  const std::string where =
      "drift member=" + std::to_string(member_id) + " estimate=" + std::to_string(estimate_id);
  storage::Member stored;
  StorageStatus ms = repo.GetMember(organisation_id, member_id, &stored);
  if (ms.not_found()) {  // deleted member: nothing to watch any more
    repo.MarkDriftChecked(organisation_id, estimate_id, NowUnixMs());
    return false;
  }
  if (!ms.ok()) {
    log("level=error " + where + ": " + ms.message);
    return false;
  }
  model::Member member;
  if (Status s = ParseMember(stored.description_json, &member, kStoredMember); !s.ok()) {
    {
      log("level=error " + where + ": " + s.message);
      return false;
    }
  }
  storage::Estimate current;
  if (StorageStatus s = repo.GetEstimate(organisation_id, estimate_id, &current); !s.ok()) {
    {
      log("level=error " + where + ": " + s.message);
      return false;
    }
  }
  std::string settings_text;
  const StorageStatus ss = repo.GetDriftSettings(organisation_id, member_id, &settings_text);
  if (!ss.ok() && !ss.not_found()) {
    log("level=error " + where + ": " + ss.message);
    return false;
  }
  // The nominal EI of the ei-loss rule in the plane this estimate was fitted in.
  const json result = StoredJson(current.result_json);
  const model::Direction plane = result.is_object() && result.value("plane", "vertical") == "lateral"
                                     ? model::Direction::kLateral
                                     : model::Direction::kVertical;
  estimation::DriftSettings settings;
  if (Status p = EffectiveDriftSettings(member, ss.ok() ? &settings_text : nullptr, plane, &settings);
      !p.ok()) {
    log("level=error " + where + " stored settings ignored: " + p.message);
    EffectiveDriftSettings(member, nullptr, plane, &settings);
  }
  if (StorageStatus s = ApplyLogbookBaseline(repo, organisation_id, member_id, &settings); !s.ok()) {
    log("level=error " + where + ": " + s.message);
    return false;
  }
  std::vector<storage::Estimate> history;
  if (StorageStatus s =
          repo.ForceHistory(organisation_id, member_id, std::numeric_limits<std::int64_t>::min(),
                            std::numeric_limits<std::int64_t>::max(), &history);
      !s.ok()) {
    {
      log("level=error " + where + ": " + s.message);
      return false;
    }
  }
  const std::vector<estimation::DriftPoint> series = DriftSeries(history);
  std::optional<std::size_t> index;
  for (std::size_t i = 0; i < history.size(); ++i) {
    if (history[i].id == estimate_id) index = i;
  }
  estimation::DriftReport report;
  if (Status s = estimation::DetectDrift(series, settings, &report); !s.ok()) {
    {
      log("level=error " + where + ": " + s.message);
      return false;
    }
  }
  // A rule whose alert is still open or acknowledged for this member does
  // not raise another: one alert per condition until someone resolves it
  // (its evidence names the estimate where the condition started).
  std::vector<storage::Alert> alerts;
  if (StorageStatus s = repo.ListAlerts(organisation_id, {member_id, std::nullopt}, &alerts); !s.ok()) {
    {
      log("level=error " + where + ": " + s.message);
      return false;
    }
  }
  bool raised = false;
  for (const auto& alert : report.alerts) {
    if (!index || alert.index != *index) continue;
    const bool standing = std::any_of(alerts.begin(), alerts.end(), [&](const storage::Alert& a) {
      return a.state != storage::AlertState::kResolved && a.rule == alert.rule &&
             a.estimate_id != estimate_id;
    });
    if (standing) continue;
    const bool ei_rule = alert.rule.rfind("ei", 0) == 0;
    storage::NewAlert na;
    na.member_id = member_id;
    na.estimate_id = estimate_id;
    na.rule = alert.rule;
    na.message = alert.caution.message;
    na.evidence = EvidenceJson(alert, report, ei_rule ? "bending_stiffness_nm2" : "axial_force_n").dump();
    Id alert_id = 0;
    bool created = false;
    // unless_standing: the standing check above, repeated in the write
    // transaction under the member's lock, so that concurrent checks of the
    // member (other workers, other replicas) raise the rule once.
    if (StorageStatus s = repo.RaiseAlertOnce(organisation_id, na, NowUnixMs(), &alert_id, &created,
                                              /*unless_standing=*/true);
        !s.ok()) {
      {
        log("level=error " + where + " rule=" + alert.rule + ": " + s.message);
        return false;
      }
    }
    if (created) {
      raised = true;
      log("level=warn alert=" + std::to_string(alert_id) + " member=" + std::to_string(member_id) +
          " rule=" + alert.rule + " message=\"" + alert.caution.message + "\"");
    }
  }
  if (StorageStatus s = repo.MarkDriftChecked(organisation_id, estimate_id, NowUnixMs()); !s.ok()) {
    log("level=error " + where + ": " + s.message);
  }
  return raised;
}

}  // namespace taut::server
