#include "estimation/refusal.h"

#include <algorithm>
#include <cmath>

namespace taut::estimation {

namespace {
constexpr double kSteelClassModulus = 150e9;
constexpr double kSteelDefaultYield = 1.86e9;
constexpr double kOtherDefaultYield = 1.0e9;
}  // namespace

double DefaultYieldStrength_pa(double elastic_modulus_pa) {
  return elastic_modulus_pa >= kSteelClassModulus ? kSteelDefaultYield : kOtherDefaultYield;
}

double YieldStrengthOf(const model::Member& member, std::string* source) {
  if (member.yield_strength_pa) {
    if (source)
      *source = "the declared yield strength " + FormatNumber(*member.yield_strength_pa / 1e6) + " MPa";
    return *member.yield_strength_pa;
  }
  const double fy = DefaultYieldStrength_pa(member.elastic_modulus_pa);
  if (source) {
    *source = "the default " + FormatNumber(fy / 1e6) + " MPa for " +
              (member.elastic_modulus_pa >= kSteelClassModulus ? "steel and iron" : "this material class") +
              " (material.yield_strength_pa not given)";
  }
  return fy;
}

StrongModeCount CountStrongModes(const Estimate& e) {
  std::vector<size_t> in_plane;  // index into the shapes of each in-plane channel
  for (const auto& c : e.channels) {
    const auto it = std::find(e.shape_channels.begin(), e.shape_channels.end(), c);
    if (it != e.shape_channels.end()) in_plane.push_back(static_cast<size_t>(it - e.shape_channels.begin()));
  }
  StrongModeCount n;
  for (const auto& m : e.modes) {
    n.paired += m.paired;
    double peak = 0.0;
    for (size_t k : in_plane) {
      if (k < m.measured.shape.size()) peak = std::max(peak, std::abs(m.measured.shape[k]));
    }
    if (peak < kStrongInPlaneShare) continue;
    ++n.strong;
    n.strong_unpaired += !m.paired;
  }
  return n;
}

void AppendRefusals(const model::Member& member, Estimate* e) {
  // 1. Strong in-plane modes left unpaired.
  const StrongModeCount count = CountStrongModes(*e);
  const int strong = count.strong, strong_unpaired = count.strong_unpaired, paired = count.paired;
  if (strong_unpaired >= kMinUnpairedForRefusal && strong_unpaired > paired) {
    e->cautions.push_back(
        {"record-not-member",
         "The record does not fit member '" + member.id + "': " + std::to_string(strong_unpaired) +
             " of its " + std::to_string(strong) +
             " strong modes in the plane pair with no bending mode of the member model; check "
             "that the record was filed under the right member and that its length, section "
             "and ends are right."});
    return;
  }
  // 2. A misfit far beyond measurement error.
  if (e->fit.model == kFitModelModal && e->fit.reduced_chi2 > kRefusalReducedChi2) {
    e->cautions.push_back(
        {"record-not-member", "The member model cannot reproduce the record's modes (reduced chi-square " +
                                  FormatNumber(e->fit.reduced_chi2, 3) + ", above " +
                                  FormatNumber(kRefusalReducedChi2, 3) +
                                  "): check that the record was filed under "
                                  "member '" +
                                  member.id + "' and that its length, section and ends are right."});
    return;
  }
  // 3. A bending stiffness no error of the description explains.
  {
    const double nominal = member.NominalBendingStiffness_nm2(e->direction);
    const double ratio = e->bending_stiffness_nm2.value / nominal;
    double allowed = kMaxStiffnessRatio;
    const auto& sec = member.section;
    if (sec.shape == model::Section::Shape::kRectangle && sec.width_m > 0.0 && sec.depth_m > 0.0) {
      const double r = sec.width_m / sec.depth_m;
      allowed *= std::max(r * r, 1.0 / (r * r));  // a flat described the other way round
    }
    if (nominal > 0.0 && !e->bending_stiffness_nm2.fixed && (ratio > allowed || ratio < 1.0 / allowed)) {
      e->cautions.push_back(
          {"record-not-member",
           "The modes put the bending stiffness at " + FormatNumber(ratio, 3) +
               " times the nominal value of member '" + member.id + "', beyond the factor " +
               FormatNumber(allowed, 3) +
               " that a wrong E, corrosion or the section's orientation explains: check that "
               "the record was filed under the right member and that its length and section "
               "are right."});
      return;
    }
  }
  // 4. A stress the member cannot carry.
  const double area = member.section.Area();
  if (area > 0.0 && e->axial_force_n.value > 0.0) {
    std::string source;
    const double fy = YieldStrengthOf(member, &source);
    const double stress = e->axial_force_n.value / area;
    if (stress > fy) {
      e->cautions.push_back(
          {"implausible-stress",
           "The estimated force " + FormatKn(e->axial_force_n.value) + " means a stress of " +
               FormatNumber(stress / 1e6) + " MPa, above " + source +
               ": the record, the member description or the numbering of the modes is wrong."});
    }
  }
}

}  // namespace taut::estimation
