// Model updating: identified modes -> axial force N, bending stiffness EI
// and end fixities of a member, with intervals, identifiability and
// cautions (issue 4; docs/DESIGN.md "Estimation" step 4).
//
// Sign convention: N > 0 in tension. Units: SI, suffix on every field.
//
// Unknowns (internal, scaled so that Ceres' relative finite-difference step
// means the same thing for each, see identify_problem.h):
//   N                      axial force, bounded below only by buckling,
//   ln EI                  EI > 0,
//   r_left, r_right        fixity factors in [0, 1] of `elastic` ends only
//                          (pinned, clamped and known-spring ends are held),
//   rho                    axial support ratio k_ax / (EA/L) in [0, 1], only
//                          for a declared axial support spring in the
//                          vertical plane whose sag coupling moves the lowest
//                          paired mode by more than its std (the declared
//                          stiffness is then the start; `fixed` and `free`
//                          axial ends are held as declared).
// Objective (Ceres: cost = 1/2 sum of squared residuals):
//   per paired mode k:   (f_k - f_model,k(theta)) / sigma_k,
//                        sigma_k = max(frequency_std_hz, kMinRelativeFrequencyStd f_k);
//   per paired mode k and in-plane channel c (two or more channels):
//                        (phi_k,c - alpha_k psi_k,c(theta)) / shape_std,
//                        alpha_k = psi_k^T phi_k / psi_k^T psi_k (the scale of
//                        the model shape psi fitted in closed form, so the
//                        residual is free of the measured shape's scale and sign);
//   prior:               (ln EI - ln EI_nominal) / ei_prior_sigma_ln.
// Uncertainty: Gauss-Newton covariance from ceres::Covariance (DENSE_SVD)
// scaled by the reduced chi-square when above 1; the N interval (and the EI
// interval, on ln EI) is the wider
// of the Wald interval and the profile-likelihood interval (N held on a
// grid, the other unknowns re-optimised, boundary at a rise of the
// chi-square by 3.841, the 95 % point of chi-square with one degree of
// freedom; Pawitan, In All Likelihood, 2001, ch. 3 and 9).
// Identifiability: the eigen-decomposition of J^T J (J the weighted
// Jacobian at the estimate, columns in natural units: N relative to itself,
// ln EI, r over its range) names the unknowns with a component >= 0.3 in
// any direction whose std exceeds half a natural unit. Such a fixity is
// reported with the whole range [0, 1] and enters the covariance with a
// uniform-range prior (std 1/sqrt(12)), so N and EI are not conditioned on
// an arbitrary point of the valley; the profile of N re-optimises it within
// [0, 1]. A caution names what cannot be separated; an N interval the data
// do not close is reported as the searched range with a caution.
// Sequence: order search and pinned-beam regression (pairing.h) -> pairing
// at a Newton-corrected mid-fixity start -> mesh chosen so its frequency
// error is below 0.1 std -> Levenberg-Marquardt from every start (the
// first one and a grid of fixities; in compression also a grid over N / P_cr) -> re-pairing at the best ->
// covariance, identifiability, profile -> cautions.
#pragma once

#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "estimation/cautions.h"
#include "estimation/modes.h"
#include "estimation/pairing.h"
#include "estimation/simplified_formulas.h"
#include "estimation/uncertainty_budget.h"
#include "model/member.h"
#include "model/status.h"

namespace taut::estimation {

// Frequency std floor as a share of the frequency: an identified std below
// 1e-4 f is not credible for a real member (environmental scatter alone is
// larger; common practice, recalled value), and a tiny std would make the
// fit chase discretisation error.
inline constexpr double kMinRelativeFrequencyStd = 1e-4;
// Fixity within this distance of 0 or 1 is reported as "at a bound".
inline constexpr double kFixityBoundDistance = 0.01;
// Reduced chi-square above this: poor-fit caution.
inline constexpr double kPoorFitReducedChi2 = 3.0;
// Compression |N| above this share of the critical load: near-buckling caution.
inline constexpr double kNearBucklingShare = 0.5;
// |N - N_design| above this share of N_design: far-from-design caution.
inline constexpr double kDesignForceDeviationShare = 0.3;
// Impact records: a shift of the backbone frequency over the decay above
// this share raises the large-amplitude caution (0.5 % is several frequency
// stds of a good record; common practice, recalled value).
inline constexpr double kLargeAmplitudeFrequencyShift = 0.005;
// EI prior conflict (identify_hypotheses.cpp ResolvePriorConflict): an estimate more than
// kPriorConflictSigma prior stds from the nominal EI (or a poor fit) makes
// the identification run again with the prior relaxed to
// kRelaxedPriorSigmaLn (one std = a factor e^2 = 7.4: the 4-12 times errors
// of a wrong nominal EI lie within 1.3 std); the relaxed result is kept
// when it is off-nominal and explains the data better by more than
// kPriorConflictChi2 (chi-square units, a three-sigma improvement).
inline constexpr double kPriorConflictSigma = 3.0;
inline constexpr double kRelaxedPriorSigmaLn = 2.0;
inline constexpr double kPriorConflictChi2 = 9.0;
// Competing numberings: the search's rival (its winner shifted by +-1 or +-2
// orders) is fitted too when its search score is within this of the
// winner's (chi-square units; the search's pinned-beam regression only
// resolves a frequency to 1 %, so it decides order shifts loosely).
inline constexpr double kRivalSearchScore = 16.0;
// Slenderness L / r_g below which Euler-Bernoulli theory is doubtful
// (docs/DESIGN.md; shear and rotary inertia matter for stockier members).
inline constexpr double kStockySlenderness = 50.0;

struct IdentifyOptions {
  // One-sigma of the shape components, as a share of the largest component
  // (shapes are scaled to max |.| = 1): 0.05 is a common-practice figure
  // for ambient-vibration shapes with a few sensors (recalled value).
  double shape_std = 0.05;
  // Weak prior on EI around the member's nominal E I: one sigma of ln EI.
  double ei_prior_sigma_ln = 0.15;
  // Mesh of the forward model. The identification starts with
  // max(min_elements, elements_per_order * highest order) elements and
  // doubles them until the frequency change on doubling is below
  // max_mesh_error_sigma of every frequency std.
  int min_elements = 20;
  int elements_per_order = 4;
  double max_mesh_error_sigma = 0.1;
  // Ceres limits per start.
  int max_iterations = 60;
  // Fixity grid for the extra starts (values for each elastic end; with
  // two elastic ends both take the same value: identify_hypotheses.h).
  std::vector<double> start_fixities = {0.2, 0.8};
  PairingOptions pairing;
  // Compute the profile-likelihood interval of N (a few extra fits).
  bool profile_axial_force = true;
  // Compute the profile-likelihood interval of EI (ln EI held on a grid,
  // the others re-optimised; a few extra fits).
  bool profile_bending_stiffness = true;
  // Estimate the axial support stiffness where it applies (a declared
  // support spring, vertical plane, sag coupling that moves the lowest
  // mode by more than its std; identify.cpp). false: the declared value holds.
  bool estimate_axial_support = true;
  // EA of the sag and stretching term from the fitted E (E = EI_fit /
  // I_nominal of the plane; EA = E A) instead of the nominal E (issue 12).
  // A section turned the other way or a corroded one changes I and A
  // differently, so where EA matters the nominal EA is fitted too and the
  // data choose, or the N interval covers both (identify_hypotheses.h
  // CompareSagAxialRigidity; caution "sag-stiffness-uncertain").
  bool sag_ea_from_fitted_e = true;
};

// One identified quantity: value, one-sigma std and 95 % interval, or
// `fixed` when the member description sets it (no interval then).
struct EstimatedQuantity {
  double value = 0.0;
  double std = 0.0;
  double ci95_low = 0.0;
  double ci95_high = 0.0;
  bool fixed = false;
  // false when the data cannot determine it (see Estimate::identifiability);
  // the interval is then the whole admissible range or the profile range.
  bool identifiable = true;
};

// A measured mode with its pairing.
struct EstimatedMode {
  IdentifiedMode measured;  // order set when paired
  bool paired = false;
  double model_frequency_hz = 0.0;  // at the estimate (paired modes)
  double mac = 0.0;                 // measured vs model shape at the in-plane channels
  // Unpaired, and its frequency fits a bending mode of the member's other
  // plane (cross-axis content of tilted sensors; other_plane.h), of this
  // order there (0 when not other_plane).
  bool other_plane = false;
  int other_plane_order = 0;
};

// FitSummary::model values (docs/FORMATS.md section 3 `fit.model`).
inline constexpr const char* kFitModelModal = "modal";          // tangent modal model fitted to modes
inline constexpr const char* kFitModelTransient = "transient";  // nonlinear transient fitted to a decay

struct FitSummary {
  // kFitModelModal or kFitModelTransient: which fit the reported N, EI and
  // fixities come from (estimation/identify_record.h chooses).
  std::string model = kFitModelModal;
  bool converged = false;
  double cost = 0.0;          // Ceres cost 1/2 sum r^2 at the best start
  double reduced_chi2 = 0.0;  // 2 cost / degrees of freedom (0 when dof <= 0)
  int degrees_of_freedom = 0;
  int iterations = 0;  // of the best start
  int starts = 0;
  int starts_at_best = 0;        // starts that ended at the best minimum
  double seconds = 0.0;          // wall time of the whole identification
  long forward_model_calls = 0;  // every ModalModel::Solve of the identification
  long profile_model_calls = 0;  // of which in the profile-likelihood interval
  int elements = 0;              // mesh used
  // "wald" or "profile" (the wider one), or "hypotheses": the union of the
  // intervals of two numberings of the modes that fit equally well, or
  // "sag-stiffness": widened to cover the force with EA from the nominal E
  // as well as from the fitted one (both fit alike), or for
  // the time-domain fit "modal-floor": its Wald interval widened to the
  // modal estimate's relative width (identify_record.cpp).
  std::string axial_force_interval = "wald";
  // The same for EI: "wald" (log-normal, from the std of ln EI) or
  // "profile" (the profile likelihood of ln EI, when wider).
  std::string bending_stiffness_interval = "wald";
  // true when the sag and stretching term of the reported estimate used EA
  // from the fitted E (EA = EA_nominal EI / EI_nominal,
  // IdentifyOptions::sag_ea_from_fitted_e), false when it used the nominal
  // E (the option off, or the data preferred it). Consumers that evaluate
  // the fit's model again (tolerance_budget.h) follow the same rule.
  bool sag_ea_from_fitted_e = false;
};

// The time-domain fit behind a "transient" estimate (identify_record.h).
struct TransientSummary {
  double window_start_s = 0.0;  // fitted window, from the record's first row
  double window_end_s = 0.0;
  double sample_rate_hz = 0.0;  // of the fitted window (after low-pass and decimation)
  double low_pass_hz = 0.0;     // pass-band edge of the low-pass applied to the record (0 = none)
  int modes = 0;                // linear modes in the fitted initial state
  int model_runs = 0;           // transient model runs (fit and covariance)
  double residual_rms_m_s2 = 0.0;
  double signal_rms_m_s2 = 0.0;
  double damping_ratio = 0.0;                // fitted Rayleigh ratio at modes 1 and 2
  double axial_force_swing_n = 0.0;          // max - min of N(t) over the fitted window
  std::vector<double> modal_displacement_m;  // fitted initial modal amplitudes (max |w| = 1 shapes)
  // The modal (linear) estimate of N the fit started from, kept so that the
  // amplitude bias of the linear reading is visible.
  double modal_axial_force_n = 0.0;
};

// The amplitude check that chooses the model (identify_record.h): the
// nonlinear (membrane-stretching) frequency shift of the dominant mode at
// the record's amplitude, against that mode's frequency std.
struct AmplitudeCheck {
  int order = 0;                    // bending order of the mode checked (0: no check made)
  double frequency_hz = 0.0;        // its measured frequency
  double frequency_std_hz = 0.0;    // its std (with the kMinRelativeFrequencyStd floor)
  double amplitude_m = 0.0;         // displacement amplitude used (peak or RMS, see `basis`)
  double frequency_shift_hz = 0.0;  // predicted upward shift at that amplitude
  double force_bias_n = 0.0;        // force a linear model adds to explain the shift
  std::string basis;                // "free-decay peak" or "ambient RMS (upper bound)"
  bool exceeds_std = false;         // frequency_shift_hz > frequency_std_hz
};

struct Estimate {
  model::Direction direction = model::Direction::kVertical;
  std::vector<std::string> channels;  // the in-plane record channels used
  // The channels of every EstimatedMode::measured.shape (all record channels).
  std::vector<std::string> shape_channels;
  EstimatedQuantity axial_force_n;  // tension > 0
  EstimatedQuantity bending_stiffness_nm2;
  EstimatedQuantity fixity_left;  // r in [0, 1]
  EstimatedQuantity fixity_right;
  // Axial support ratio rho = k_ax / (EA/L) in [0, 1] (k_ax the series axial
  // stiffness of member and supports, parameters.h): 1 = rigid supports,
  // 0 = supports free to move axially. `fixed` (the declared value) unless
  // estimated; the support stiffness k_s = (EA/L) rho / (1 - rho) [N/m]
  // (+inf for rigid supports).
  EstimatedQuantity axial_support_ratio{1.0, 0.0, 1.0, 1.0, true, true};
  double axial_support_stiffness_n_per_m = std::numeric_limits<double>::infinity();
  // |f(rho = 1) - f(rho = 0)| of the lowest paired mode at the pairing point
  // [Hz] (computed for a declared support spring in the vertical plane only).
  double axial_support_sag_shift_hz = 0.0;
  std::vector<EstimatedMode> modes;     // every measured mode, ascending frequency
  double critical_compression_n = 0.0;  // at the estimate
  // Plain-words identifiability verdict, e.g. "all unknowns separated" or
  // "the data cannot separate: N, fixity left".
  std::string identifiability;
  FitSummary fit;
  std::optional<TransientSummary> transient;  // set when fit.model is "transient"
  AmplitudeCheck amplitude;                   // set by IdentifyRecord
  Cautions cautions;
  // The worst caution severity and one line for the technician
  // (cautions.h MakeVerdict); set whenever `cautions` is final.
  Verdict verdict;
  std::string notice;
  // Issue 17, set after the fit by estimation/tolerance_budget.h
  // (IdentifyRecord and the supplied-modes path; not by IdentifyFromModes):
  // the variance budget of N and the two simplified formulas beside it.
  std::optional<UncertaintyBudget> uncertainty_budget;
  std::optional<SimplifiedComparison> simplified;
};

// Estimates N, EI and the elastic fixities of `member` from `modes`.
// Preconditions checked (kInvalidArgument, message names the value):
// ValidateMember(member); every channel of `modes` is a sensor of the
// member; shapes have one entry per channel; frequencies and stds finite
// and > 0; at least one mode pairs with a model bending mode.
// The plane is that of the majority of the record's channels (vertical on a
// tie); channels of the other plane are ignored with a caution.
// A result with cautions is ok(); kNumerical when every start failed.
// After the fit (issue 12): an EI prior conflict reruns it with the prior
// relaxed (kPriorConflictSigma above; caution "stiffness-off-nominal"); a
// close rival numbering of the modes is fitted too and either replaces the
// estimate or widens the N interval to cover both ("order-hypotheses-
// disagree"); the refusal tests of refusal.h run; Estimate::verdict is set.
// A refused estimate is still ok() here, with verdict "unusable"
// (IdentifyRecord turns it into an error).
Status IdentifyFromModes(const model::Member& member, const ModalIdentification& modes,
                         const IdentifyOptions& options, Estimate* estimate);

// Appends the cautions that depend only on the member and the estimated
// force (docs/DESIGN.md "Cautions"): compression (near buckling above
// kNearBucklingShare of critical_compression_n > 0), a member stockier than
// kStockySlenderness in `plane`, and a force more than
// kDesignForceDeviationShare away from the member's design force.
void AppendForceCautions(const model::Member& member, model::Direction plane, double axial_force_n,
                         double critical_compression_n, Cautions* cautions);

}  // namespace taut::estimation
