#include "estimation/drift.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>

namespace taut::estimation {
namespace {

// Printf-style formatting of one number for messages.
std::string Num(const char* fmt, double v) {
  char buf[64];
  std::snprintf(buf, sizeof buf, fmt, v);
  return buf;
}

std::string Kn(double force_n) { return Num("%.1f", force_n / 1000.0) + " kN"; }
std::string Ei(double ei_nm2) { return Num("%.4g", ei_nm2) + " N m^2"; }
std::string At(std::size_t i) { return "[" + std::to_string(i) + "]"; }

Status ValidateSettings(const DriftSettings& s) {
  if (s.baseline_from_s.has_value() != s.baseline_to_s.has_value()) {
    return Status::InvalidArgument(
        "drift settings: baseline_from_s and baseline_to_s must be given together");
  }
  if (s.baseline_from_s && !(*s.baseline_from_s < *s.baseline_to_s)) {
    return Status::InvalidArgument("drift settings: baseline window [" + Num("%g", *s.baseline_from_s) +
                                   ", " + Num("%g", *s.baseline_to_s) + ") s is empty");
  }
  if (!s.baseline_from_s && s.baseline_count < kMinBaselinePoints) {
    return Status::InvalidArgument("drift settings: baseline_count " + std::to_string(s.baseline_count) +
                                   " must be >= " + std::to_string(kMinBaselinePoints));
  }
  if (!(s.z_threshold > 0) || !std::isfinite(s.z_threshold)) {
    return Status::InvalidArgument("drift settings: z_threshold " + Num("%g", s.z_threshold) +
                                   " must be > 0");
  }
  if (s.consecutive < 1) return Status::InvalidArgument("drift settings: consecutive must be >= 1");
  if (!(s.cusum_k >= 0) || !std::isfinite(s.cusum_k)) {
    return Status::InvalidArgument("drift settings: cusum_k " + Num("%g", s.cusum_k) + " must be >= 0");
  }
  if (!(s.cusum_h > 0) || !std::isfinite(s.cusum_h)) {
    return Status::InvalidArgument("drift settings: cusum_h " + Num("%g", s.cusum_h) + " must be > 0");
  }
  if (s.design_force_n && !(std::isfinite(*s.design_force_n) && *s.design_force_n != 0)) {
    return Status::InvalidArgument("drift settings: design_force_n must be finite and non-zero");
  }
  if (!(s.min_force_share_of_design > 0 && s.min_force_share_of_design <= 1)) {
    return Status::InvalidArgument("drift settings: min_force_share_of_design " +
                                   Num("%g", s.min_force_share_of_design) + " must be in (0, 1]");
  }
  if (s.nominal_ei_nm2 && !(*s.nominal_ei_nm2 > 0 && std::isfinite(*s.nominal_ei_nm2))) {
    return Status::InvalidArgument("drift settings: nominal_ei_nm2 must be finite and > 0");
  }
  if (!(s.max_ei_loss_share > 0 && s.max_ei_loss_share < 1)) {
    return Status::InvalidArgument("drift settings: max_ei_loss_share " + Num("%g", s.max_ei_loss_share) +
                                   " must be in (0, 1)");
  }
  if (s.baseline_start_s && !std::isfinite(*s.baseline_start_s)) {
    return Status::InvalidArgument("drift settings: baseline_start_s must be finite");
  }
  if (s.max_silence_s && !(*s.max_silence_s > 0 && std::isfinite(*s.max_silence_s))) {
    return Status::InvalidArgument("drift settings: max_silence_s must be finite and > 0");
  }
  return Status::Ok();
}

Status ValidateSeries(const std::vector<DriftPoint>& series) {
  for (std::size_t i = 0; i < series.size(); ++i) {
    const DriftPoint& p = series[i];
    const std::string where = "drift series" + At(i);
    if (!std::isfinite(p.time_s)) return Status::InvalidArgument(where + ".time_s must be finite");
    if (i > 0 && p.time_s < series[i - 1].time_s) {
      return Status::InvalidArgument(where + ".time_s " + Num("%.17g", p.time_s) +
                                     " is before the previous point's " + Num("%.17g", series[i - 1].time_s) +
                                     ": the series must be ordered by time");
    }
    if (p.temperature_c && !std::isfinite(*p.temperature_c)) {
      return Status::InvalidArgument(where + ".temperature_c must be finite");
    }
    if (!std::isfinite(p.force_n)) return Status::InvalidArgument(where + ".force_n must be finite");
    if (!(p.force_std_n >= 0) || !std::isfinite(p.force_std_n)) {
      return Status::InvalidArgument(where + ".force_std_n " + Num("%g", p.force_std_n) +
                                     " must be finite and >= 0");
    }
    if (p.force_ci95_low_n.has_value() != p.force_ci95_high_n.has_value()) {
      return Status::InvalidArgument(where +
                                     ".force_ci95_low_n and force_ci95_high_n must be given together");
    }
    if (p.force_ci95_low_n && !(std::isfinite(*p.force_ci95_low_n) && std::isfinite(*p.force_ci95_high_n) &&
                                *p.force_ci95_low_n <= p.force_n && p.force_n <= *p.force_ci95_high_n)) {
      return Status::InvalidArgument(where + ": the force interval [" + Num("%g", *p.force_ci95_low_n) +
                                     ", " + Num("%g", *p.force_ci95_high_n) +
                                     "] N must be finite and hold force_n " + Num("%g", p.force_n));
    }
    if (p.ei_nm2) {
      if (!std::isfinite(*p.ei_nm2)) return Status::InvalidArgument(where + ".ei_nm2 must be finite");
      if (!p.ei_std_nm2 || !(*p.ei_std_nm2 >= 0) || !std::isfinite(*p.ei_std_nm2)) {
        return Status::InvalidArgument(where + ".ei_std_nm2 must be given, finite and >= 0 with ei_nm2");
      }
    }
  }
  return Status::Ok();
}

enum class Quantity { kForce, kEi };

struct Sample {
  std::size_t index;
  double value, variance;
  std::optional<double> temperature_c;
};

std::optional<Sample> SampleOf(const std::vector<DriftPoint>& series, std::size_t i, Quantity q) {
  const DriftPoint& p = series[i];
  if (q == Quantity::kForce) return Sample{i, p.force_n, p.force_std_n * p.force_std_n, p.temperature_c};
  if (!p.ei_nm2) return std::nullopt;
  return Sample{i, *p.ei_nm2, *p.ei_std_nm2 * *p.ei_std_nm2, p.temperature_c};
}

// Fits the baseline of one quantity; adds a caution when it cannot.
std::optional<BaselineFit> FitQuantity(const std::vector<DriftPoint>& series,
                                       const std::vector<std::size_t>& base, Quantity q, Cautions* cautions) {
  const char* name = q == Quantity::kForce ? "force" : "bending stiffness";
  std::vector<Sample> all, with_t;
  for (std::size_t i : base) {
    if (auto s = SampleOf(series, i, q)) {
      all.push_back(*s);
      if (s->temperature_c) with_t.push_back(*s);
    }
  }
  std::vector<double> t, x, v;
  bool use_slope = false;
  if (with_t.size() >= kMinBaselinePoints) {
    const auto [lo, hi] = std::minmax_element(
        with_t.begin(), with_t.end(),
        [](const Sample& a, const Sample& b) { return *a.temperature_c < *b.temperature_c; });
    use_slope = *hi->temperature_c - *lo->temperature_c >= kMinBaselineTemperatureSpread_c;
  }
  const std::vector<Sample>& used = use_slope ? with_t : all;
  if (used.size() < kMinBaselinePoints) {
    cautions->push_back(
        {std::string(q == Quantity::kForce ? "drift-baseline-forming" : "drift-ei-baseline-forming"),
         std::string("The ") + name + " baseline has " + std::to_string(used.size()) +
             " usable estimates, fewer than the " + std::to_string(kMinBaselinePoints) +
             " needed: only the absolute rules were applied."});
    return std::nullopt;
  }
  for (const Sample& s : used) {
    if (use_slope) t.push_back(*s.temperature_c);
    x.push_back(s.value);
    v.push_back(s.variance);
  }
  BaselineFit fit;
  if (!FitBaseline(t, x, v, &fit).ok()) return std::nullopt;  // inputs validated above; cannot fail
  if (!use_slope) {
    cautions->push_back(
        {std::string(q == Quantity::kForce ? "drift-no-temperature-slope" : "drift-ei-no-temperature-slope"),
         std::string("The ") + name + " baseline spans less than " +
             Num("%g", kMinBaselineTemperatureSpread_c) +
             " K of temperature (or lacks temperatures): its temperature effect was not estimated, so a "
             "temperature change may be reported as drift."});
  }
  return fit;
}

struct RuleArm {
  bool armed = true;
  // Returns true when the condition starts to hold (fires once per episode).
  bool Update(bool condition) {
    if (!condition) {
      armed = true;
      return false;
    }
    if (!armed) return false;
    armed = false;
    return true;
  }
};

// Two-tier absolute rule (header item 4): the watch fires when the 95 %
// interval first reaches below the limit without being wholly below it,
// the confident tier when its top drops below the limit. Returns the tier
// that fires at this point, if any.
struct TieredArm {
  RuleArm possibly, surely;
  std::optional<std::string> Update(double lo, double hi, double limit) {
    const bool sure = hi < limit;
    const bool maybe = lo < limit;
    const bool fire_watch = possibly.Update(maybe) && !sure;
    if (!maybe) surely.armed = true;  // re-armed only when the interval is back above the limit
    const bool fire_sure = sure && surely.armed;
    if (sure) surely.armed = false;
    if (fire_sure) return std::string("alert");
    if (fire_watch) return std::string("watch");
    return std::nullopt;
  }
};

const char* InspectText(Quantity q, bool low) {
  if (q == Quantity::kForce) {
    return low ? "Inspect the end anchorages, nuts, wedges or turnbuckles for slip or loosening, the "
                 "supports for "
                 "movement, and the member for corrosion or cracks; check the sensors and their mounting."
               : "Inspect the supports and the adjoining structure for movement or settlement that loads the "
                 "member, and the end connections; check the sensors and their mounting.";
  }
  return low ? "Inspect the member for cracks, corrosion or section loss and the end connections for "
               "loosening "
               "(a change of end restraint also moves the identified stiffness); check the sensors."
             : "Inspect the end connections for seizing or added restraint and the member for attachments or "
               "repairs that were not in its description; check the sensors.";
}

// Residual and CUSUM rules of one quantity over the points after the baseline.
void ResidualRules(const std::vector<DriftPoint>& series, const std::vector<bool>& judged,
                   const BaselineFit& fit, Quantity q, const DriftSettings& settings, DriftReport* report,
                   std::size_t* extrapolated, std::size_t* no_temperature) {
  const bool force = q == Quantity::kForce;
  const std::string rule_z = force ? "force-residual" : "ei-residual";
  const std::string rule_c = force ? "force-cusum" : "ei-cusum";
  const char* name = force ? "Axial force" : "Bending stiffness";
  const auto fmt = [force](double v) { return force ? Kn(v) : Ei(v); };

  std::vector<DriftEvidence> run;  // current run of |z| > threshold, same sign
  bool run_fired = false;
  double cusum = 0;
  std::vector<DriftEvidence> cusum_run;  // points since C was last 0
  for (std::size_t i = 0; i < series.size(); ++i) {
    if (!judged[i]) continue;
    const std::optional<Sample> s = SampleOf(series, i, q);
    if (!s) continue;
    if (fit.has_slope && !s->temperature_c) {
      ++*no_temperature;
      continue;  // no prediction: neither extends nor breaks a run
    }
    const double t0 = fit.has_slope ? *s->temperature_c : fit.mean_temperature_c;
    if (fit.has_slope && (t0 < fit.min_temperature_c || t0 > fit.max_temperature_c)) ++*extrapolated;
    const double pred = fit.Predict(t0);
    const double z = (s->value - pred) / std::sqrt(fit.PredictionVariance(t0) + s->variance);
    DriftEvidence ev{i, series[i].id, series[i].time_s, s->value, pred, s->value - pred, z, std::nullopt};
    PointAssessment& pa = report->points[i];
    (force ? pa.force_z : pa.ei_z) = z;

    // Sustained exceedance: `consecutive` points beyond the threshold on
    // the same side.
    const bool beyond = std::abs(z) > settings.z_threshold;
    if (beyond && !run.empty() && (*run.back().z > 0) != (z > 0)) {
      run.clear();
      run_fired = false;
    }
    if (beyond) {
      run.push_back(ev);
      if (!run_fired && run.size() >= settings.consecutive) {
        run_fired = true;
        const bool low = z < 0;
        std::vector<DriftEvidence> evidence(run.end() - static_cast<std::ptrdiff_t>(settings.consecutive),
                                            run.end());
        const DriftEvidence& last = evidence.back();
        std::string msg = std::string(name) + " " + fmt(last.value) + " is " + fmt(std::abs(*last.residual)) +
                          " (" + Num("%.1f", 100.0 * std::abs(*last.residual) / std::abs(pred)) + " %) " +
                          (low ? "below" : "above") + " the temperature-compensated baseline " + fmt(pred) +
                          " (z = " + Num("%.1f", z) + ", beyond " + Num("%g", settings.z_threshold) + " on " +
                          std::to_string(settings.consecutive) + " consecutive estimates). " +
                          InspectText(q, low);
        report->alerts.push_back({rule_z, "alert", i, std::move(evidence), {rule_z, std::move(msg)}});
      }
    } else {
      run.clear();
      run_fired = false;
    }

    // One-sided lower CUSUM (Page 1954; Montgomery section 9.1):
    // C_i = max(0, C_{i-1} - z_i - k).
    cusum = std::max(0.0, cusum - z - settings.cusum_k);
    ev.cusum = cusum;
    (force ? pa.force_cusum : pa.ei_cusum) = cusum;
    if (cusum == 0) {
      cusum_run.clear();
    } else {
      cusum_run.push_back(ev);
    }
    if (cusum > settings.cusum_h) {
      double mean_residual = 0;
      for (const DriftEvidence& e : cusum_run) mean_residual += *e.residual;
      mean_residual /= static_cast<double>(cusum_run.size());
      std::string msg = std::string(name) + " has shifted down: cumulative sum " + Num("%.1f", cusum) +
                        " > " + Num("%g", settings.cusum_h) + " over " + std::to_string(cusum_run.size()) +
                        " estimates, mean residual " + fmt(mean_residual) +
                        " against the temperature-compensated "
                        "baseline. " +
                        InspectText(q, true);
      report->alerts.push_back({rule_c, "alert", i, cusum_run, {rule_c, std::move(msg)}});
      cusum = 0;  // restart after a signal
      cusum_run.clear();
    }
  }
}

}  // namespace

double BaselineFit::PredictionVariance(double temperature_c) const {
  double line = residual_variance / static_cast<double>(n);
  if (has_slope) {
    const double d = temperature_c - mean_temperature_c;
    line += residual_variance * d * d / sxx;
  }
  return line + extra_variance;
}

Status FitBaseline(const std::vector<double>& temperatures_c, const std::vector<double>& values,
                   const std::vector<double>& variances, BaselineFit* out) {
  const std::size_t n = values.size();
  if (n < kMinBaselinePoints) {
    return Status::InvalidArgument("baseline has " + std::to_string(n) + " points, fewer than " +
                                   std::to_string(kMinBaselinePoints));
  }
  if (variances.size() != n || (!temperatures_c.empty() && temperatures_c.size() != n)) {
    return Status::InvalidArgument("baseline sizes differ: " + std::to_string(n) + " values, " +
                                   std::to_string(variances.size()) + " variances, " +
                                   std::to_string(temperatures_c.size()) + " temperatures");
  }
  for (std::size_t i = 0; i < n; ++i) {
    if (!std::isfinite(values[i]) || !(variances[i] >= 0) || !std::isfinite(variances[i]) ||
        (!temperatures_c.empty() && !std::isfinite(temperatures_c[i]))) {
      return Status::InvalidArgument("baseline point " + At(i) + " is not finite or has a negative variance");
    }
  }
  BaselineFit f;
  f.n = n;
  const double dn = static_cast<double>(n);
  double ybar = 0, mean_var = 0;
  for (std::size_t i = 0; i < n; ++i) {
    ybar += values[i];
    mean_var += variances[i];
  }
  ybar /= dn;
  f.mean_estimate_variance = mean_var / dn;
  double sse = 0;
  if (!temperatures_c.empty()) {
    double tbar = 0;
    for (double t : temperatures_c) tbar += t;
    tbar /= dn;
    double sxx = 0, sxy = 0;
    for (std::size_t i = 0; i < n; ++i) {
      sxx += (temperatures_c[i] - tbar) * (temperatures_c[i] - tbar);
      sxy += (temperatures_c[i] - tbar) * (values[i] - ybar);
    }
    if (!(sxx > 0))
      return Status::InvalidArgument("baseline temperatures are all equal: the slope is undefined");
    f.has_slope = true;
    f.mean_temperature_c = tbar;
    f.sxx = sxx;
    // Least squares (MPV section 2.2): b1 = Sxy / Sxx, b0 = ybar at Tbar.
    f.slope_per_c = sxy / sxx;
    f.intercept = ybar;
    const auto [lo, hi] = std::minmax_element(temperatures_c.begin(), temperatures_c.end());
    f.min_temperature_c = *lo;
    f.max_temperature_c = *hi;
    for (std::size_t i = 0; i < n; ++i) {
      const double r = values[i] - f.Predict(temperatures_c[i]);
      sse += r * r;
    }
    f.residual_variance = sse / (dn - 2.0);  // two parameters fitted
  } else {
    f.intercept = ybar;
    for (double y : values) sse += (y - ybar) * (y - ybar);
    f.residual_variance = sse / (dn - 1.0);  // one parameter fitted
  }
  f.extra_variance = std::max(0.0, f.residual_variance - f.mean_estimate_variance);
  *out = f;
  return Status::Ok();
}

Status DetectDrift(const std::vector<DriftPoint>& series, const DriftSettings& settings, DriftReport* out) {
  if (Status s = ValidateSettings(settings); !s.ok()) return s;
  if (Status s = ValidateSeries(series); !s.ok()) return s;
  DriftReport report;
  report.notice = StandingNotice();
  report.points.resize(series.size());

  // 1. Baseline membership; `judged` marks the points the residual rules
  // see. Unusable points (item 5) are in neither; a restart (item 6)
  // leaves the points before it out of both.
  std::vector<std::size_t> base;
  std::vector<bool> judged(series.size(), false);
  const std::optional<double> start = settings.baseline_start_s;
  const bool window = settings.baseline_from_s.has_value() && (!start || *settings.baseline_from_s >= *start);
  std::size_t excluded = 0;
  for (std::size_t i = 0; i < series.size(); ++i) {
    const double t = series[i].time_s;
    PointAssessment& pa = report.points[i];
    pa.excluded = !series[i].usable;
    if (pa.excluded) {
      ++excluded;
      continue;
    }
    if (start && t < *start) continue;
    const bool in = window ? (t >= *settings.baseline_from_s && t < *settings.baseline_to_s)
                           : base.size() < settings.baseline_count;
    pa.in_baseline = in;
    if (in) base.push_back(i);
    judged[i] = !in && (!window || t >= *settings.baseline_to_s);
  }
  if (start) {
    report.cautions.push_back({"drift-baseline-restarted",
                               "The baseline restarts at a logbook entry: earlier estimates are judged by "
                               "the absolute rules only."});
  }
  if (excluded > 0) {
    report.cautions.push_back({"drift-unusable-excluded",
                               std::to_string(excluded) +
                                   " estimates whose identification was judged unusable were left out of "
                                   "the baseline and every rule."});
  }
  // A window is complete by definition (FitQuantity cautions when it holds
  // too few points); a count-based baseline waits for its K points.
  const bool baseline_complete = window || base.size() >= settings.baseline_count;
  if (!baseline_complete) {
    report.cautions.push_back(
        {"drift-baseline-forming", "The baseline is still forming (" + std::to_string(base.size()) + " of " +
                                       std::to_string(settings.baseline_count) +
                                       " estimates): only the absolute rules were applied."});
  }

  // 2. Baseline fits and 3. residual rules.
  std::size_t extrapolated = 0, no_temperature = 0;
  if (baseline_complete) {
    report.force_baseline = FitQuantity(series, base, Quantity::kForce, &report.cautions);
    report.ei_baseline = FitQuantity(series, base, Quantity::kEi, &report.cautions);
    if (report.force_baseline) {
      ResidualRules(series, judged, *report.force_baseline, Quantity::kForce, settings, &report,
                    &extrapolated, &no_temperature);
    }
    if (report.ei_baseline) {
      ResidualRules(series, judged, *report.ei_baseline, Quantity::kEi, settings, &report, &extrapolated,
                    &no_temperature);
    }
  }
  const std::size_t shortest = std::min(report.force_baseline ? report.force_baseline->n : kCusumFullBaseline,
                                        report.ei_baseline ? report.ei_baseline->n : kCusumFullBaseline);
  if ((report.force_baseline || report.ei_baseline) && shortest < kCusumFullBaseline) {
    report.cautions.push_back(
        {"drift-cusum-short-baseline",
         "The baseline has " + std::to_string(shortest) + " estimates (fewer than " +
             std::to_string(kCusumFullBaseline) +
             "): the cumulative-sum rule raises more false alarms than its nominal rate; "
             "a longer baseline window makes it more reliable."});
  }
  if (extrapolated > 0) {
    report.cautions.push_back(
        {"drift-temperature-outside-baseline",
         std::to_string(extrapolated) +
             " residuals were taken at temperatures outside the baseline's range [" +
             Num("%.1f", report.force_baseline ? report.force_baseline->min_temperature_c
                                               : report.ei_baseline->min_temperature_c) +
             ", " +
             Num("%.1f", report.force_baseline ? report.force_baseline->max_temperature_c
                                               : report.ei_baseline->max_temperature_c) +
             "] C: the temperature compensation is extrapolated there."});
  }
  if (no_temperature > 0) {
    report.cautions.push_back(
        {"drift-missing-temperature", std::to_string(no_temperature) +
                                          " estimates carry no temperature and were not "
                                          "compared with the temperature-compensated baseline."});
  }

  // 4. Absolute rules, on every usable point, in two tiers (header item 4).
  TieredArm below_design, compression, ei_loss;
  const auto push = [&report](std::size_t i, const std::string& rule, const std::string& tier,
                              const DriftEvidence& e, const std::string& message) {
    const std::string code = tier == "watch" ? rule + "-watch" : rule;
    report.alerts.push_back({code, tier, i, {e}, {code, message}});
  };
  const auto range = [](double lo, double hi, const auto& fmt) {
    return "95 % interval " + fmt(lo) + " to " + fmt(hi);
  };
  const auto kn = [](double v) { return Kn(v); };
  const auto ein = [](double v) { return Ei(v); };
  for (std::size_t i = 0; i < series.size(); ++i) {
    const DriftPoint& p = series[i];
    if (!p.usable) continue;
    const double lo = p.force_ci95_low_n.value_or(p.force_n - kZ975 * p.force_std_n);
    const double hi = p.force_ci95_high_n.value_or(p.force_n + kZ975 * p.force_std_n);
    const DriftEvidence ev{i,           p.id, p.time_s, p.force_n, std::nullopt, std::nullopt, std::nullopt,
                           std::nullopt};
    if (settings.design_force_n && *settings.design_force_n > 0) {
      const double limit = settings.min_force_share_of_design * *settings.design_force_n;
      if (auto tier = below_design.Update(lo, hi, limit)) {
        const bool sure = *tier == "alert";
        push(i, "force-below-design", *tier, ev,
             "Axial force " + Kn(p.force_n) + " (" + range(lo, hi, kn) + ") is " +
                 (sure ? "below" : "possibly below") + " " +
                 Num("%.0f", 100 * settings.min_force_share_of_design) + " % of the design force " +
                 Kn(*settings.design_force_n) + " (" + Kn(limit) + ")" +
                 (sure ? " with 95 % confidence. " : ": the interval straddles the limit. ") +
                 InspectText(Quantity::kForce, true) +
                 (sure ? " Have a structural engineer assess whether the member still carries its intended "
                         "load."
                       : " A repeat record narrows the interval."));
      }
    }
    if (settings.designed_for_tension) {
      if (auto tier = compression.Update(lo, hi, 0.0)) {
        const bool sure = *tier == "alert";
        push(i, "compression", *tier, ev,
             "Estimated axial force " + Kn(p.force_n) + " (" + range(lo, hi, kn) + ") is " +
                 (sure ? "compressive with 95 % confidence"
                       : "possibly compressive (the interval reaches below 0)") +
                 " in a member designed for tension. Inspect the member for bowing "
                 "or buckling, its end connections, and the supports and adjoining structure for "
                 "movement; check the sensors and the member description.");
      }
    }
    if (p.ei_nm2) {
      std::optional<double> reference = settings.nominal_ei_nm2;
      if (!reference && report.ei_baseline) {
        const BaselineFit& b = *report.ei_baseline;
        reference = b.Predict(b.has_slope && p.temperature_c ? *p.temperature_c : b.mean_temperature_c);
      }
      if (!reference) continue;
      const double limit = (1.0 - settings.max_ei_loss_share) * *reference;
      const double elo = *p.ei_nm2 - kZ975 * *p.ei_std_nm2, ehi = *p.ei_nm2 + kZ975 * *p.ei_std_nm2;
      if (auto tier = ei_loss.Update(elo, ehi, limit)) {
        const bool sure = *tier == "alert";
        DriftEvidence e = ev;
        e.value = *p.ei_nm2;
        e.predicted = *reference;
        e.residual = *p.ei_nm2 - *reference;
        push(i, "ei-loss", *tier, e,
             "Bending stiffness " + Ei(*p.ei_nm2) + " (" + range(elo, ehi, ein) + ") is " +
                 Num("%.0f", 100 * (1 - *p.ei_nm2 / *reference)) + " % below the reference " +
                 Ei(*reference) + (sure ? "; below the limit " : "; possibly below the limit ") + Ei(limit) +
                 " (" + Num("%.0f", 100 * settings.max_ei_loss_share) + " % loss)" +
                 (sure ? " with 95 % confidence. " : ". ") + InspectText(Quantity::kEi, true));
      }
    }
  }
  std::stable_sort(report.alerts.begin(), report.alerts.end(),
                   [](const DriftAlert& a, const DriftAlert& b) { return a.index < b.index; });
  *out = std::move(report);
  return Status::Ok();
}

const char* RuleTier(const std::string& rule) {
  static const std::string kSuffix = "-watch";
  const bool watch = rule.size() > kSuffix.size() &&
                     rule.compare(rule.size() - kSuffix.size(), kSuffix.size(), kSuffix) == 0;
  return watch ? "watch" : "alert";
}

std::optional<DriftAlert> StaleDataAlert(const std::vector<DriftPoint>& series, const DriftSettings& settings,
                                         double now_s) {
  if (!settings.max_silence_s) return std::nullopt;
  for (std::size_t k = series.size(); k-- > 0;) {
    const DriftPoint& p = series[k];
    if (!p.usable) continue;
    const double silence = now_s - p.time_s;
    if (!(silence > *settings.max_silence_s)) return std::nullopt;
    DriftEvidence e{k, p.id, p.time_s, p.force_n, std::nullopt, std::nullopt, std::nullopt, std::nullopt};
    std::string msg = "No usable record for " + Num("%.1f", silence / 3600.0) + " h (longer than the " +
                      Num("%.1f", *settings.max_silence_s / 3600.0) +
                      " h set for this member): the member is not being watched. Check the gateway, the "
                      "sensors and their power, and repeat records the identification judged unusable.";
    return DriftAlert{"stale-data", "alert", k, {e}, {"stale-data", std::move(msg)}};
  }
  return std::nullopt;
}

}  // namespace taut::estimation
