// The uncertainty budget of an estimate's axial force (issue 17;
// docs/FORMATS.md section 3 "uncertainty_budget"): how much of var(N) each
// source contributes, so that an engineer sees whether to measure the
// length again or to record longer. Filled by estimation/tolerance_budget.h.
//
// Units: N for the standard deviations; shares are of the total variance
// of N and sum to 1.
#pragma once

#include <optional>
#include <string>
#include <vector>

namespace taut::estimation {

// Source codes of BudgetSource::source that are not tolerance keys.
inline constexpr const char* kBudgetFrequencies = "frequencies";         // measured frequency stds
inline constexpr const char* kBudgetModeShapes = "mode_shapes";          // measured shape scatter
inline constexpr const char* kBudgetStiffnessPrior = "stiffness_prior";  // the nominal-EI prior
inline constexpr const char* kBudgetFixityRange = "fixity_range";        // fixities the data leave open
inline constexpr const char* kBudgetModelChoice = "model_choice";   // order hypotheses, model-error floor
inline constexpr const char* kBudgetNonlinearity = "nonlinearity";  // profile interval beyond the linear one
inline constexpr const char* kBudgetFit = "fit";                    // the fit, when the split failed
inline constexpr const char* kBudgetFitUnsplit = "fit_unsplit";  // rest of a Wald interval the split misses

struct BudgetSource {
  // kBudget* above, or the key of a member tolerance (docs/FORMATS.md
  // section 1 path without "$.", e.g. "length_tolerance_m",
  // "sensors[1].position_tolerance_m").
  std::string source;
  std::string label;   // plain words for the table and the page
  double std_n = 0.0;  // one-sigma contribution to N
  double share = 0.0;  // of var(N), in [0, 1]
  // Tolerance sources: the one-sigma tolerance used (unit of the key) and
  // whether it was the default of common practice (not declared).
  std::optional<double> tolerance;
  bool default_tolerance = false;
  std::string tolerance_unit;  // of `tolerance`: "m", "m^2", "m^4", "Pa", "kg/m3"
};

struct UncertaintyBudget {
  // sqrt(fit^2 + tolerances^2) = the larger half-width of the reported 95 %
  // interval of N / 1.96 (the quantity's std for a symmetric interval).
  double axial_force_std_n = 0.0;
  double fit_std_n = 0.0;        // the same of the fit's interval (before the tolerances)
  double tolerance_std_n = 0.0;  // all member tolerances together
  // The std of N [N] and of EI [N m^2] as the fit reported them, before the
  // tolerances were added: the part that varies from record to record of
  // one member description (tolerance_budget.h RepeatableStd).
  double repeatable_force_std_n = 0.0;
  double repeatable_bending_stiffness_std_nm2 = 0.0;
  // "linearised": sensitivities by the implicit-function theorem at the
  // modal optimum (tolerance_budget.h); the transient path uses those of
  // its modal estimate.
  std::string method = "linearised";
  std::vector<BudgetSource> sources;  // descending share
};

}  // namespace taut::estimation
