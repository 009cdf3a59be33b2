// Shared fixtures for the model tests: invented members with round numbers.
#pragma once

#include <cmath>
#include <functional>
#include <numbers>

#include "model/member.h"

namespace taut::model::testing {

// An invented 6 m round steel bar, 30 mm diameter, no sensors, both ends
// pinned, axially free (so no sag coupling unless a test asks for it).
inline Member PlainBar(RotationEnd::Kind left = RotationEnd::Kind::kPinned,
                       RotationEnd::Kind right = RotationEnd::Kind::kPinned) {
  Member m;
  m.id = "test-bar";
  m.length_m = 6.0;
  m.section.shape = Section::Shape::kCircle;
  m.section.diameter_m = 0.030;
  m.elastic_modulus_pa = 2.0e11;
  m.density_kg_m3 = 7850.0;
  m.left.kind = left;
  m.right.kind = right;
  m.axial.kind = AxialEnds::Kind::kFree;
  return m;
}

// Root of f on [a, b] by bisection (f(a), f(b) of opposite sign), to
// machine precision. Used to evaluate published characteristic equations
// independently of the finite-element code.
inline double Bisect(const std::function<double(double)>& f, double a, double b) {
  double fa = f(a);
  for (int i = 0; i < 200 && b - a > 1e-15 * std::abs(b); ++i) {
    const double c = 0.5 * (a + b);
    const double fc = f(c);
    if ((fc < 0) == (fa < 0)) {
      a = c;
      fa = fc;
    } else {
      b = c;
    }
  }
  return 0.5 * (a + b);
}

// Closed-form frequency [Hz] of mode n of a pinned-pinned beam with axial
// force N (docs/DESIGN.md; Timoshenko, Young and Weaver, Vibration Problems in
// Engineering, 4th ed., 1974, sec. 5.12):
//   f_n = (n / 2L) sqrt(N/m) sqrt(1 + n^2 pi^2 EI / (N L^2)),
// written as f_n = (n / 2L) sqrt((N + n^2 pi^2 EI / L^2) / m) so that it
// also holds for N <= 0.
inline double PinnedPinnedFrequency(int n, double length, double ei, double m, double n_force) {
  const double pi = std::numbers::pi;
  return n / (2.0 * length) * std::sqrt((n_force + n * n * pi * pi * ei / (length * length)) / m);
}

}  // namespace taut::model::testing
