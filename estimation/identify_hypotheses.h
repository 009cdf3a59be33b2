// The hypothesis search of model updating (issue 12, failure classes 2
// and 3): which numbering of the measured modes and which EI prior the
// reported estimate rests on. Internal to estimation/.
//
// - One identification (IdentifyWithPrior, identify.cpp) fits one
//   numbering (the order search's winner, pairing.h, or a forced one) with
//   one EI prior, from several starts (GridStarts).
// - An EI prior conflict (kPriorConflictSigma, identify.h) reruns it with
//   the prior relaxed (ResolvePriorConflict; caution "stiffness-off-nominal").
// - A close rival numbering is fitted too and either replaces the estimate
//   or widens the N interval to cover both (CompareRivalNumbering; caution
//   "order-hypotheses-disagree").
// Scores are in chi-square units (twice the Ceres cost).
#pragma once

#include <vector>

#include "estimation/identify.h"
#include "estimation/identify_problem.h"
#include "estimation/pairing.h"

namespace taut::estimation::fit {

// One identification with the EI prior of `options` (the whole sequence of
// the file comment of identify.h). `forced_orders` (optional): the
// numbering to use instead of the search's (one entry per measured mode in
// ascending frequency, 0 = left out); `search` (optional) receives the
// search's hypothesis with its rival. Defined in identify.cpp.
Status IdentifyWithPrior(const model::Member& member, const ModalIdentification& ident,
                         const IdentifyOptions& options, Estimate* estimate,
                         const std::vector<int>* forced_orders = nullptr, OrderHypothesis* search = nullptr);

// The starts of the fit after the first (the pairing point): the fixities
// of the elastic ends on options.start_fixities at the regression start
// `x_reg` (both ends elastic: the same value at both, the grid's diagonal).
std::vector<Unknowns> GridStarts(const FitContext& ctx, const Unknowns& x_reg,
                                 const IdentifyOptions& options);

// Starts stay below this share of the critical compression at their own
// fixities: the model is evaluated at them, and near buckling the lowest
// frequency falls to zero and its eigenvector turns ill-conditioned.
inline constexpr double kStartCriticalShare = 0.9;
// x[0] (the internal force N / N_scale), raised to -kStartCriticalShare of
// the critical compression of the member at x's EI and fixities (the Euler
// load of the restrained member, ModalModel::CriticalCompression; sag
// ignored) when below it; `fallback_n` (the pinned Euler load at nominal EI)
// when that cannot be computed. One model call, only when x[0] < 0.
double AboveCompressionFloor(const FitContext& ctx, const Unknowns& x, double fallback_n);

// Compression (issue 12, failure class 3): the starts at N = -s P_cr for s
// in kCompressionStartShares, P_cr the critical load at `at`'s EI with
// mid-range fixities of its elastic ends (the pinned-beam regression that
// gives the first start knows no restraint, and a restrained strut carries
// up to four times the pinned Euler load).
inline constexpr double kCompressionStartShares[] = {0.3, 0.6, 0.85};
std::vector<Unknowns> CompressionStarts(const FitContext& ctx, const Unknowns& at);

// The EI prior conflict check on `est` (made with `options`' prior, `search`
// its order search): may replace both with the relaxed-prior identification.
void ResolvePriorConflict(const model::Member& member, const ModalIdentification& ident,
                          const IdentifyOptions& options, Estimate* est, OrderHypothesis* search);

// EA of the sag term (issue 12): the fit takes EA from the fitted E
// (FitContext::ea_from_fitted_e, IdentifyOptions::sag_ea_from_fitted_e).
// Where EA matters (`sag_possible`: vertical plane, axially restrained; and
// EA times e^(+-prior std) moves a paired mode by more than its std, i.e.
// 2 std end to end), the fit is polished from `best` with EA from the
// nominal E (a section whose I, not E, is off). When that explains the data
// better by the 95 % chi-square threshold (scaled by the reduced
// chi-square when above 1; `dof` the fit's degrees of freedom) it replaces
// `best` and ctx stays on the nominal EA; when it scores alike, its force is
// returned so that the N interval can cover both.
struct SagComparison {
  bool alternative_fitted = false;
  bool switched = false;        // best replaced, ctx.ea_from_fitted_e now false
  bool comparable = false;      // within the threshold, not switched
  double other_force_n = 0.0;   // N with the nominal EA (when comparable)
  double other_ea_share = 1.0;  // nominal EA over the fitted-E EA
};
SagComparison CompareSagAxialRigidity(FitContext& ctx, const IdentifyOptions& options, bool sag_possible,
                                      int dof, FitOutcome* best);

// Competing numberings: fits the search's rival when it scored within
// kRivalSearchScore of the winner (see identify.h).
void CompareRivalNumbering(const model::Member& member, const ModalIdentification& ident,
                           const IdentifyOptions& options, const OrderHypothesis& search, Estimate* est);

}  // namespace taut::estimation::fit
