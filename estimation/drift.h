// Drift detection on a member's series of estimates: has the axial force or
// the bending stiffness moved beyond what temperature and the estimates'
// own scatter explain?
//
// Pure arithmetic on the series; no storage, no time zone, no I/O. The
// worker (server/) loads a member's estimates, calls DetectDrift after each
// new estimate and raises the alerts whose `index` is the newest point.
//
// Units: force in N (tension > 0), bending stiffness EI in N m^2,
// temperature in degrees C, time in seconds on any fixed epoch.
//
// 1. Baseline. The first `baseline_count` points (default 10), or those with
//    time in [baseline_from_s, baseline_to_s) when a window is given.
// 2. Temperature regression over the baseline, separately for force and for
//    EI: ordinary least squares x = b0 + b1 (T - Tbar) (Montgomery, Peck and
//    Vining, Introduction to Linear Regression Analysis, 5th ed. 2012,
//    section 2.2: least-squares estimates b1 = Sxy / Sxx, b0 = ybar), with
//    the residual variance s^2 = SSE / (n - 2) (section 2.2.3). Section and
//    equation numbers of MPV and Montgomery below are recalled from memory. An axially restrained member
//    loses about E A alpha per kelvin of warming (docs/DESIGN.md), which b1 absorbs. With a baseline that
//    spans less than kMinBaselineTemperatureSpread_c, or whose points lack temperatures, the slope cannot be
//    estimated: the mean alone is fitted (s^2 = SSE / (n - 1)) and a caution says so.
// 3. Standardised residual of a later point (x, std, T0):
//      z = (x - x_pred(T0)) / sqrt(s_pred^2 + std^2),
//      s_pred^2 = s^2 (1/n + (T0 - Tbar)^2 / Sxx) + sigma_extra^2,
//      sigma_extra^2 = max(0, s^2 - mean over the baseline of std_i^2).
//    The first term of s_pred^2 is the variance of the fitted mean at T0
//    (MPV section 2.4.2). The prediction variance of a new observation (MPV
//    section 2.5) is s^2 (1 + 1/n + (T0 - Tbar)^2 / Sxx); here its "1 * s^2" part is split into
//    the scatter the baseline shows beyond its estimates' own standard
//    deviations (sigma_extra^2: unmodelled effects) and the new estimate's
//    own variance std^2, so that a poor record (large std) is not mistaken
//    for drift and a good one is judged at its own precision. When every
//    std equals the baseline scatter, z is MPV's prediction-interval
//    statistic.
// 4. Rules (each fires once when its condition starts to hold and is armed
//    again when the condition clears):
//    - "force-residual" / "ei-residual": |z| > z_threshold (default 3) on
//      `consecutive` (default 2) successive points with z of the same sign.
//    - "force-cusum" / "ei-cusum": one-sided lower CUSUM on z (Page, 1954,
//      Continuous inspection schemes, Biometrika 41; Montgomery,
//      Introduction to Statistical Quality Control, 7th ed. 2013, section
//      9.1, the tabular CUSUM): C_i = max(0, C_{i-1} - z_i - k), signal
//      when C_i > h, then C restarts at 0. Defaults k = 0.5 (tuned to a
//      one-sigma shift, Montgomery's recommendation) and h = 8 rather than
//      Montgomery's 4 or 5: by Siegmund's approximation (D. Siegmund,
//      Sequential Analysis, 1985, as quoted in Montgomery section 9.1) the
//      one-sided in-control average run length is about 19,000 estimates
//      at h = 8 against 940 at h = 5, while a sustained one-sigma shift is
//      still found after about 16 estimates (10 at h = 5). A monitoring
//      service sends someone to site for each alert, so it needs the
//      longer in-control run. All residuals share the baseline's
//      estimation error, which shortens the in-control run well below
//      these figures for a short baseline (measured in test_drift.cpp: with
//      the default 10-point baseline about 6 % of 30-day no-loss series
//      raise a CUSUM alert; with 50 points the figures above apply); the
//      report carries the caution "drift-cusum-short-baseline" then. Lower side
//      only: a loss of force or stiffness is what this rule is for; a rise
//      is caught by the two-sided residual rule.
//    - The absolute rules compare the estimate's 95 % interval [lo, hi]
//      with a limit, in two tiers:
//        "<rule>"        below with 95 % confidence: hi < limit;
//        "<rule>-watch"  possibly below: lo < limit <= hi (the interval
//                        straddles the limit).
//      The interval is the stored one (force_ci95_*_n) when given, else
//      value +- z_0.975 std with z_0.975 = 1.959964 (the standard normal
//      quantile, Abramowitz and Stegun, Handbook of Mathematical
//      Functions, 1964, table 26.1). A watch fires when the interval first
//      reaches below the limit and is not yet confidently below; the
//      confident tier fires when hi first drops below the limit (so a
//      member sliding down raises the watch, then the alert). Both are
//      armed again when lo is back at or above the limit.
//      - "force-below-design": limit min_force_share_of_design * design
//        force (default 0.5, a project default to be set per member).
//      - "compression": limit 0, in a member designed for tension.
//      - "ei-loss": limit (1 - max_ei_loss_share) of the reference EI
//        (the nominal EI if given, else the baseline mean at T0); default
//        share 0.2, a project default.
//    Points inside the baseline are judged by the absolute rules only.
// 5. Unusable estimates (DriftPoint::usable false: the identification's
//    verdict said "repeat the record") take no part: they are in no
//    baseline, judged by no rule and raise nothing (PointAssessment::
//    excluded).
// 6. A new baseline (DriftSettings::baseline_start_s, e.g. from a logbook
//    entry "re-tensioned"): the baseline is formed from the usable points
//    at or after that time; earlier points are judged by the absolute
//    rules only. A baseline window that starts before it is set aside.
// 7. Stale data (StaleDataAlert): no usable estimate for longer than the
//    member's max_silence_s; judged against a clock the caller gives.
//
// Every alert carries the evidence (the points involved with residuals) and
// a caution naming what to inspect; no alert or its absence says that a
// member is safe (the report carries the standing notice).
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "estimation/cautions.h"
#include "model/status.h"

namespace taut::estimation {

// Smallest baseline a regression is fitted to (n - 2 >= 1 degree of freedom).
inline constexpr std::size_t kMinBaselinePoints = 3;
// A CUSUM on a baseline shorter than this gets the caution
// "drift-cusum-short-baseline": the baseline's shared estimation error then
// raises its false-alarm rate noticeably (see the rules above). 50: the
// baseline length at which test_drift.cpp finds the CUSUM's false alarms
// consistent with Siegmund's run length (a measured value of this project).
inline constexpr std::size_t kCusumFullBaseline = 50;
// A baseline spanning less than this cannot separate the temperature slope
// from scatter; the mean alone is fitted. 2 K: a common daily swing is 5-15
// K, so a baseline narrower than 2 K means a few hours of data (common
// practice, not a published value).
inline constexpr double kMinBaselineTemperatureSpread_c = 2.0;

struct DriftPoint {
  std::int64_t id = 0;  // the caller's estimate id, echoed in the evidence
  double time_s = 0;    // non-decreasing along the series
  std::optional<double> temperature_c;
  double force_n = 0;      // tension > 0
  double force_std_n = 0;  // one standard deviation, >= 0
  std::optional<double> ei_nm2;
  std::optional<double> ei_std_nm2;  // required (>= 0) when ei_nm2 is set
  // The estimate's 95 % interval of the force (both or neither; lo <= force
  // <= hi). Absent: force +- 1.959964 force_std_n.
  std::optional<double> force_ci95_low_n, force_ci95_high_n;
  // false: the identification's verdict is "unusable" (see item 5).
  bool usable = true;
};

// The standard normal 0.975 quantile (Abramowitz and Stegun 1964, table
// 26.1: 1.959964; more digits from scipy.stats.norm.ppf(0.975)).
inline constexpr double kZ975 = 1.959963984540054;

struct DriftSettings {
  // Baseline: the first baseline_count points, unless both window bounds
  // are set.
  std::size_t baseline_count = 10;
  std::optional<double> baseline_from_s, baseline_to_s;

  double z_threshold = 3.0;     // > 0
  std::size_t consecutive = 2;  // >= 1
  double cusum_k = 0.5;         // reference value, in units of z, >= 0
  double cusum_h = 8.0;         // decision interval, in units of z, > 0

  std::optional<double> design_force_n;    // docs/FORMATS.md design_axial_force_n
  double min_force_share_of_design = 0.5;  // in (0, 1]
  bool designed_for_tension = true;        // compression rule on/off
  std::optional<double> nominal_ei_nm2;    // reference of the ei-loss rule
  double max_ei_loss_share = 0.2;          // in (0, 1)

  // Item 6: the baseline restarts here (s on the series' epoch).
  std::optional<double> baseline_start_s;
  // Item 7: longest time without a usable estimate before "stale-data"
  // (s, > 0); absent: the rule is off.
  std::optional<double> max_silence_s;
};

// Ordinary least squares of x on temperature over the baseline.
struct BaselineFit {
  std::size_t n = 0;                  // points used
  bool has_slope = false;             // false: mean only (see header comment)
  double mean_temperature_c = 0;      // Tbar
  double intercept = 0;               // b0 = x at Tbar (N or N m^2)
  double slope_per_c = 0;             // b1 (N/K or N m^2/K), 0 without slope
  double sxx = 0;                     // sum (T_i - Tbar)^2, K^2
  double residual_variance = 0;       // s^2
  double mean_estimate_variance = 0;  // mean of std_i^2 over the baseline
  double extra_variance = 0;          // sigma_extra^2 = max(0, s^2 - mean std_i^2)
  double min_temperature_c = 0, max_temperature_c = 0;

  double Predict(double temperature_c) const {
    return intercept + slope_per_c * (temperature_c - mean_temperature_c);
  }
  // s_pred^2 of the header comment at temperature_c.
  double PredictionVariance(double temperature_c) const;
};

// Fits x_i on t_i (sizes equal, >= kMinBaselinePoints; variances_i >= 0 are
// the estimates' own std_i^2). temperatures may be empty: mean only.
Status FitBaseline(const std::vector<double>& temperatures_c, const std::vector<double>& values,
                   const std::vector<double>& variances, BaselineFit* out);

struct DriftEvidence {
  std::size_t index = 0;  // into the series
  std::int64_t id = 0;
  double time_s = 0;
  double value = 0;                 // force (N) or EI (N m^2) of the point
  std::optional<double> predicted;  // baseline prediction at its temperature
  std::optional<double> residual;   // value - predicted
  std::optional<double> z;          // standardised residual
  std::optional<double> cusum;      // C_i after the point (cusum rules)
};

struct DriftAlert {
  std::string rule;  // machine code, see the header comment
  // "alert": a drift rule or an absolute rule with 95 % confidence;
  // "watch": an absolute rule whose limit lies inside the interval.
  std::string tier = "alert";
  std::size_t index = 0;  // the point at which the rule fired
  std::vector<DriftEvidence> evidence;
  Caution caution;  // code = rule; message: what moved and what to inspect
};

struct PointAssessment {
  bool in_baseline = false;
  bool excluded = false;                // unusable estimate (item 5): no rule saw it
  std::optional<double> force_z, ei_z;  // absent: baseline point or no prediction possible
  double force_cusum = 0, ei_cusum = 0;
};

struct DriftReport {
  std::optional<BaselineFit> force_baseline, ei_baseline;  // absent: too few points yet
  std::vector<PointAssessment> points;                     // one per series point
  std::vector<DriftAlert> alerts;                          // in series order
  Cautions cautions;                                       // about the analysis itself
  std::string notice;                                      // StandingNotice()
};

// Runs the baseline fit and every rule over `series` (ordered by time).
// Fails (kInvalidArgument, naming the field and index) on non-finite values,
// negative std, EI without its std, time going backwards, or settings out of
// range. A series shorter than the baseline is not an error: only the
// absolute rules run, with a caution.
Status DetectDrift(const std::vector<DriftPoint>& series, const DriftSettings& settings, DriftReport* out);

// The tier of a rule code: "watch" for the "-watch" codes, else "alert".
const char* RuleTier(const std::string& rule);

// Item 7: when settings.max_silence_s is set and the newest usable point of
// `series` (time order) is older than now_s - max_silence_s, the
// "stale-data" alert with that point as its evidence (index: that point).
// No usable point at all: nothing (the rule starts with the first one).
std::optional<DriftAlert> StaleDataAlert(const std::vector<DriftPoint>& series, const DriftSettings& settings,
                                         double now_s);

}  // namespace taut::estimation
