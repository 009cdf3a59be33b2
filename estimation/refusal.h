// Refusals: when an estimate must not be reported as a number for this
// member (issue 12, failure class 6: a record filed under the wrong member,
// or data the member model cannot explain). A refusal is a caution of
// severity "unusable" (cautions.h), so the verdict becomes "unusable",
// IdentifyRecord returns it as an error with the reason (identify_record.h)
// and the service keeps the record but stores no estimate.
//
// The tests, each on the finished modal estimate:
//  1. "record-not-member": most strong in-plane modes stay unpaired. A mode
//     is strong in the plane when its shape reaches kStrongInPlaneShare of
//     its largest component at an in-plane channel (shapes are scaled to
//     max |.| = 1 over all channels, so other-plane modes seen through
//     sensor misalignment stay below it). Refused when at least
//     kMinUnpairedForRefusal such modes are unpaired and they outnumber the
//     paired ones.
//  2. "record-not-member": the reduced chi-square is above
//     kRefusalReducedChi2: the model misses the modes by about
//     sqrt(kRefusalReducedChi2) = 10 frequency stds each, far beyond the
//     poor-fit caution (kPoorFitReducedChi2 = 3): the member description
//     (length, section, ends) does not describe the vibrating member.
//  3. "record-not-member": the estimated EI is more than kMaxStiffnessRatio
//     times off the nominal (times the orientation ratio (w/d)^2 of a
//     rectangle): the 4-12 times errors of a wrong E, corrosion or a
//     built-up section are accepted with a caution (identify.h, prior
//     conflict), a larger factor means another member.
//  4. "implausible-stress": the estimated tension stress N / A exceeds the
//     member's yield strength (material.yield_strength_pa) or, when that is
//     not given, DefaultYieldStrength_pa: a member cannot carry that force
//     elastically, so the number comes from a wrong record, member or
//     numbering of the modes.
#pragma once

#include <string>

#include "estimation/identify.h"
#include "model/member.h"

namespace taut::estimation {

inline constexpr double kStrongInPlaneShare = 0.5;
inline constexpr int kMinUnpairedForRefusal = 2;
inline constexpr double kRefusalReducedChi2 = 100.0;
inline constexpr double kMaxStiffnessRatio = 16.0;

// Plausibility bound of the tension stress [Pa] by material class, chosen
// from the nominal E when the member gives no yield strength. Generous on
// purpose (a refusal must never hit a real member), from common practice
// (recalled values, not a code table):
//   E >= 150 GPa (steels, wrought and cast iron): 1.86e9, the tensile
//     strength of the strongest common tension element, prestressing strand
//     grade 1860 (EN 10138-3, ASTM A416);
//   otherwise (aluminium alloys ~70 GPa, titanium ~110 GPa, fibre
//     composites): 1.0e9, above 7xxx aluminium (~0.5e9) and titanium grade 5
//     (~0.9e9) proof strengths.
double DefaultYieldStrength_pa(double elastic_modulus_pa);

// The bound used for `member` and where it comes from, e.g. "the declared
// yield strength 355 MPa" or "the default 1860 MPa for steel and iron".
double YieldStrengthOf(const model::Member& member, std::string* source);

// Measured modes of an estimate: paired ones, strong in-plane ones (test 1
// above) and those of them left unpaired.
struct StrongModeCount {
  int paired = 0;
  int strong = 0;
  int strong_unpaired = 0;
};
StrongModeCount CountStrongModes(const Estimate& e);

// Appends the refusal cautions (codes above) for the modal estimate `e` of
// `member` to e->cautions. Needs e->modes, e->channels, e->shape_channels,
// e->fit and e->axial_force_n filled.
void AppendRefusals(const model::Member& member, Estimate* e);

}  // namespace taut::estimation
