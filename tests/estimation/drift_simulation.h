// Synthetic estimate series of an invented member with known parameters:
// a 40 mm steel hanger of the invented Millbrook footbridge, axially
// restrained, whose force follows the temperature as N = N0 - E A alpha
// (T - T_ref), with measurement scatter of known standard deviation.
#pragma once

#include <cmath>
#include <numbers>
#include <optional>
#include <random>
#include <vector>

#include "estimation/drift.h"

namespace taut::estimation::testing {

struct HangerScenario {
  // Steel, common practice: E = 200 GPa, alpha = 12e-6 /K (docs/DESIGN.md).
  double elastic_modulus_pa = 2.0e11;
  double alpha_per_k = 12e-6;
  double diameter_m = 0.040;
  double force_ref_n = 120e3;           // N0 at the reference temperature
  double temperature_ref_c = 10;        // also the mean of the cycle
  double temperature_amplitude_c = 15;  // +-15 C cycles (the scenario)
  double cycle_period_s = 86400;        // daily cycle
  double step_s = 7 * 3600;             // one estimate every 7 h: samples every phase of the day
  double days = 30;
  double force_std_share = 0.015;        // each estimate's std: 1.5 % of N0
  double ei_std_share = 0.03;            // each estimate's EI std: 3 % of EI
  std::optional<double> loss_after_day;  // force loss starts here
  double loss_share = 0.10;              // of N0

  double area_m2() const { return std::numbers::pi * diameter_m * diameter_m / 4; }
  double ei_nm2() const { return elastic_modulus_pa * std::numbers::pi * std::pow(diameter_m, 4) / 64; }
  double ea_alpha_n_per_k() const { return elastic_modulus_pa * area_m2() * alpha_per_k; }
};

// The series; `first_loss_index` (if any) is the first point at or after the loss.
inline std::vector<DriftPoint> Simulate(const HangerScenario& sc, unsigned seed,
                                        std::optional<std::size_t>* first_loss_index = nullptr) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> unit(0.0, 1.0);
  std::vector<DriftPoint> out;
  const double force_std = sc.force_std_share * sc.force_ref_n;
  const double ei_std = sc.ei_std_share * sc.ei_nm2();
  if (first_loss_index) first_loss_index->reset();
  for (double t = 0; t < sc.days * 86400; t += sc.step_s) {
    const double temp = sc.temperature_ref_c +
                        sc.temperature_amplitude_c * std::sin(2 * std::numbers::pi * t / sc.cycle_period_s);
    const bool lost = sc.loss_after_day && t >= *sc.loss_after_day * 86400;
    if (lost && first_loss_index && !*first_loss_index) *first_loss_index = out.size();
    const double n0 = sc.force_ref_n * (lost ? 1 - sc.loss_share : 1.0);
    const double force = n0 - sc.ea_alpha_n_per_k() * (temp - sc.temperature_ref_c);
    DriftPoint p;
    p.id = static_cast<std::int64_t>(out.size()) + 1;
    p.time_s = t;
    p.temperature_c = temp;
    p.force_n = force + force_std * unit(rng);
    p.force_std_n = force_std;
    p.ei_nm2 = sc.ei_nm2() + ei_std * unit(rng);
    p.ei_std_nm2 = ei_std;
    out.push_back(p);
  }
  return out;
}

}  // namespace taut::estimation::testing
