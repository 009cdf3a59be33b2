#include "estimation/other_plane.h"

#include <algorithm>
#include <cmath>

#include "model/modal.h"

namespace taut::estimation {

namespace {

// Elements per bending order of the other plane's model (as
// IdentifyOptions::elements_per_order; a band edge needs no more).
constexpr int kElementsPerOrder = 4;
constexpr int kMinElements = 20;
// Band widening in frequency stds.
constexpr double kBandSigmas = 2.0;

bool Elastic(const model::RotationEnd& end) { return end.kind == model::RotationEnd::Kind::kElastic; }

}  // namespace

void MarkOtherPlaneModes(const model::Member& member, Estimate* est) {
  double f_max = 0.0;
  int highest_paired = 1;
  for (const auto& m : est->modes) {
    if (!m.paired) f_max = std::max(f_max, m.measured.frequency_hz);
    if (m.paired && m.measured.order) highest_paired = std::max(highest_paired, *m.measured.order);
  }
  if (f_max <= 0.0) return;  // every mode paired
  const model::Direction other = est->direction == model::Direction::kVertical ? model::Direction::kLateral
                                                                               : model::Direction::kVertical;
  const double ei_plane = member.NominalBendingStiffness_nm2(est->direction);
  const double ei_other = member.NominalBendingStiffness_nm2(other);
  if (!(ei_plane > 0.0 && ei_other > 0.0)) return;
  const EstimatedQuantity& n = est->axial_force_n;
  const EstimatedQuantity& ei = est->bending_stiffness_nm2;
  // Orders of the other plane up to twice the declared plane's highest
  // paired one plus a margin: the other plane's modes lie in the same band.
  const int orders = 2 * highest_paired + 4;
  model::ModalModel model(member, other,
                          model::ModalOptions{std::max(kMinElements, kElementsPerOrder * orders)});
  const int modes = std::min(orders, model.mesh().FreeDofs() / 2);
  model::ModalParameters lo, hi;
  lo.axial_force_n = n.ci95_low;
  hi.axial_force_n = n.ci95_high;
  lo.bending_stiffness_nm2 = ei.ci95_low / ei_plane * ei_other;
  hi.bending_stiffness_nm2 = ei.ci95_high / ei_plane * ei_other;
  if (Elastic(member.left)) {
    lo.fixity_left = 0.0;
    hi.fixity_left = 1.0;
  }
  if (Elastic(member.right)) {
    lo.fixity_right = 0.0;
    hi.fixity_right = 1.0;
  }
  model::ModalResult r_lo, r_hi;
  est->fit.forward_model_calls += 2;
  if (!model.Solve(lo, modes, &r_lo).ok() || !model.Solve(hi, modes, &r_hi).ok()) return;
  std::string names;
  int marked = 0;
  for (auto& m : est->modes) {
    if (m.paired) continue;
    const double f = m.measured.frequency_hz;
    const double band = kBandSigmas * std::max(m.measured.frequency_std_hz, kMinRelativeFrequencyStd * f);
    for (int k = 0; k < modes; ++k) {
      const double a = std::min(r_lo.modes[k].frequency_hz, r_hi.modes[k].frequency_hz) - band;
      const double b = std::max(r_lo.modes[k].frequency_hz, r_hi.modes[k].frequency_hz) + band;
      if (f < a || f > b) continue;
      m.other_plane = true;
      m.other_plane_order = k + 1;
      names += (names.empty() ? "" : ", ") + FormatNumber(f, 4) + " Hz (order " + std::to_string(k + 1) + ")";
      ++marked;
      break;
    }
  }
  if (marked == 0) return;
  est->cautions.push_back(
      {"other-plane-modes", std::to_string(marked) + " mode(s) at " + names + " fit bending modes of the " +
                                model::ToString(other) +
                                " plane, not the one analysed: sensors are never aligned exactly, so each "
                                "channel also carries the other plane's modes. They were not used."});
}

}  // namespace taut::estimation
