// Test helper: identified modes made from the forward model with known
// parameters (the truth is known), optionally with Gaussian noise.
#pragma once

#include <cmath>
#include <random>
#include <string>
#include <vector>

#include "estimation/modes.h"
#include "model/member.h"
#include "model/modal.h"

namespace taut::estimation::testing {

// Truth mesh: much finer than the identification's, so that discretisation
// error in the synthetic data is negligible against the frequency stds
// (Hermite cubic frequencies converge as h^4).
inline constexpr int kTruthElements = 160;

// A round steel bar (E 200 GPa, 7850 kg/m3: the usual structural-steel
// values) of `length` and `diameter` with sensors at `sensor_share` of the
// length, all oriented in plane `d`, each with `sensor_mass` kg; both ends
// of kind `left` / `right`. Shared by the estimation tests.
inline model::Member SteelBar(double length, double diameter, model::Direction d,
                              const std::vector<double>& sensor_share,
                              model::RotationEnd::Kind left = model::RotationEnd::Kind::kElastic,
                              model::RotationEnd::Kind right = model::RotationEnd::Kind::kElastic,
                              double sensor_mass = 0.03) {
  model::Member m;
  m.id = "test-bar";
  m.length_m = length;
  m.section.diameter_m = diameter;
  m.elastic_modulus_pa = 2.0e11;
  m.density_kg_m3 = 7850;
  m.left.kind = left;
  m.right.kind = right;
  for (size_t i = 0; i < sensor_share.size(); ++i) {
    m.sensors.push_back({"s" + std::to_string(i + 1), sensor_share[i] * length, sensor_mass, d});
  }
  return m;
}

struct SyntheticOptions {
  int modes = 4;
  double relative_frequency_std = 1e-3;  // stated std of each frequency, share of f
  double shape_std = 0.0;                // noise added to shapes (max |.| = 1)
  bool add_frequency_noise = false;      // draw f from N(f_true, std)
  std::vector<int> orders;               // which model orders to keep (default 1..modes)
};

// Modes of `member` in plane `d` at `truth`; channels are the plane's
// sensors in member order. Returns false when the model fails.
inline bool MakeModes(const model::Member& member, model::Direction d, const model::ModalParameters& truth,
                      const SyntheticOptions& o, std::mt19937* rng, ModalIdentification* out) {
  model::ModalResult r;
  int max_order = o.modes;
  for (int n : o.orders) max_order = std::max(max_order, n);
  if (!model::ComputeModes(member, d, truth, max_order, &r, model::ModalOptions{kTruthElements}).ok())
    return false;
  std::normal_distribution<double> unit(0.0, 1.0);
  std::mt19937 local(1);  // unused when no noise is asked for
  std::mt19937& g = rng != nullptr ? *rng : local;
  ModalIdentification id;
  id.channels = r.channels;
  id.uncertainty_method = "synthetic";
  std::vector<int> orders = o.orders;
  if (orders.empty()) {
    for (int n = 1; n <= o.modes; ++n) orders.push_back(n);
  }
  for (int n : orders) {
    const model::Mode& mode = r.modes[n - 1];
    IdentifiedMode m;
    m.frequency_std_hz = o.relative_frequency_std * mode.frequency_hz;
    m.frequency_hz = mode.frequency_hz + (o.add_frequency_noise ? m.frequency_std_hz * unit(g) : 0.0);
    m.damping_ratio = 0.005;
    m.damping_std = 0.001;
    double amax = 0.0;
    for (double v : mode.shape_at_sensors) amax = std::max(amax, std::abs(v));
    for (double v : mode.shape_at_sensors) {
      m.shape.push_back(v / amax + (o.shape_std > 0.0 ? o.shape_std * unit(g) : 0.0));
    }
    id.modes.push_back(m);
  }
  *out = id;
  return true;
}

}  // namespace taut::estimation::testing
