// The identification result as JSON (docs/FORMATS.md section 3, a contract).
//
// Keys of the contract: verdict ({"code", "summary"}: the worst caution
// severity and one line for the technician, estimation/cautions.h),
// axial_force_n, bending_stiffness_nm2, end_fixity.{left,right}, modes[],
// fit, cautions (each {"code", "severity", "message"}), notice. An identified
// quantity is {"value", "std", "ci95": [low, high]}; a quantity fixed by the
// member description is {"value", "fixed": true} with no interval. SI units;
// axial force N > 0 in tension.
//
// Keys beyond the contract (docs/FORMATS.md: "at least these keys"):
// "axial_support" ({"ratio": quantity of rho = k_ax / (EA/L) in [0, 1],
// fixed unless estimated (estimation/identify.h), "stiffness_n_per_m": the
// support stiffness at that ratio, null for rigid supports}), "plane",
// "identifiability", "critical_compression_n", "plane" on every mode
// ("declared", "other": fits the other plane's modes, or "unexplained"),
// "unpaired_modes" (measured
// modes that pair with no model mode; no order, no model values), and in
// "fit": "starts_at_best", "forward_model_calls", "elements",
// "degrees_of_freedom", "axial_force_interval" ("wald" or "profile": which
// interval was the wider and is reported), "bending_stiffness_interval"
// (the same for EI), and for fit.model "transient"
// "fit.transient" (window_s [start, end] from the record's first row,
// sample_rate_hz and low_pass_hz of the fitted window, modes, model_runs,
// residual_rms_m_s2, signal_rms_m_s2, damping_ratio, axial_force_swing_n,
// modal_displacement_m, modal_axial_force_n: the linear estimate the fit
// started from); "amplitude_check" (order, frequency_hz, frequency_std_hz,
// amplitude_m, basis, frequency_shift_hz, force_bias_n, exceeds_std: the
// check that chooses the model, estimation/identify_record.h);
// "uncertainty_budget" and "simplified_formulas" (issue 17, docs/FORMATS.md
// section 3.6) when the estimate carries them.
#pragma once

#include <nlohmann/json.hpp>

#include "estimation/identify.h"

namespace taut::server {

nlohmann::json EstimateToJson(const estimation::Estimate& estimate);

// [{"code", "severity", "message"}] (severity: estimation/cautions.h SeverityOf).
nlohmann::json CautionsToJson(const estimation::Cautions& cautions);

// {"code": "usable" | "reduced-confidence" | "unusable", "summary": one line}.
nlohmann::json VerdictToJson(const estimation::Verdict& verdict);

}  // namespace taut::server
