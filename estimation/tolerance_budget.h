// Input tolerances in the intervals, and the uncertainty budget of N
// (issue 17). Applied after the fit, from outside the fit itself.
//
// What the engineer does not know exactly (model/member.h Tolerances: the
// length, the section, E, the density, the sensor positions, each one
// standard deviation) enters the estimate as nuisance parameters p
// propagated by LINEARISED SENSITIVITIES at the modal optimum. With r the
// weighted residual vector of the modal fit (identify.h: frequency
// residuals (f_k - f_model,k) / sigma_k of the paired modes, shape
// residuals (phi - alpha psi) / shape_std, the EI prior (ln EI -
// ln EI_nominal(p)) / sigma_prior, and the uniform-range prior of a fixity
// the data leave open) and theta the unknowns (N, ln EI, the elastic
// fixities), the optimum satisfies J^T r = 0; the implicit-function theorem
// gives its motion with p:
//     d theta / d p = -(J^T J)^-1 J^T dr/dp          (Gauss-Newton form)
// (e.g. Seber and Wild, Nonlinear Regression, 1989, sec. 2.1 for the
// Gauss-Newton normal equations). J and dr/dp are central differences of
// residuals computed through model/ (ModalModel::Solve on the member with
// one input moved). The tolerance variance of a quantity q is
//     var_tol(q) = sum_p (dq/dp sigma_p)^2      (inputs independent),
// and its interval is widened in quadrature: each 95 % half-width h
// becomes sqrt(h^2 + (1.96 sigma_tol)^2) (EI on the log scale, fixities
// clipped to [0, 1]).
//
// Why linearised and not a refit per input: the tolerances are limited to
// kMaxToleranceShare (10 %) of their quantity and N depends smoothly on
// them (N ~ L^2 m f^2 for a tension-dominated member: at 10 % of length
// the second-order term is 5 % of the first), so the first-order term is
// accurate where the tolerance is a tolerance; it costs two model solves
// per input instead of a whole identification. The tests check it against
// refits of the whole identification on a perturbed member
// (tests/estimation/test_tolerance_budget.cpp).
//
// The time-domain path: its estimate gets the same tolerance terms,
// computed on the modal model at the modal estimate (the time-domain model
// has the same inputs and the modal frequencies carry the force
// information both fits share). Held, not propagated: an estimated axial
// support stiffness (taken at its estimate), and the mesh (chosen by the
// fit).
//
// The budget of N (uncertainty_budget.h): the fit's variance, from its
// reported interval, split by the linearised covariance
// C J_g^T J_g C (C = (J^T J)^-1, g the residual group: frequencies, shapes,
// EI prior, fixity range; scaled by the reduced chi-square when above 1),
// the part of the reported interval beyond the linear one (order
// hypotheses and the time-domain fit's modal floor: model choice; a profile
// interval: nonlinearity; a Wald interval wider than the split, as where the
// data leave a fixity open: fit_unsplit), and each tolerance.
#pragma once

#include <string>
#include <vector>

#include "estimation/identify.h"
#include "model/member.h"

namespace taut::estimation {

// The sensitivity of the estimate to one uncertain input.
struct InputSensitivity {
  model::ResolvedTolerance input;
  double d_axial_force = 0.0;        // dN/dp [N per unit of p]
  double d_bending_stiffness = 0.0;  // dEI/dp [N m^2 per unit of p]
  double d_fixity_left = 0.0;        // dr/dp (0 for a declared end)
  double d_fixity_right = 0.0;
};

// The tolerance terms of a modal estimate (ComputeToleranceTerms).
struct ToleranceTerms {
  bool ok = false;
  std::string reason;  // why not ok (then nothing is widened)
  std::vector<InputSensitivity> inputs;
  // Linearised variance of N [N^2] by residual group (already scaled by
  // max(1, reduced chi-square)).
  double var_n_frequencies = 0.0;
  double var_n_shapes = 0.0;
  double var_n_prior = 0.0;
  double var_n_fixity_range = 0.0;
  int model_solves = 0;  // forward-model solves spent
};

// The sensitivities of the modal estimate `modal` (IdentifyFromModes of
// `member` with `options`) to every input of ResolveTolerances(member).
// Preconditions: ValidateMember(member).ok(); `modal` came from
// IdentifyFromModes on this member. A result with ok = false (no paired
// mode, a model failure) carries the reason.
ToleranceTerms ComputeToleranceTerms(const model::Member& member, const IdentifyOptions& options,
                                     const Estimate& modal);

// Widens the intervals of N, EI and the fixities of `estimate` (modal or
// time-domain) by `terms` in quadrature and sets estimate->uncertainty_budget
// and estimate->simplified (the simplified formulas beside the estimate,
// simplified_formulas.h). Without ok terms the intervals stay as they are,
// the budget holds the fit's sources only and the caution
// "tolerances-not-propagated" (reduced-confidence) says so; the caller
// sets the verdict afterwards (cautions.h MakeVerdict).
void ApplyToleranceTerms(const model::Member& member, const ToleranceTerms& terms, Estimate* estimate);

// The one-sigma of N (force = true) or of EI of `estimate` without the
// member tolerances: the fit's part, which varies from one record of a
// member to the next. The tolerances' error is shared by every estimate
// made with one member description (a length read 1 % long reads every
// force about 2 % high), so rules that compare a member's estimates with
// each other (the drift residual and CUSUM rules, estimation/drift.h) weigh
// this std; intervals compared with absolute limits keep the whole.
// Without a budget: the quantity's std.
double RepeatableStd(const Estimate& estimate, bool force);

}  // namespace taut::estimation
