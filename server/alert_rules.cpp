#include "server/alert_rules.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <nlohmann/json.hpp>

#include "server/api_json.h"
#include "server/dashboard_data.h"
#include "server/iso_time.h"
#include "storage/logbook.h"

namespace taut::server {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

StorageStatus ApplyLogbookBaseline(storage::Repository& repo, Id organisation_id, Id member_id,
                                   estimation::DriftSettings* settings) {
  storage::Logbook logbook(repo.database());
  std::int64_t at = 0;
  const StorageStatus s = logbook.LatestBaselineStart(organisation_id, member_id, &at);
  if (s.not_found()) return {};
  if (!s.ok()) return s;
  settings->baseline_start_s = static_cast<double>(at) / 1000.0;
  return {};
}

int CheckStaleData(storage::Repository& repo, std::int64_t now_unix_ms,
                   const std::function<void(const std::string&)>& log) {
  const auto say = [&](const std::string& line) {
    if (log) log(line);
  };
  std::vector<storage::Repository::MemberSettings> rows;
  if (StorageStatus s = repo.ListAllDriftSettings(&rows); !s.ok()) {
    say("level=error stale-data: " + s.message);
    return 0;
  }
  int raised = 0;
  for (const auto& row : rows) {
    estimation::DriftSettings settings;
    if (!DriftSettingsFromJson(StoredJson(row.settings_json), &settings).ok() || !settings.max_silence_s) {
      continue;
    }
    const std::string where = "stale-data member=" + std::to_string(row.member_id);
    std::vector<storage::Estimate> history;
    if (StorageStatus s =
            repo.ForceHistory(row.organisation_id, row.member_id, std::numeric_limits<std::int64_t>::min(),
                              std::numeric_limits<std::int64_t>::max(), &history);
        !s.ok()) {
      say("level=error " + where + ": " + s.message);
      continue;
    }
    const auto alert =
        estimation::StaleDataAlert(DriftSeries(history), settings, static_cast<double>(now_unix_ms) / 1000.0);
    if (!alert) continue;
    std::vector<storage::Alert> existing;
    if (StorageStatus s = repo.ListAlerts(row.organisation_id, {row.member_id, std::nullopt}, &existing);
        !s.ok()) {
      say("level=error " + where + ": " + s.message);
      continue;
    }
    const bool standing = std::any_of(existing.begin(), existing.end(), [](const storage::Alert& a) {
      return a.rule == "stale-data" && a.state != storage::AlertState::kResolved;
    });
    if (standing) continue;
    const estimation::DriftEvidence& e = alert->evidence.front();
    storage::NewAlert na;
    na.member_id = row.member_id;
    na.estimate_id = e.id;
    na.rule = alert->rule;
    na.message = alert->caution.message;
    na.evidence = json{{"rule", alert->rule},
                       {"tier", alert->tier},
                       {"quantity", "axial_force_n"},
                       {"points", json::array({{{"estimate_id", e.id},
                                                {"measured_at", FormatIsoUtc(static_cast<std::int64_t>(
                                                                    std::llround(e.time_s * 1000)))},
                                                {"value", e.value}}})},
                       {"max_silence_hours", *settings.max_silence_s / 3600.0},
                       {"checked_at", FormatIsoUtc(now_unix_ms)},
                       {"notice", estimation::StandingNotice()}}
                      .dump();
    Id id = 0;
    bool created = false;
    if (StorageStatus s = repo.RaiseAlertOnce(row.organisation_id, na, now_unix_ms, &id, &created); !s.ok()) {
      say("level=error " + where + ": " + s.message);
      continue;
    }
    if (created) {
      ++raised;
      say("level=warn alert=" + std::to_string(id) + " member=" + std::to_string(row.member_id) +
          " rule=stale-data message=\"" + na.message + "\"");
    }
  }
  return raised;
}

}  // namespace taut::server
