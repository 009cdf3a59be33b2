#include "server/api_json.h"

#include <cmath>
#include <string>

#include "server/iso_time.h"

namespace taut::server {

using nlohmann::json;

json StoredJson(const std::string& text) {
  json j = json::parse(text, nullptr, /*allow_exceptions=*/false);
  return j.is_discarded() ? json(text) : j;
}

json AlertToJson(const storage::Alert& a) {
  json j = {{"id", a.id},
            {"member_id", a.member_id},
            {"estimate_id", a.estimate_id ? json(*a.estimate_id) : json(nullptr)},
            {"rule", a.rule},
            {"tier", estimation::RuleTier(a.rule)},
            {"state", storage::AlertStateName(a.state)},
            {"message", a.message},
            {"evidence", StoredJson(a.evidence)},
            {"raised_at", FormatIsoUtc(a.raised_at_unix_ms)}};
  if (a.acknowledged_at_unix_ms) j["acknowledged_at"] = FormatIsoUtc(*a.acknowledged_at_unix_ms);
  if (a.resolved_at_unix_ms) j["resolved_at"] = FormatIsoUtc(*a.resolved_at_unix_ms);
  return j;
}

namespace {

json TimeOrNull(const std::optional<double>& time_s) {
  if (!time_s) return nullptr;
  return FormatIsoUtc(static_cast<std::int64_t>(std::llround(*time_s * 1000.0)));
}

}  // namespace

json DriftSettingsToJson(const estimation::DriftSettings& s) {
  return {{"baseline_count", s.baseline_count},
          {"baseline_from", TimeOrNull(s.baseline_from_s)},
          {"baseline_to", TimeOrNull(s.baseline_to_s)},
          {"z_threshold", s.z_threshold},
          {"consecutive", s.consecutive},
          {"cusum_k", s.cusum_k},
          {"cusum_h", s.cusum_h},
          {"min_force_share_of_design", s.min_force_share_of_design},
          {"designed_for_tension", s.designed_for_tension},
          {"max_ei_loss_share", s.max_ei_loss_share},
          {"max_silence_hours", s.max_silence_s ? json(*s.max_silence_s / 3600.0) : json(nullptr)}};
}

Status DriftSettingsFromJson(const json& j, estimation::DriftSettings* settings) {
  if (!j.is_object()) return Status::InvalidArgument("$: drift settings must be a JSON object");
  estimation::DriftSettings s = *settings;
  auto number = [&](const std::string& key, double* out) -> Status {
    if (!j[key].is_number() || !std::isfinite(j[key].get<double>())) {
      return Status::InvalidArgument("$." + key + ": must be a finite number");
    }
    *out = j[key].get<double>();
    return Status::Ok();
  };
  auto count = [&](const std::string& key, std::size_t* out) -> Status {
    if (!j[key].is_number_integer() || j[key].get<long long>() < 1) {
      return Status::InvalidArgument("$." + key + ": must be an integer >= 1");
    }
    *out = static_cast<std::size_t>(j[key].get<long long>());
    return Status::Ok();
  };
  auto time = [&](const std::string& key, std::optional<double>* out) -> Status {
    if (j[key].is_null()) {
      out->reset();
      return Status::Ok();
    }
    std::int64_t ms = 0;
    if (!j[key].is_string() || !ParseIsoUtc(j[key].get<std::string>(), &ms)) {
      return Status::InvalidArgument("$." + key + ": must be null or an ISO 8601 UTC time");
    }
    *out = static_cast<double>(ms) / 1000.0;
    return Status::Ok();
  };
  for (const auto& [key, value] : j.items()) {
    Status st = Status::Ok();
    if (key == "baseline_count") {
      st = count(key, &s.baseline_count);
    } else if (key == "consecutive") {
      st = count(key, &s.consecutive);
    } else if (key == "baseline_from") {
      st = time(key, &s.baseline_from_s);
    } else if (key == "baseline_to") {
      st = time(key, &s.baseline_to_s);
    } else if (key == "z_threshold") {
      st = number(key, &s.z_threshold);
    } else if (key == "cusum_k") {
      st = number(key, &s.cusum_k);
    } else if (key == "cusum_h") {
      st = number(key, &s.cusum_h);
    } else if (key == "min_force_share_of_design") {
      st = number(key, &s.min_force_share_of_design);
    } else if (key == "max_ei_loss_share") {
      st = number(key, &s.max_ei_loss_share);
    } else if (key == "max_silence_hours") {
      if (value.is_null()) {
        s.max_silence_s.reset();
      } else {
        double hours = 0;
        st = number(key, &hours);
        if (st.ok() && !(hours > 0)) return Status::InvalidArgument("$." + key + ": must be null or > 0");
        s.max_silence_s = hours * 3600.0;
      }
    } else if (key == "designed_for_tension") {
      if (!value.is_boolean()) return Status::InvalidArgument("$." + key + ": must be true or false");
      s.designed_for_tension = value.get<bool>();
    } else {
      return Status::InvalidArgument("$." + key +
                                     ": unknown key (known: baseline_count, baseline_from, baseline_to, "
                                     "z_threshold, consecutive, cusum_k, cusum_h, min_force_share_of_design, "
                                     "designed_for_tension, max_ei_loss_share, max_silence_hours)");
    }
    if (!st.ok()) return st;
  }
  if (s.baseline_from_s.has_value() != s.baseline_to_s.has_value()) {
    return Status::InvalidArgument("$.baseline_from, $.baseline_to: give both or neither");
  }
  // The rules' own range checks (an empty series runs no rule).
  estimation::DriftReport report;
  if (Status st = estimation::DetectDrift({}, s, &report); !st.ok()) {
    return Status::InvalidArgument("drift settings: " + st.message);
  }
  *settings = s;
  return Status::Ok();
}

}  // namespace taut::server
