// Cross-axis content (issue 12, failure class 4): a sensor is never aligned
// exactly with its plane, so each channel also carries the modes of the
// member's other plane (other I, other end restraint, sag only in the
// vertical one). Measured modes that pair with no mode of the declared
// plane and whose frequency fits a bending mode of the other plane are
// marked as other-plane modes (EstimatedMode::other_plane): reported, not
// used, and named by one caution of severity info ("other-plane-modes").
//
// The other plane's band for order n: from the model of the other plane at
// the low ends of the N and EI intervals with elastic ends pinned (r = 0)
// to the high ends with elastic ends clamped (r = 1), EI_other = E_fit
// I_other (E_fit = EI / I of the declared plane), widened by two frequency
// stds. Declared (pinned, clamped, spring) ends hold in both planes.
// Marking never changes the refusal tests (refusal.h counts every unpaired
// strong mode): the bands of a long member overlap, so a record of another
// member would find its modes "explained" by them.
#pragma once

#include "estimation/identify.h"

namespace taut::estimation {

// Preconditions: `est` is a finished modal estimate of `member` (N, EI,
// modes with pairing, fit.elements). Two model solves when a mode is
// unpaired, none otherwise; adds them to est->fit.forward_model_calls.
void MarkOtherPlaneModes(const model::Member& member, Estimate* est);

}  // namespace taut::estimation
