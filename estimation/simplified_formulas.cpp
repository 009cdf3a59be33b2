#include "estimation/simplified_formulas.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <sstream>

namespace taut::estimation {
namespace {

constexpr double kPi = 3.14159265358979323846;
constexpr double kGravity_m_s2 = 9.80665;  // standard gravity (CGPM 1901)

std::string Percent(double share) {
  std::ostringstream os;
  os.precision(2);
  os << std::fixed << 100.0 * share << " %";
  return os.str();
}

}  // namespace

double IrvineLambda2(const model::Member& member, double axial_force_n) {
  const double m = member.density_kg_m3 * member.section.Area();
  const double w = m * kGravity_m_s2 * std::cos(member.inclination_deg * kPi / 180.0);
  return std::pow(w * member.length_m / axial_force_n, 2) * member.AxialRigidity_n() / axial_force_n;
}

double SagForceShare(double lambda2) { return 8.0 * lambda2 / std::pow(kPi, 4); }

SimplifiedComparison CompareWithSimplifiedFormulas(
    const model::Member& member, model::Direction plane,
    const std::vector<std::pair<int, double>>& order_frequency_hz, double axial_force_n,
    double bending_stiffness_nm2, double fixity_left, double fixity_right) {
  SimplifiedComparison out;
  const double L = member.length_m;
  const double m = member.density_kg_m3 * member.section.Area();  // bare rho A
  for (const auto& [order, f] : order_frequency_hz) {
    if (order == 1) out.taut_string_force_n = 4.0 * m * L * L * f * f;
  }
  // Ordinary least squares of y = f_n^2 / n^2 on x = n^2 (two unknowns).
  const int n_rows = static_cast<int>(order_frequency_hz.size());
  if (n_rows >= 2) {
    Eigen::MatrixXd A(n_rows, 2);
    Eigen::VectorXd y(n_rows);
    for (int i = 0; i < n_rows; ++i) {
      const double n = order_frequency_hz[i].first, f = order_frequency_hz[i].second;
      A(i, 0) = 1.0;
      A(i, 1) = n * n;
      y(i) = f * f / (n * n);
    }
    const Eigen::Vector2d ab = A.colPivHouseholderQr().solve(y);
    if (A.colPivHouseholderQr().rank() == 2) {
      out.modes_used = n_rows;
      out.pinned_beam_force_n = 4.0 * m * L * L * ab(0);
      out.pinned_beam_bending_stiffness_nm2 = 4.0 * m * L * L * L * L * ab(1) / (kPi * kPi);
    }
  }

  // Why taut's value differs (only for a member in tension: the formulas
  // above have no meaning for a strut).
  if (!(axial_force_n > 0.0)) {
    out.reasons.push_back("the member is in compression: both simplified formulas assume tension");
    return out;
  }
  const double N = axial_force_n, EI = bending_stiffness_nm2;
  const double gamma1 = kPi * kPi * EI / (N * L * L);
  if (gamma1 > kSimplifiedEffectShare) {
    out.reasons.push_back("bending stiffness: the string formula ignores it and reads the force " +
                          Percent(gamma1) + " high from the fundamental (pi^2 EI / (N L^2))");
  }
  const double xi = L * std::sqrt(N / EI);
  const double restraint = 2.0 * (fixity_left + fixity_right) / xi;
  std::ostringstream ends;
  ends.precision(2);
  ends << "end restraint: both formulas take pinned ends; fixities " << fixity_left << " and "
       << fixity_right;
  if (xi < kBoundaryLayerMinXi && std::max(fixity_left, fixity_right) > kSimplifiedFixityNote) {
    // Bending dominates: the boundary-layer estimate does not hold, and a
    // restrained end changes the frequencies by tens of per cent.
    ends << " matter a great deal for a member whose bending stiffness dominates (L sqrt(N/EI) = " << xi
         << ")";
    out.reasons.push_back(ends.str());
  } else if (restraint > kSimplifiedEffectShare) {
    ends << " move the force they read by about " << Percent(restraint);
    out.reasons.push_back(ends.str());
  }
  if (plane == model::Direction::kVertical && member.axial.kind != model::AxialEnds::Kind::kFree) {
    const double lambda2 = IrvineLambda2(member, N);
    const double sag = SagForceShare(lambda2);
    if (sag > kSimplifiedEffectShare) {
      out.reasons.push_back("self-weight sag stiffens the symmetric vertical modes (Irvine's lambda^2 = " +
                            std::to_string(lambda2) + "), moving the force read from them by about " +
                            Percent(sag));
    }
  }
  double sensor_mass_kg = 0.0;
  for (const auto& s : member.sensors) sensor_mass_kg += s.mass_kg;
  if (sensor_mass_kg / (m * L) > kSimplifiedEffectShare) {
    out.reasons.push_back("sensor masses: " + Percent(sensor_mass_kg / (m * L)) +
                          " of the member's mass, which the formulas leave out");
  }
  return out;
}

}  // namespace taut::estimation
