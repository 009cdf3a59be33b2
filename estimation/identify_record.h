// The whole identification of one record: record -> modes (modal_id.h) ->
// model updating (identify.h) -> for free decays and large amplitudes the
// time-domain fit of the nonlinear model (transient_fit.h). The one entry
// point that `taut identify` and the service's workers share, so both give
// the same estimate for the same inputs.
//
// Choice of the model (Estimate::fit.model, docs/FORMATS.md section 3):
//  - "transient" for records with excitation = impact, and for records of
//    any excitation whose dominant-mode amplitude makes the nonlinear
//    (membrane-stretching) frequency shift exceed that mode's frequency std
//    (NonlinearFrequencyShift below) when the record holds a free decay
//    (FindFreeDecay, modal_id.h): the linear modal model reads the
//    amplitude-raised frequencies as tension, the transient model does not.
//  - "modal" otherwise. A large-amplitude record without a free decay (a
//    stationary response at large amplitude) cannot be fitted in the time
//    domain without its forces; it keeps the modal estimate with a
//    "large-amplitude" caution stating the predicted shift and the force
//    bias it implies. When the time-domain fit fails, the modal estimate is
//    reported with a caution saying so.
// Either way a caution says which model was used and why.
//
// The time-domain path (TransientPathOptions):
//  1. Window: from the free decay's start (kImpactGuard_s after the largest
//     sample) for at most max_window_periods periods of mode 1.
//  2. Modes: the linear modes 1..k, k = the highest paired order, at most
//     max_modes; the modes above are removed from the record by a
//     zero-phase Kaiser low-pass (conditioning.h KaiserLowPass) with its
//     pass band to f_k (1 + margin) (margin: twice the predicted amplitude
//     shift, at least kTransientPassMargin) and its stop band from
//     kTransientStopShare f_{k+1}, and the record is decimated to about
//     twice the stop-band edge (so that the filtered noise stays close to
//     white, which the fit's covariance assumes). The filter's edge
//     outputs are dropped (no transients), so the fitted window starts
//     half a filter length after the decay's start.
//  3. FitTransient from the modal estimate (N, EI, fixities, the damping of
//     the lowest paired mode). EI is held at the modal value when fewer
//     than two modes are paired (one frequency cannot separate N and EI).
//  4. The estimate: N, EI, fixities and their Wald intervals from the
//     time-domain fit; the measured modes with model frequencies and MAC at
//     the new estimate; cautions of the record, the modal identification,
//     the transient fit and the member. The noise variance comes from the
//     residual, so fit.reduced_chi2 is 1 by construction and the fit quality
//     is TransientSummary::residual_rms_m_s2 against signal_rms_m_s2; an
//     estimated axial support stiffness is held at the modal value.
#pragma once

#include <functional>

#include "estimation/identify.h"
#include "estimation/modal_id.h"
#include "estimation/record.h"
#include "estimation/transient_fit.h"
#include "model/member.h"
#include "model/parameters.h"
#include "model/status.h"

namespace taut::estimation {

// Pass-band margin above f_k at least (5 %: room for a moderate amplitude
// shift), and the stop-band edge as a share of f_{k+1}.
inline constexpr double kTransientPassMargin = 0.05;
inline constexpr double kTransientStopShare = 0.97;

enum class FitPath {
  kAuto,       // the rule of the file comment
  kModal,      // always the modal estimate (the amplitude check still raises its caution)
  kTransient,  // the time-domain fit whenever the record holds a free decay
};

struct TransientPathOptions {
  int max_modes = 3;                 // 1..kMaxTransientModes (transient_fit.h)
  double max_window_periods = 30.0;  // of linear mode 1: longer windows cost more model time
  int target_elements = 10;          // fit mesh (model/beam_fe.h BuildMesh)
  int steps_per_period = kStepsPerPeriod;
};

struct IdentifyRecordOptions {
  ModalIdOptions modal;
  IdentifyOptions identify;
  // Called with the share of the work done, 0..1, non-decreasing, from the
  // calling thread; may be empty.
  std::function<void(double)> progress;
  FitPath path = FitPath::kAuto;
  TransientPathOptions transient;
};

// Preconditions as ReadRecordCsv (record read against `member`) and
// IdentifyFromModes. The estimate carries the record's quality cautions
// ahead of its own. kInvalidArgument when no mode can be identified or
// paired (message for the engineer, no path prefix), or for path =
// kTransient on a record without a free decay. A refusal (a caution of
// severity "unusable", e.g. a record that does not fit the member) also
// returns kInvalidArgument, with the verdict's summary as the message
// ("Repeat the record: <why>."), and then still fills `estimate` (verdict
// "unusable"), so that a caller can show why; the service's worker fails
// the job with that message and keeps the record.
Status IdentifyRecord(const model::Member& member, const Record& record, const IdentifyRecordOptions& options,
                      Estimate* estimate);

// Predicted upward shift [Hz] of the frequency of linear mode `order` of
// `member` in plane `direction` at `params`, when the mode vibrates with
// displacement amplitude `amplitude_m` at the point of the member where
// its shape is largest (peak = true: a free vibration of that amplitude;
// peak = false: a stationary random vibration of that RMS).
//
// Single-mode reduction of the quasi-static-axial model (transient.h): with
// w = phi q (phi mass-normalised) the stretching e = (1/2) gamma q^2,
// gamma = phi^T G phi, and the modal equation is the Duffing oscillator
//   q'' + omega^2 q + k3 q^3 = 0,   k3 = (k_ax / 2) gamma^2,
// k_ax the series axial stiffness (parameters.h). Its backbone to first
// order (Lindstedt-Poincare; Nayfeh and Mook, Nonlinear Oscillations, 1979,
// sec. 2.3) is  d omega / omega = (3/8) k3 a_q^2 / omega^2;  for a Gaussian
// response of RMS s_q statistical linearisation (T. K. Caughey, Equivalent
// linearization techniques, J. Acoust. Soc. Am. 35, 1963) gives
// omega_eq^2 = omega^2 + 3 k3 s_q^2, i.e. d omega / omega = (3/2) k3 s_q^2 / omega^2.
// gamma is d(omega^2)/dN (Hellmann-Feynman: dK_T/dN = G), taken by central
// differences of the model without sag; a_q = amplitude_m / max|phi|.
// For a pinned-pinned beam with immovable ends this is the first-order
// Woinowsky-Krieger (1950) result (3/32) k_ax L (pi/L)^2 a^2 / (N + pi^2 EI/L^2) f,
// (3/32) (a/r)^2 f at N = 0 (docs/DESIGN.md).
// `force_bias_n` (optional) receives the force a linear model would add to
// explain that shift: 2 omega d omega / gamma.
Status NonlinearFrequencyShift(const model::Member& member, model::Direction direction,
                               const model::ModalParameters& params, int order, double amplitude_m, bool peak,
                               double* shift_hz, double* force_bias_n = nullptr);

}  // namespace taut::estimation
