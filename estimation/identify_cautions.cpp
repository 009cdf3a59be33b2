#include "estimation/identify_cautions.h"

#include <algorithm>
#include <cmath>
#include <string>

namespace taut::estimation {

void AppendForceCautions(const model::Member& member, model::Direction plane, double axial_force_n,
                         double critical_compression_n, Cautions* cautions) {
  if (axial_force_n < 0.0) {
    const double share = critical_compression_n > 0.0 ? -axial_force_n / critical_compression_n : 1.0;
    if (share > kNearBucklingShare) {
      cautions->push_back({"compression-near-buckling",
                           "The member is in compression at " + FormatNumber(100 * share, 3) +
                               " % of its critical load " + FormatKn(critical_compression_n) + "."});
    } else {
      cautions->push_back({"compression", "The member is in compression (" + FormatKn(axial_force_n) + ")."});
    }
  }
  if (member.Slenderness(plane) < kStockySlenderness) {
    cautions->push_back({"stocky-member", "Slenderness L/r = " + FormatNumber(member.Slenderness(plane), 3) +
                                              " is below " + FormatNumber(kStockySlenderness, 3) +
                                              ": shear and rotary inertia, ignored by the model, matter."});
  }
  if (member.design_axial_force_n && *member.design_axial_force_n != 0.0) {
    const double d = *member.design_axial_force_n;
    if (std::abs(axial_force_n - d) > kDesignForceDeviationShare * std::abs(d)) {
      cautions->push_back(
          {"far-from-design-force", "The estimate " + FormatKn(axial_force_n) +
                                        " differs from the design force " + FormatKn(d) + " by more than " +
                                        FormatNumber(100 * kDesignForceDeviationShare, 2) + " %."});
    }
  }
}

namespace fit {

void AppendFitCautions(const model::Member& member, bool axial_support_free, Estimate* est_out) {
  Estimate& est = *est_out;
  const model::Direction plane = est.direction;
  const double n_hat = est.axial_force_n.value, n_lo = est.axial_force_n.ci95_low,
               n_hi = est.axial_force_n.ci95_high;
  const double reduced_chi2 = est.fit.reduced_chi2;
  const int paired = static_cast<int>(
      std::count_if(est.modes.begin(), est.modes.end(), [](const EstimatedMode& m) { return m.paired; }));
  if (paired == 1) {
    est.cautions.push_back({"single-mode",
                            "Only one mode pairs with the member model; force, stiffness and end restraint "
                            "trade off against each other and the intervals are correspondingly wide."});
  }
  if (est.channels.size() == 1) {
    est.cautions.push_back({"single-sensor", "Only one sensor in the " + std::string(model::ToString(plane)) +
                                                 " plane: mode shapes cannot confirm the mode orders."});
  }
  for (size_t i = 0; i < est.modes.size(); ++i) {
    if (est.modes[i].paired || est.modes[i].other_plane) continue;  // other-plane modes: other_plane.h
    est.cautions.push_back({"unpaired-mode", "The mode at " +
                                                 FormatNumber(est.modes[i].measured.frequency_hz) +
                                                 " Hz pairs with no bending mode of the member model and was "
                                                 "not used."});
  }
  auto at_bound = [&](const EstimatedQuantity& q, const char* side) {
    if (q.fixed || !q.identifiable) return;
    if (q.value <= kFixityBoundDistance || q.value >= 1.0 - kFixityBoundDistance) {
      est.cautions.push_back({"fixity-at-bound", std::string("The ") + side + " end fixity sits at " +
                                                     (q.value < 0.5 ? "0 (pinned)" : "1 (clamped)") +
                                                     ", the bound of its range; its interval is one-sided."});
    }
  };
  at_bound(est.fixity_left, "left");
  at_bound(est.fixity_right, "right");
  if (axial_support_free && est.axial_support_ratio.identifiable) {
    const double rho = est.axial_support_ratio.value;
    if (rho <= kFixityBoundDistance || rho >= 1.0 - kFixityBoundDistance) {
      est.cautions.push_back({"axial-support-at-bound",
                              std::string("The axial support stiffness sits at ") +
                                  (rho < 0.5 ? "0 (supports free to move axially)" : "rigid supports") +
                                  ", the bound of its range; its interval is one-sided."});
    }
  }
  if (n_hi - n_lo > kWideIntervalShare * std::abs(n_hat)) {
    est.cautions.push_back({"wide-interval", "The 95 % interval of the axial force [" + FormatKn(n_lo) +
                                                 ", " + FormatKn(n_hi) + "] is wider than " +
                                                 FormatNumber(100 * kWideIntervalShare, 2) +
                                                 " % of the estimate " + FormatKn(n_hat) + "."});
  }
  if (reduced_chi2 > kPoorFitReducedChi2) {
    est.cautions.push_back({"poor-fit", "The model reproduces the modes poorly (reduced chi-square " +
                                            FormatNumber(reduced_chi2, 3) +
                                            "); the intervals were widened accordingly, "
                                            "but the beam model may not describe this member."});
  }
  if (!est.fit.converged) {
    est.cautions.push_back(
        {"not-converged", "The best fit stopped at its iteration limit before converging."});
  }
  AppendForceCautions(member, plane, n_hat, est.critical_compression_n, &est.cautions);
}

}  // namespace fit
}  // namespace taut::estimation
