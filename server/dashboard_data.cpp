#include "server/dashboard_data.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "estimation/conditioning.h"
#include "estimation/fdd.h"
#include "estimation/modal_id.h"
#include "estimation/record.h"
#include "estimation/spectral.h"
#include "model/modal.h"
#include "server/api_json.h"
#include "server/iso_time.h"

namespace taut::server {

namespace {

using nlohmann::json;

// JSON has no Inf/NaN; null is the honest rendering of "no number".
json Number(double v) { return std::isfinite(v) ? json(v) : json(nullptr); }
json Number(const std::optional<double>& v) { return v ? Number(*v) : json(nullptr); }

// result[key]["value"] as a number, if present.
std::optional<double> StoredValue(const json& q) {
  if (!q.is_object() || !q.contains("value") || !q["value"].is_number()) return std::nullopt;
  return q["value"].get<double>();
}

json CautionsJson(const estimation::Cautions& cautions) {
  json out = json::array();
  for (const auto& c : cautions) out.push_back({{"code", c.code}, {"message", c.message}});
  return out;
}

std::string TimeText(double time_s) {
  return FormatIsoUtc(static_cast<std::int64_t>(std::llround(time_s * 1000.0)));
}

// One identified mode of the stored result as a peak to mark.
struct StoredPeak {
  std::optional<int> order;  // absent: unpaired
  double frequency_hz = 0;
  json source;  // the stored mode object
};

std::vector<StoredPeak> StoredPeaks(const json& result) {
  std::vector<StoredPeak> peaks;
  for (const char* list : {"modes", "unpaired_modes"}) {
    if (!result.is_object() || !result.contains(list) || !result[list].is_array()) continue;
    for (const json& m : result[list]) {
      if (!m.is_object() || !m.contains("frequency_hz") || !m["frequency_hz"].is_number()) continue;
      StoredPeak p;
      p.frequency_hz = m["frequency_hz"].get<double>();
      if (m.contains("order") && m["order"].is_number_integer()) p.order = m["order"].get<int>();
      p.source = m;
      peaks.push_back(std::move(p));
    }
  }
  std::sort(peaks.begin(), peaks.end(),
            [](const StoredPeak& a, const StoredPeak& b) { return a.frequency_hz < b.frequency_hz; });
  return peaks;
}

}  // namespace

// ------------------------------------------------------------------ spectrum

Status EstimateSpectrumJson(const storage::Estimate& estimate, const storage::Record& record, int max_points,
                            json* out) {
  const auto nc = static_cast<Eigen::Index>(record.channels.size());
  const Eigen::Index n = record.sample_count;
  if (nc == 0 || n < 16 || record.samples.size() != static_cast<std::size_t>(n * nc)) {
    return Status::InvalidArgument("record " + std::to_string(record.id) + " holds " + std::to_string(n) +
                                   " samples of " + std::to_string(nc) +
                                   " channels: too few for a Welch estimate (16 samples at least)");
  }
  if (max_points < kMinSpectrumPoints || max_points > kMaxSpectrumPoints) {
    return Status::InvalidArgument("max_points = " + std::to_string(max_points) + ": must be in " +
                                   std::to_string(kMinSpectrumPoints) + ".." +
                                   std::to_string(kMaxSpectrumPoints));
  }
  // Samples as the identification reads them (server/worker.cpp): m/s^2,
  // rows = samples; then the same conditioning (modal_id.h step 1).
  const double scale = record.units == "g" ? estimation::kStandardGravity_m_s2 : 1.0;
  Eigen::MatrixXd y(n, nc);
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < nc; ++j)
      y(i, j) = scale * record.samples[static_cast<std::size_t>(i * nc + j)];
  }
  estimation::RemoveLinearTrend(&y);
  estimation::WelchOptions wo;
  wo.segment_samples = estimation::DefaultSegmentSamples(n);
  estimation::CrossSpectrum csd;
  if (Status s = estimation::WelchCsd(y, record.sample_rate_hz, wo, &csd); !s.ok()) return s;
  const double nyquist = 0.5 * record.sample_rate_hz;
  const double band_hi = estimation::kDefaultBandTopShare * nyquist;
  // The identification's first look: FDD peaks over its default band.
  const estimation::FddResult fdd = estimation::RunFdd(csd, 0.0, band_hi, 16);
  const Eigen::VectorXd& s1 = fdd.s1;
  const auto lines = static_cast<int>(s1.size());

  // Peak-preserving decimation of lines 1..lines-1 (see the header).
  const int shown = lines - 1;
  const int k = std::max(1, (shown + max_points - 1) / max_points);
  json freq = json::array(), values = json::array();
  for (int b = 1; b < lines; b += k) {
    int best = b;
    for (int m = b; m < std::min(lines, b + k); ++m) {
      if (s1[m] > s1[best]) best = m;
    }
    freq.push_back(csd.frequency_hz[best]);
    values.push_back(Number(s1[best]));
  }

  const json result = StoredJson(estimate.result_json);
  json peaks = json::array();
  for (const StoredPeak& p : StoredPeaks(result)) {
    const int line = std::clamp(static_cast<int>(std::lround(p.frequency_hz / csd.line_spacing_hz)), 1,
                                std::max(1, lines - 1));
    double top = 0;
    for (int m = std::max(1, line - kPeakMarkLines); m <= std::min(lines - 1, line + kPeakMarkLines); ++m) {
      top = std::max(top, s1[m]);
    }
    json j = {{"order", p.order ? json(*p.order) : json(nullptr)},
              {"paired", p.order.has_value()},
              {"frequency_hz", p.frequency_hz},
              {"s1", Number(top)}};
    for (const char* key : {"frequency_std_hz", "damping_ratio", "model_frequency_hz", "mac"}) {
      j[key] = p.source.contains(key) ? p.source[key] : json(nullptr);
    }
    peaks.push_back(j);
  }
  json fdd_peaks = json::array();
  for (const auto& p : fdd.peaks) {
    fdd_peaks.push_back({{"frequency_hz", Number(p.frequency_hz)},
                         {"s1", Number(p.s1)},
                         {"prominence_db", Number(10.0 * std::log10(p.prominence))}});
  }
  *out = {{"estimate_id", estimate.id},
          {"record_id", record.id},
          {"channels", record.channels},
          {"sample_rate_hz", record.sample_rate_hz},
          {"duration_s", static_cast<double>(n) / record.sample_rate_hz},
          {"excitation", record.excitation},
          {"segment_samples", csd.segment_samples},
          {"segments", csd.segments},
          {"line_spacing_hz", csd.line_spacing_hz},
          {"lines", shown},
          {"lines_per_point", k},
          {"band_hz", {0.0, band_hi}},
          {"s1_unit", "(m/s2)^2/Hz"},
          {"frequency_hz", freq},
          {"s1", values},
          {"peaks", peaks},
          {"fdd_peaks", fdd_peaks}};
  if (record.excitation == "impact") {
    (*out)["note"] =
        "impact record: the whole record is transformed here; the identification used the free decay only";
  }
  return Status::Ok();
}

// -------------------------------------------------------------- model shapes

Status ModelShapesJson(const storage::Estimate& estimate, const model::Member& member, json* out) {
  const json result = StoredJson(estimate.result_json);
  if (!result.is_object()) {
    return Status::InvalidArgument("estimate " + std::to_string(estimate.id) +
                                   ": the stored result is not JSON");
  }
  const auto force = StoredValue(result.value("axial_force_n", json()));
  const auto ei = StoredValue(result.value("bending_stiffness_nm2", json()));
  const json fixity = result.value("end_fixity", json::object());
  const auto left = StoredValue(fixity.value("left", json())),
             right = StoredValue(fixity.value("right", json()));
  if (!force || !ei || !left || !right) {
    return Status::InvalidArgument("estimate " + std::to_string(estimate.id) +
                                   ": the stored result lacks axial_force_n, bending_stiffness_nm2 or "
                                   "end_fixity values");
  }
  const model::Direction plane = result.value("plane", std::string("vertical")) == "lateral"
                                     ? model::Direction::kLateral
                                     : model::Direction::kVertical;
  int max_order = 0;
  for (const StoredPeak& p : StoredPeaks(result)) {
    if (p.order) max_order = std::max(max_order, *p.order);
  }
  json modes = json::array(), x = json::array(), sensors = json::array();
  model::ModalResult mr;
  if (max_order > 0) {
    model::ModalParameters params;
    params.axial_force_n = *force;
    params.bending_stiffness_nm2 = *ei;
    params.fixity_left = std::clamp(*left, 0.0, 1.0);
    params.fixity_right = std::clamp(*right, 0.0, 1.0);
    const model::ModalModel modal(member, plane, model::ModalOptions{kShapeElements});
    if (Status s = modal.Solve(params, max_order, &mr); !s.ok()) return s;
    for (double xi : mr.node_x_m) x.push_back(xi);
    for (std::size_t c = 0; c < mr.channels.size(); ++c) {
      sensors.push_back(
          {{"channel", mr.channels[c]}, {"position_m", member.sensors[mr.sensor_index[c]].position_m}});
    }
  }
  for (const StoredPeak& p : StoredPeaks(result)) {
    if (!p.order || *p.order > static_cast<int>(mr.modes.size())) continue;
    const model::Mode& mode = mr.modes[*p.order - 1];
    const json shape = p.source.value("shape", json::object());
    // Least-squares scale of the model onto the measured shape (header).
    double pm = 0, pp = 0;
    json measured = json::array();
    for (std::size_t c = 0; c < mr.channels.size(); ++c) {
      const double phi = mode.shape_at_sensors[c];
      const std::string& channel = mr.channels[c];
      if (!shape.contains(channel) || !shape[channel].is_number()) continue;
      const double m = shape[channel].get<double>();
      pm += phi * m;
      pp += phi * phi;
      measured.push_back({{"channel", channel},
                          {"position_m", member.sensors[mr.sensor_index[c]].position_m},
                          {"value", m}});
    }
    const double peak = mode.w_nodes.cwiseAbs().maxCoeff();
    const double a = pp > 0 ? pm / pp : (peak > 0 ? 1.0 / peak : 1.0);
    json curve = json::array();
    for (Eigen::Index i = 0; i < mode.w_nodes.size(); ++i) curve.push_back(Number(a * mode.w_nodes[i]));
    modes.push_back({{"order", *p.order},
                     {"measured_frequency_hz", p.frequency_hz},
                     {"model_frequency_hz", Number(mode.frequency_hz)},
                     {"stored_model_frequency_hz", p.source.value("model_frequency_hz", json())},
                     {"mac", p.source.value("mac", json())},
                     {"model_shape", curve},
                     {"measured", measured}});
  }
  *out = {{"estimate_id", estimate.id},
          {"member_id", estimate.member_id},
          {"member_version", estimate.member_version},
          {"plane", model::ToString(plane)},
          {"length_m", member.length_m},
          {"parameters",
           {{"axial_force_n", *force},
            {"bending_stiffness_nm2", *ei},
            {"fixity_left", *left},
            {"fixity_right", *right}}},
          {"elements", kShapeElements},
          {"x_m", x},
          {"sensors", sensors},
          {"modes", modes},
          {"normalisation",
           "measured: max |shape| = 1 (as stored); model: w(x) scaled by the least-squares factor onto the "
           "measured shape at the sensors"},
          {"cautions", result.value("cautions", json::array())},
          {"notice", result.value("notice", std::string(estimation::StandingNotice()))}};
  return Status::Ok();
}

// --------------------------------------------------------------------- drift

Status EffectiveDriftSettings(const model::Member& member, const std::string* stored_json,
                              model::Direction plane, estimation::DriftSettings* settings) {
  estimation::DriftSettings s;
  if (stored_json) {
    if (Status st = DriftSettingsFromJson(StoredJson(*stored_json), &s); !st.ok()) return st;
  }
  s.design_force_n = member.design_axial_force_n;
  if (member.design_axial_force_n && *member.design_axial_force_n < 0) s.designed_for_tension = false;
  s.nominal_ei_nm2 = member.NominalBendingStiffness_nm2(plane);
  *settings = s;
  return Status::Ok();
}

std::vector<estimation::DriftPoint> DriftSeries(const std::vector<storage::Estimate>& history) {
  std::vector<estimation::DriftPoint> series;
  series.reserve(history.size());
  for (const auto& e : history) {
    estimation::DriftPoint p;
    p.id = e.id;
    p.time_s = static_cast<double>(e.measured_at_unix_ms) / 1000.0;
    p.temperature_c = e.temperature_c;
    p.force_n = e.axial_force_n;
    p.force_std_n = e.force_std_n.value_or(0.0);
    p.force_ci95_low_n = e.force_ci95_low_n;
    p.force_ci95_high_n = e.force_ci95_high_n;
    p.usable = e.verdict_code != "unusable";  // SHARED-DECISIONS item 1: no verdict = usable
    if (e.bending_stiffness_nm2 && e.bending_stiffness_std_nm2) {
      p.ei_nm2 = e.bending_stiffness_nm2;
      p.ei_std_nm2 = e.bending_stiffness_std_nm2;
    }
    series.push_back(p);
  }
  return series;
}

namespace {

json BaselineJson(const std::optional<estimation::BaselineFit>& fit,
                  const std::vector<storage::Estimate>& history, const estimation::DriftReport& report,
                  const char* unit) {
  if (!fit) return nullptr;
  std::optional<std::int64_t> first, last;
  for (std::size_t i = 0; i < history.size(); ++i) {
    if (!report.points[i].in_baseline) continue;
    if (!first) first = history[i].measured_at_unix_ms;
    last = history[i].measured_at_unix_ms;
  }
  const std::string u(unit);
  return {{"points", fit->n},
          {"first_at", first ? json(FormatIsoUtc(*first)) : json(nullptr)},
          {"last_at", last ? json(FormatIsoUtc(*last)) : json(nullptr)},
          {"temperature_slope", fit->has_slope},
          {"mean_temperature_c", Number(fit->mean_temperature_c)},
          {"temperature_range_c",
           fit->has_slope ? json::array({fit->min_temperature_c, fit->max_temperature_c}) : json(nullptr)},
          {"intercept_" + u, Number(fit->intercept)},
          {"slope_" + u + "_per_c", Number(fit->slope_per_c)},
          {"residual_std_" + u, Number(std::sqrt(fit->residual_variance))}};
}

// Expected value and residual-rule limits of one point (header comment).
void Limits(const std::optional<estimation::BaselineFit>& fit, const std::optional<double>& temperature_c,
            double variance, double z_threshold, json* expected, json* limits) {
  *expected = nullptr;
  *limits = nullptr;
  if (!fit) return;
  if (fit->has_slope && !temperature_c) return;  // no prediction (drift.h)
  const double t0 = fit->has_slope ? *temperature_c : fit->mean_temperature_c;
  const double pred = fit->Predict(t0);
  const double half = z_threshold * std::sqrt(fit->PredictionVariance(t0) + variance);
  *expected = Number(pred);
  *limits = json::array({Number(pred - half), Number(pred + half)});
}

}  // namespace

Status MemberDriftJson(const model::Member& member, const estimation::DriftSettings& settings,
                       const json& settings_json, const std::vector<storage::Estimate>& history,
                       std::int64_t from_unix_ms, std::int64_t to_unix_ms, json* out) {
  const std::vector<estimation::DriftPoint> series = DriftSeries(history);
  estimation::DriftReport report;
  if (Status s = estimation::DetectDrift(series, settings, &report); !s.ok()) return s;
  json points = json::array();
  for (std::size_t i = 0; i < history.size(); ++i) {
    const storage::Estimate& e = history[i];
    if (e.measured_at_unix_ms < from_unix_ms || e.measured_at_unix_ms >= to_unix_ms) continue;
    const estimation::PointAssessment& pa = report.points[i];
    json p = {{"estimate_id", e.id},           {"measured_at", FormatIsoUtc(e.measured_at_unix_ms)},
              {"in_baseline", pa.in_baseline}, {"excluded", pa.excluded},
              {"force_z", Number(pa.force_z)}, {"force_cusum", Number(pa.force_cusum)},
              {"ei_z", Number(pa.ei_z)}};
    const double fstd = e.force_std_n.value_or(0.0);
    Limits(report.force_baseline, e.temperature_c, fstd * fstd, settings.z_threshold, &p["force_expected_n"],
           &p["force_limits_n"]);
    if (e.bending_stiffness_std_nm2) {
      const double v = *e.bending_stiffness_std_nm2 * *e.bending_stiffness_std_nm2;
      Limits(report.ei_baseline, e.temperature_c, v, settings.z_threshold, &p["ei_expected_nm2"],
             &p["ei_limits_nm2"]);
    } else {
      p["ei_expected_nm2"] = nullptr;
      p["ei_limits_nm2"] = nullptr;
    }
    points.push_back(std::move(p));
  }
  json alerts = json::array();
  for (const auto& a : report.alerts) {
    alerts.push_back({{"rule", a.rule},
                      {"tier", a.tier},
                      {"estimate_id", series[a.index].id},
                      {"measured_at", TimeText(series[a.index].time_s)},
                      {"message", a.caution.message}});
  }
  const std::optional<double> design = member.design_axial_force_n;
  json force_thresholds = {
      {"below_design_n",
       design && *design > 0 ? json(settings.min_force_share_of_design * *design) : json(nullptr)},
      {"compression_n", settings.designed_for_tension ? json(0.0) : json(nullptr)}};
  json ei_thresholds = {{"loss_nm2", settings.nominal_ei_nm2
                                         ? json((1.0 - settings.max_ei_loss_share) * *settings.nominal_ei_nm2)
                                         : json(nullptr)}};
  *out = {{"from", FormatIsoUtc(from_unix_ms)},
          {"to", FormatIsoUtc(to_unix_ms)},
          {"estimates", history.size()},
          {"settings", settings_json},
          {"design_axial_force_n", Number(design)},
          {"nominal_bending_stiffness_nm2", Number(settings.nominal_ei_nm2)},
          {"force",
           {{"baseline", BaselineJson(report.force_baseline, history, report, "n")},
            {"thresholds", force_thresholds}}},
          {"bending_stiffness",
           {{"baseline", BaselineJson(report.ei_baseline, history, report, "nm2")},
            {"thresholds", ei_thresholds}}},
          {"points", points},
          {"rules_fired", alerts},
          {"cautions", CautionsJson(report.cautions)},
          {"notice", report.notice}};
  return Status::Ok();
}

// ------------------------------------------------------------ fixity history

json FixityPointJson(const storage::Repository::FixityRow& row) {
  json left = nullptr, right = nullptr;
  if (!row.end_fixity_json.empty()) {
    const json v = json::parse(row.end_fixity_json, nullptr, /*allow_exceptions=*/false);
    if (v.is_object()) {
      if (v.contains("left") && v["left"].is_object()) left = v["left"];
      if (v.contains("right") && v["right"].is_object()) right = v["right"];
    }
  }
  return {{"estimate_id", row.estimate_id},
          {"measured_at", FormatIsoUtc(row.measured_at_unix_ms)},
          {"left", left},
          {"right", right}};
}

}  // namespace taut::server
