// The two simplified formulas a spreadsheet user applies to the same data,
// for comparison beside taut's estimate (never instead of it):
//
//  1. Taut string from the fundamental (Irvine, Cable Structures, 1981,
//     eq. 2.33 with the sag parameter set to zero; docs/DESIGN.md's pinned-beam
//     closed form with EI = 0):
//        N_string = 4 m L^2 f_1^2,
//  2. Pinned beam with tension, from the ordinary least-squares line of
//     f_n^2 / n^2 against n^2 over the identified orders (the pinned-pinned
//     closed form of docs/DESIGN.md squared):
//        f_n^2 / n^2 = N / (4 m L^2) + n^2 pi^2 EI / (4 m L^4),
//     intercept a -> N = 4 m L^2 a, slope b -> EI = 4 m L^4 b / pi^2.
//
// m is the bare mass per length rho A (what a spreadsheet uses; taut adds
// the sensor masses as point masses). The comparison also says why taut's
// value differs, naming each effect the simplified formulas leave out and
// its size for this member:
//   bending stiffness  gamma_1 = pi^2 EI / (N L^2): the fundamental of a
//                      pinned beam is sqrt(1 + gamma_1) times the string's,
//                      so the string formula reads N (1 + gamma_1);
//   end restraint      with xi = L sqrt(N / EI), a clamped end raises the
//                      frequencies of a taut beam by about 1/xi each (the
//                      boundary-layer estimate f = f_string (1 + 2/xi) for
//                      both ends clamped, recalled as common practice for
//                      stays and ties), so end fixities r_l, r_r move the
//                      force read by about 2 (r_l + r_r) / xi (linear in r:
//                      an estimate of size, not a correction);
//   self-weight sag    Irvine's parameter lambda^2 = (m g L cos(theta) / N)^2
//                      E A / N (Irvine and Caughey, 1974, with the
//                      member's own stretch only) for vertical vibration of a
//                      member with axially restrained ends: for small lambda^2
//                      their equation for the first symmetric in-plane mode,
//                      tan(w/2) = w/2 - (4/lambda^2)(w/2)^3, gives
//                      w = pi (1 + 4 lambda^2 / pi^4), so the force read from
//                      it moves by about 8 lambda^2 / pi^4;
//   sensor masses      total sensor mass as a share of m L (N read from a
//                      frequency is proportional to the mass per length).
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "model/member.h"

namespace taut::estimation {

// An effect is named in the reasons when its share exceeds 1 % (the
// accuracy a spreadsheet user expects of the formulas; common practice).
inline constexpr double kSimplifiedEffectShare = 0.01;
// Below this xi = L sqrt(N / EI) the boundary-layer estimate of end
// restraint does not hold (the layer, of width about L / xi, is no longer
// thin), and end restraint is named without a number.
inline constexpr double kBoundaryLayerMinXi = 10.0;
// Fixity factor above which end restraint is named for such a member.
inline constexpr double kSimplifiedFixityNote = 0.05;

struct SimplifiedComparison {
  std::optional<double> taut_string_force_n;  // needs the fundamental (order 1)
  std::optional<double> pinned_beam_force_n;  // needs two or more orders
  std::optional<double> pinned_beam_bending_stiffness_nm2;
  int modes_used = 0;                // orders entering the pinned-beam regression
  std::vector<std::string> reasons;  // why taut's estimate differs, one sentence each
};

// Irvine's lambda^2 of `member` at tension N > 0 [N] for vertical
// vibration with axially restrained ends (the formula above).
double IrvineLambda2(const model::Member& member, double axial_force_n);

// The share by which self-weight sag moves the force read from the first
// symmetric vertical mode, 8 lambda^2 / pi^4 (small-lambda^2 expansion of
// Irvine and Caughey's equation, above).
double SagForceShare(double lambda2);

// The comparison for `member` vibrating in `plane`, from the identified
// orders and frequencies (`order_frequency_hz`: pairs of bending order >= 1
// and frequency [Hz] > 0, any order, each order once) and taut's estimate
// (N [N], tension > 0; EI [N m^2]; fixities in [0, 1]).
SimplifiedComparison CompareWithSimplifiedFormulas(
    const model::Member& member, model::Direction plane,
    const std::vector<std::pair<int, double>>& order_frequency_hz, double axial_force_n,
    double bending_stiffness_nm2, double fixity_left, double fixity_right);

}  // namespace taut::estimation
