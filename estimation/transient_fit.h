// Time-domain fit of the quasi-static-axial von Karman model
// (model/transient.h) to the measured accelerations of a free-decay window:
// the path for records whose amplitude raises the frequencies (membrane
// stretching), where a linear modal fit would read the member as tighter
// than it is.
//
// Unknowns (scaled to order one inside the solver):
//   N_s    static axial force [N], tension > 0 (unbounded; a step into
//          buckling is rejected by the model and Ceres shortens it),
//   ln EI  natural log of the bending stiffness, within a factor
//          kEiBoundFactor of the start (optional, fit_bending_stiffness),
//   r_l, r_r  fixity factors of `elastic` ends only, in
//          [kFixityMargin, 1 - kFixityMargin],
//   zeta   ONE Rayleigh damping ratio (model/transient.h: the ratio at the
//          first two linear modes), in [kMinDampingRatio, kMaxDampingRatio],
//   q_k, v_k  initial modal displacement [m] and velocity [m/s] of the
//          modes k = 1..modes: w(0) = sum_k q_k ModeShape(k, 1),
//          w_t(0) = sum_k v_k ModeShape(k, 1) (ModeShape scaled to a unit
//          largest |w| along the member, at the current parameters).
// Residuals: one block, r_{i,c} = a_model(t_i, c) - a_measured(t_i, c) over
// all samples i and channels c [m/s^2], derivatives by central differences
// (ceres::DynamicNumericDiffCostFunction, CENTRAL), Levenberg-Marquardt.
//
// Start: N, EI, fixities and damping from TransientFitStart (in the
// pipeline, the linear identify result); q_k, v_k from a linear projection
// of the first kProjectionPeriods periods of mode 1 on the undamped linear
// modal responses  a_c(t) = -sum_k phi_k(x_c) w_k^2 (q_k cos w_k t +
// (v_k / w_k) sin w_k t)  at the start parameters (linear least squares).
// Because the time-domain misfit is many-valued in the frequency (a phase
// error of a half period over the window is a local minimum), the fit is
// continued over growing windows: kContinuationPeriods periods of mode 1
// first, then kContinuationGrowth times longer, each stage starting from the previous result.
//
// Uncertainty: the covariance of the unknowns is (J^T J)^{-1} s^2 at the
// solution (ceres::Covariance, dense SVD), with the reduced chi-square
// s^2 = sum r^2 / (n_residuals - n_unknowns) as the noise variance
// (Seber and Wild, Nonlinear Regression, 1989, sec. 2.1). 95 % intervals
// are value +- 1.96 std (normal approximation); for EI the interval is
// exp(ln EI +- 1.96 std_lnEI) and std_EI = EI std_lnEI (delta method).
// Samples of a free decay are serially correlated only through the model;
// the noise is assumed white, so the intervals are optimistic when the
// misfit is structured (the poor-fit caution says so).
#pragma once

#include <Eigen/Core>
#include <optional>
#include <string>
#include <vector>

#include "estimation/cautions.h"
#include "estimation/record.h"
#include "model/member.h"
#include "model/status.h"

namespace taut::estimation {

// ---- Limits (named, with units) ----
inline constexpr int kMaxTransientModes = 3;
// EI is kept within [start / f, start * f].
inline constexpr double kEiBoundFactor = 10.0;
// Fixities stay this far from 0 and 1, so that central differences never
// leave [0, 1] (step 1e-6 of the value).
inline constexpr double kFixityMargin = 1e-4;
// Damping ratio bounds [-]: strictly positive so that the central-
// difference step stays inside the model's valid range [0, 1).
inline constexpr double kMinDampingRatio = 1e-5;
inline constexpr double kMaxDampingRatio = 0.2;
// Window of the initial projection and of the first continuation stage, in
// periods of linear mode 1 at the start parameters.
inline constexpr double kProjectionPeriods = 1.0;
inline constexpr double kContinuationPeriods = 2.0;
// Each continuation stage is this many times longer than the previous one.
inline constexpr int kContinuationGrowth = 4;
// Relative cost decrease that ends an intermediate continuation stage (the
// last stage uses Ceres' default, 1e-6).
inline constexpr double kStageFunctionTolerance = 1e-3;
// Default integration steps per period of the highest fitted mode (taken
// at 1.5 times its linear start frequency): the midpoint rule's period
// error is (w h)^2 / 12 (Hairer, Lubich and Wanner, Geometric Numerical
// Integration, 2006, sec. I.1), 3.3e-4 at 100 steps, and less for the lower
// modes, which carry N.
inline constexpr int kStepsPerPeriod = 100;
// Cautions: "large-amplitude" when the dynamic axial force swing exceeds
// this share of |N_s| + pi^2 EI / L^2 (frequency shift of order half of it);
// "poor-fit" when the residual RMS exceeds this share of the signal RMS.
inline constexpr double kLargeAmplitudeForceShare = 0.01;
inline constexpr double kPoorFitRmsShare = 0.2;
// "wide-interval" when the 95 % interval of N is wider than
// kWideIntervalShare (cautions.h) of |N|, as in identify.
// Two-sided 95 % quantile of the standard normal distribution.
inline constexpr double kZ95 = 1.959963984540054;

struct TransientFitStart {
  double axial_force_n = 0.0;                   // tension > 0
  std::optional<double> bending_stiffness_nm2;  // default: nominal E I
  std::optional<double> fixity_left;            // used for `elastic` ends; default kDefaultElasticFixity
  std::optional<double> fixity_right;
  double damping_ratio = 0.005;  // clipped into [kMinDampingRatio, kMaxDampingRatio]
};

struct TransientFitOptions {
  int modes = 1;                           // 1..kMaxTransientModes modes in the initial state
  int target_elements = 10;                // fit mesh (model/beam_fe.h BuildMesh)
  bool fit_bending_stiffness = true;       // false: EI held at the start value
  double gravity_m_s2 = 9.80665;           // as model/parameters.h (0 switches sag off)
  int max_iterations = 50;                 // LM iterations per continuation stage
  bool continuation = true;                // growing windows (see the file comment)
  int steps_per_period = kStepsPerPeriod;  // >= 10; more = smaller time-step bias, slower
};

// A fitted quantity with its uncertainty.
struct FitEstimate {
  double value = 0.0;
  double std = 0.0;  // one standard deviation (NaN when the covariance failed)
  double lower95 = 0.0;
  double upper95 = 0.0;
  bool at_bound = false;  // the solution sits on a parameter bound
};

struct TransientFitResult {
  FitEstimate axial_force_n;               // N_s [N], tension > 0
  FitEstimate bending_stiffness_nm2;       // EI [N m^2] (std 0 when held)
  std::optional<FitEstimate> fixity_left;  // set for `elastic` ends
  std::optional<FitEstimate> fixity_right;
  double damping_ratio = 0.0;
  std::vector<double> modal_displacement_m;  // q_k, k = 1..modes
  std::vector<double> modal_velocity_m_s;    // v_k
  double residual_rms_m_s2 = 0.0;
  double signal_rms_m_s2 = 0.0;
  double reduced_chi_square = 0.0;    // s^2 [(m/s^2)^2]
  double axial_force_swing_n = 0.0;   // max N(t) - min N(t) of the fitted run
  double peak_amplitude_ratio = 0.0;  // max |w| at the sensors / radius of gyration
  int model_runs = 0;                 // transient runs in all (fit + covariance)
  int iterations = 0;                 // LM iterations in all stages
  bool converged = false;
  Cautions cautions;
  std::string notice;  // StandingNotice()
};

// Fits the window `acceleration_m_s2` (rows = samples at t = i /
// sample_rate_hz, the first row the start of the free decay; columns = the
// member's sensors of plane `direction` in member order, m/s^2).
// Errors: kInvalidArgument for a bad member, window (fewer samples than
// 4 x unknowns, non-finite values, column count), options or start;
// kBuckled when the start is beyond buckling; kNumerical when the solver
// cannot evaluate the model at the start.
Status FitTransient(const model::Member& member, model::Direction direction,
                    const Eigen::MatrixXd& acceleration_m_s2, double sample_rate_hz,
                    const TransientFitStart& start, const TransientFitOptions& options,
                    TransientFitResult* result);

// As above from a Record: its channels are matched to the member's sensors
// of plane `direction` by name (every such sensor must be in the record);
// the window is [window_start_s, window_start_s + window_duration_s) from
// the record's first row (duration 0 = to the end).
Status FitTransient(const model::Member& member, model::Direction direction, const Record& record,
                    double window_start_s, double window_duration_s, const TransientFitStart& start,
                    const TransientFitOptions& options, TransientFitResult* result);

}  // namespace taut::estimation
