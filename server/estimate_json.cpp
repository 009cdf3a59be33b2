#include "server/estimate_json.h"

#include <cmath>

namespace taut::server {

namespace {

// JSON has no Inf/NaN (nlohmann writes null); a non-finite number here is
// a bug upstream, and null is the honest rendering of "no number".
nlohmann::json Number(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

nlohmann::json Quantity(const estimation::EstimatedQuantity& q) {
  if (q.fixed) return {{"value", Number(q.value)}, {"fixed", true}};
  return {{"value", Number(q.value)},
          {"std", Number(q.std)},
          {"ci95", nlohmann::json::array({Number(q.ci95_low), Number(q.ci95_high)})}};
}

nlohmann::json Shape(const estimation::Estimate& e, const estimation::IdentifiedMode& m) {
  nlohmann::json shape = nlohmann::json::object();
  for (size_t c = 0; c < e.shape_channels.size() && c < m.shape.size(); ++c) {
    shape[e.shape_channels[c]] = Number(m.shape[c]);
  }
  return shape;
}

// "plane" of a mode (issue 12, docs/FORMATS.md 3.2): "declared" (paired in
// the plane analysed), "other" (fits a mode of the other plane: cross-axis
// content) or "unexplained".
const char* ModePlane(const estimation::EstimatedMode& m) {
  if (m.paired) return "declared";
  return m.other_plane ? "other" : "unexplained";
}

// Keys of "fit" added by issue 12 (docs/FORMATS.md 3.3): how the EI
// interval was formed.
void AddIntervalMethods(const estimation::Estimate& e, nlohmann::json* fit) {
  (*fit)["bending_stiffness_interval"] = e.fit.bending_stiffness_interval;
}

// Issue 17: the variance budget of N (estimation/uncertainty_budget.h).
nlohmann::json BudgetToJson(const estimation::UncertaintyBudget& b) {
  nlohmann::json sources = nlohmann::json::array();
  for (const auto& x : b.sources) {
    nlohmann::json j = {
        {"source", x.source}, {"label", x.label}, {"std_n", Number(x.std_n)}, {"share", Number(x.share)}};
    if (x.tolerance) {
      j["tolerance"] = Number(*x.tolerance);
      j["default"] = x.default_tolerance;
      j["tolerance_unit"] = x.tolerance_unit;
    }
    sources.push_back(j);
  }
  return {{"axial_force_std_n", Number(b.axial_force_std_n)},
          {"fit_std_n", Number(b.fit_std_n)},
          {"tolerance_std_n", Number(b.tolerance_std_n)},
          {"method", b.method},
          {"sources", sources}};
}

// Issue 17: the two simplified formulas beside the estimate
// (estimation/simplified_formulas.h), labelled as simplified.
nlohmann::json SimplifiedToJson(const estimation::SimplifiedComparison& c) {
  const auto opt = [](const std::optional<double>& v) { return v ? Number(*v) : nlohmann::json(nullptr); };
  return {{"label",
           "simplified formulas, for comparison only (taut string from f1; pinned beam from the "
           "regression of f_n^2/n^2 on n^2)"},
          {"taut_string_force_n", opt(c.taut_string_force_n)},
          {"pinned_beam_force_n", opt(c.pinned_beam_force_n)},
          {"pinned_beam_bending_stiffness_nm2", opt(c.pinned_beam_bending_stiffness_nm2)},
          {"modes_used", c.modes_used},
          {"reasons", c.reasons}};
}

}  // namespace

nlohmann::json CautionsToJson(const estimation::Cautions& cautions) {
  nlohmann::json out = nlohmann::json::array();
  for (const auto& c : cautions) {
    out.push_back({{"code", c.code},
                   {"severity", estimation::ToString(estimation::SeverityOf(c.code))},
                   {"message", c.message}});
  }
  return out;
}

nlohmann::json VerdictToJson(const estimation::Verdict& v) {
  return {{"code", v.code}, {"summary", v.summary}};
}

nlohmann::json EstimateToJson(const estimation::Estimate& e) {
  nlohmann::json j;
  j["axial_force_n"] = Quantity(e.axial_force_n);
  j["bending_stiffness_nm2"] = Quantity(e.bending_stiffness_nm2);
  j["end_fixity"] = {{"left", Quantity(e.fixity_left)}, {"right", Quantity(e.fixity_right)}};
  j["axial_support"] = {{"ratio", Quantity(e.axial_support_ratio)},
                        {"stiffness_n_per_m", Number(e.axial_support_stiffness_n_per_m)}};
  j["modes"] = nlohmann::json::array();
  j["unpaired_modes"] = nlohmann::json::array();
  for (const auto& m : e.modes) {
    const auto& id = m.measured;
    if (m.paired && id.order) {
      j["modes"].push_back({{"order", *id.order},
                            {"frequency_hz", Number(id.frequency_hz)},
                            {"frequency_std_hz", Number(id.frequency_std_hz)},
                            {"damping_ratio", Number(id.damping_ratio)},
                            {"shape", Shape(e, id)},
                            {"model_frequency_hz", Number(m.model_frequency_hz)},
                            {"mac", Number(m.mac)},
                            {"plane", ModePlane(m)}});
    } else {
      j["unpaired_modes"].push_back({{"frequency_hz", Number(id.frequency_hz)},
                                     {"frequency_std_hz", Number(id.frequency_std_hz)},
                                     {"damping_ratio", Number(id.damping_ratio)},
                                     {"shape", Shape(e, id)},
                                     {"plane", ModePlane(m)}});
    }
  }
  j["fit"] = {{"model", e.fit.model},
              {"converged", e.fit.converged},
              {"cost", Number(e.fit.cost)},
              {"reduced_chi2", Number(e.fit.reduced_chi2)},
              {"iterations", e.fit.iterations},
              {"starts", e.fit.starts},
              {"seconds", Number(e.fit.seconds)},
              {"starts_at_best", e.fit.starts_at_best},
              {"forward_model_calls", e.fit.forward_model_calls},
              {"profile_model_calls", e.fit.profile_model_calls},
              {"elements", e.fit.elements},
              {"degrees_of_freedom", e.fit.degrees_of_freedom},
              {"axial_force_interval", e.fit.axial_force_interval}};
  AddIntervalMethods(e, &j["fit"]);
  if (e.transient) {
    const auto& t = *e.transient;
    nlohmann::json q = nlohmann::json::array();
    for (double v : t.modal_displacement_m) q.push_back(Number(v));
    j["fit"]["transient"] = {
        {"window_s", nlohmann::json::array({Number(t.window_start_s), Number(t.window_end_s)})},
        {"sample_rate_hz", Number(t.sample_rate_hz)},
        {"low_pass_hz", Number(t.low_pass_hz)},
        {"modes", t.modes},
        {"model_runs", t.model_runs},
        {"residual_rms_m_s2", Number(t.residual_rms_m_s2)},
        {"signal_rms_m_s2", Number(t.signal_rms_m_s2)},
        {"damping_ratio", Number(t.damping_ratio)},
        {"axial_force_swing_n", Number(t.axial_force_swing_n)},
        {"modal_displacement_m", q},
        {"modal_axial_force_n", Number(t.modal_axial_force_n)}};
  }
  if (e.amplitude.order > 0) {
    const auto& a = e.amplitude;
    j["amplitude_check"] = {{"order", a.order},
                            {"frequency_hz", Number(a.frequency_hz)},
                            {"frequency_std_hz", Number(a.frequency_std_hz)},
                            {"amplitude_m", Number(a.amplitude_m)},
                            {"basis", a.basis},
                            {"frequency_shift_hz", Number(a.frequency_shift_hz)},
                            {"force_bias_n", Number(a.force_bias_n)},
                            {"exceeds_std", a.exceeds_std}};
  }
  j["plane"] = model::ToString(e.direction);
  j["identifiability"] = e.identifiability;
  j["critical_compression_n"] = Number(e.critical_compression_n);
  if (e.uncertainty_budget) j["uncertainty_budget"] = BudgetToJson(*e.uncertainty_budget);
  if (e.simplified) j["simplified_formulas"] = SimplifiedToJson(*e.simplified);
  j["cautions"] = CautionsToJson(e.cautions);
  j["verdict"] = VerdictToJson(e.verdict);
  j["notice"] = e.notice;
  return j;
}

}  // namespace taut::server
