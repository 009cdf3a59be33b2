#include "estimation/pairing.h"

#include <Eigen/Dense>
#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <numbers>
#include <sstream>

namespace taut::estimation {

namespace {

// Score terms of the order search (all in chi-square units, so that 4 is a
// "two-sigma" surprise and 9 a "three-sigma" one).
// A measured shape that differs from the pinned shape by 1 - MAC = 0.1
// costs one unit: shapes of elastically restrained ends stay within a few
// hundredths of MAC of the pinned ones at low orders.
constexpr double kOrderSearchMacScale = 0.1;
// A missing order that the sensors would see costs a two-sigma surprise; a
// mode left out of the hypothesis a three-sigma one.
constexpr double kMissingOrderPenalty = 4.0;
constexpr double kLeftOutModePenalty = 9.0;
// A pinned shape whose largest |sin(n pi x/L)| over the sensors is below
// this is taken as invisible (sensors near nodes), so its absence is free.
constexpr double kVisibleShapeAmplitude = 0.3;
// Offsets of the effective order tried per hypothesis (0 .. max_order_offset).
constexpr int kOrderOffsetSteps = 3;

double PinnedShapeAt(int n, double x, double length) { return std::sin(n * std::numbers::pi * x / length); }

constexpr int kTableOrders = kOrderSearchMaxOrder + kOrderSearchMaxStep + 2;

struct Searcher {
  const OrderSearchInput& in;
  int modes;
  std::vector<int> order;
  OrderHypothesis best;
  bool found = false;
  // Per mode i and order n: the shape term ((1 - MAC) / scale)^2 of the
  // measured shape against sin(n pi x / L); per order: visible at the
  // sensors. Computed once (the tree evaluates ~10^5 leaves).
  std::vector<std::array<double, kTableOrders>> shape_term;
  std::array<bool, kTableOrders> visible{};

  void Tabulate() {
    shape_term.assign(static_cast<size_t>(modes), {});
    for (int n = 1; n < kTableOrders; ++n) {
      double amplitude = 0.0;
      std::vector<double> pinned;
      for (double x : in.sensor_x_m) {
        pinned.push_back(PinnedShapeAt(n, x, in.length_m));
        amplitude = std::max(amplitude, std::abs(pinned.back()));
      }
      visible[n] = amplitude >= kVisibleShapeAmplitude;
      for (int i = 0; i < modes; ++i) {
        shape_term[i][n] = in.sensor_x_m.size() >= 2
                               ? std::pow((1.0 - Mac(in.shape[i], pinned)) / kOrderSearchMacScale, 2)
                               : 0.0;
      }
    }
  }

  void Leaf() {
    OrderHypothesis h;
    if (!Score(order, &h)) return;
    if (!found || h.score < best.score) {
      found = true;
      best = h;
    }
  }

  // Scores the hypothesis `order` (the first `modes` entries); false when
  // it gives no positive EI or a force below the pinned Euler load.
  bool Score(const std::vector<int>& order, OrderHypothesis* out) const {
    // Most of the modes must be numbered: a hypothesis that leaves all but
    // one or two modes out fits them trivially (two unknowns) and let one
    // high mode stand alone for the member (issue 12, failure class 1).
    int numbered = 0;
    for (int i = 0; i < modes; ++i) numbered += order[i] > 0;
    if (2 * numbered < modes) return false;
    // End restraint raises the frequencies like a fractional order
    // (bending-dominated: beta L = (n + delta) pi, delta = 1/4 per clamped
    // end; Blevins 1979, table 8-1): the smallest chi-square over a few
    // offsets in [0, max_order_offset] is used.
    double n_reg = 0.0, ei_reg = 0.0, chi2 = std::numeric_limits<double>::infinity();
    for (int k = 0; k < kOrderOffsetSteps; ++k) {
      const double offset = in.max_order_offset * k / std::max(1, kOrderOffsetSteps - 1);
      double n_k = 0.0, ei_k = 0.0, chi2_k = 0.0;
      if (!PinnedBeamRegression(in, order, &n_k, &ei_k, &chi2_k, offset).ok()) continue;
      if (!(ei_k > 0.0)) continue;
      const double z = std::log(ei_k / in.nominal_ei_nm2) / in.ei_prior_sigma_ln;
      const double prior = z * z;
      // A larger offset must improve the score beyond round-off (an exact
      // fit, e.g. one mode and the prior, keeps the pinned offset 0).
      if (chi2_k + prior < chi2 - 1e-6 * (1.0 + std::min(chi2, 1e300))) {
        chi2 = chi2_k + prior;
        n_reg = n_k;
        ei_reg = ei_k;
      }
      if (in.max_order_offset <= 0.0) break;
    }
    if (!std::isfinite(chi2)) return false;
    const double n_euler = std::numbers::pi * std::numbers::pi * ei_reg / (in.length_m * in.length_m);
    if (!(n_reg > -n_euler)) return false;
    double score = chi2;
    int highest = 0;
    std::vector<bool> used(kOrderSearchMaxOrder + kOrderSearchMaxStep + 2, false);
    for (int i = 0; i < modes; ++i) {
      if (order[i] == 0) {
        score += kLeftOutModePenalty;
        continue;
      }
      used[order[i]] = true;
      highest = std::max(highest, order[i]);
      score += shape_term[i][order[i]];
    }
    for (int n = 1; n < highest; ++n) {
      if (!used[n] && visible[n]) score += kMissingOrderPenalty;
    }
    out->order = order;
    out->axial_force_n = n_reg;
    out->bending_stiffness_nm2 = ei_reg;
    out->score = score;
    return true;
  }

  void Recurse(int i, int last) {
    if (i == modes) {
      Leaf();
      return;
    }
    order[i] = 0;
    Recurse(i + 1, last);
    for (int step = 1; step <= kOrderSearchMaxStep; ++step) {
      const int n = last + step;
      if (n > kOrderSearchMaxOrder) break;
      order[i] = n;
      Recurse(i + 1, n);
    }
    order[i] = 0;
  }
};

}  // namespace

double Mac(const std::vector<double>& a, const std::vector<double>& b) {
  if (a.size() != b.size() || a.empty()) return 0.0;
  double ab = 0.0, aa = 0.0, bb = 0.0;
  for (size_t i = 0; i < a.size(); ++i) {
    ab += a[i] * b[i];
    aa += a[i] * a[i];
    bb += b[i] * b[i];
  }
  if (aa <= 0.0 || bb <= 0.0) return 0.0;
  return ab * ab / (aa * bb);
}

Status PinnedBeamRegression(const OrderSearchInput& in, const std::vector<int>& order, double* axial_force_n,
                            double* bending_stiffness_nm2, double* chi2, double order_offset) {
  const double pi2 = std::numbers::pi * std::numbers::pi;
  const double m = in.mass_per_length_kg_m, length = in.length_m;
  // Unknowns (a, b): f_n^2/n^2 = a + b n^2, a = N/(4 m L^2), b = pi^2 EI/(4 m L^4).
  // Weighted least squares of two unknowns: the 2 x 2 normal equations,
  // accumulated row by row (the order search solves ~10^5 of them; the
  // columns are scaled by their norms, so the system stays well conditioned
  // for orders up to kOrderSearchMaxOrder).
  const double l4 = length * length * length * length;
  const double b_nominal = pi2 * in.nominal_ei_nm2 / (4.0 * m * l4);
  const double w_prior = 1.0 / (in.ei_prior_sigma_ln * b_nominal);
  double s00 = 0.0, s01 = 0.0, s11 = w_prior * w_prior, t0 = 0.0, t1 = w_prior * w_prior * b_nominal;
  int rows = 0;
  for (size_t i = 0; i < order.size(); ++i) {
    if (order[i] <= 0) continue;
    const double n = order[i] + order_offset, n2 = n * n;
    const double f = in.frequency_hz[i];
    const double sigma_f = std::max(in.frequency_std_hz[i], kOrderSearchModelTolerance * f);
    // sigma of y = f^2/n^2 by first-order propagation: 2 f sigma_f / n^2;
    // the weighted row is (w, w n^2) (a, b) = w f^2 / n^2 = f / (2 sigma_f).
    const double w = n2 / (2.0 * f * sigma_f);
    const double a0 = w, a1 = w * n2, y = f / (2.0 * sigma_f);
    s00 += a0 * a0;
    s01 += a0 * a1;
    s11 += a1 * a1;
    t0 += a0 * y;
    t1 += a1 * y;
    ++rows;
  }
  if (rows < 1) return Status::InvalidArgument("pinned-beam regression: no mode has an order");
  const double d0 = std::sqrt(s00), d1 = std::sqrt(s11);  // column scaling
  const double c01 = s01 / (d0 * d1);
  const double det = 1.0 - c01 * c01;
  if (!(d0 > 0.0 && d1 > 0.0) || !(det > 1e-13)) {
    return Status::Numerical("pinned-beam regression: singular least-squares system");
  }
  const double u0 = t0 / d0, u1 = t1 / d1;
  const double a = (u0 - c01 * u1) / det / d0;
  const double b = (u1 - c01 * u0) / det / d1;
  // Chi-square of the frequency rows, from their residuals (a second pass:
  // expanding it from the sums above cancels to ~1e-12).
  double chi = 0.0;
  for (size_t i = 0; i < order.size(); ++i) {
    if (order[i] <= 0) continue;
    const double n = order[i] + order_offset, n2 = n * n;
    const double f = in.frequency_hz[i];
    const double sigma_f = std::max(in.frequency_std_hz[i], kOrderSearchModelTolerance * f);
    const double w = n2 / (2.0 * f * sigma_f);
    const double r = w * (a + b * n2) - f / (2.0 * sigma_f);
    chi += r * r;
  }
  *chi2 = chi;
  *axial_force_n = 4.0 * m * length * length * a;
  *bending_stiffness_nm2 = 4.0 * m * l4 * b / pi2;
  return Status::Ok();
}

Status SearchModeOrders(const OrderSearchInput& in, OrderHypothesis* best) {
  const size_t total = in.frequency_hz.size();
  if (total == 0) return Status::InvalidArgument("order search: no measured modes");
  if (in.frequency_std_hz.size() != total || in.shape.size() != total) {
    return Status::InvalidArgument("order search: frequency, std and shape lists differ in length");
  }
  if (!(in.length_m > 0.0 && in.mass_per_length_kg_m > 0.0 && in.nominal_ei_nm2 > 0.0 &&
        in.ei_prior_sigma_ln > 0.0)) {
    return Status::InvalidArgument("order search: length, mass, nominal EI and prior sigma must be > 0");
  }
  Searcher s{in, static_cast<int>(std::min<size_t>(total, kOrderSearchMaxModes)), {}, {}, false, {}, {}};
  s.order.assign(s.modes, 0);
  s.Tabulate();
  s.Recurse(0, 0);
  if (!s.found) {
    std::ostringstream os;
    os << "no assignment of bending orders to the " << total
       << " measured modes gives a positive bending stiffness and a force above the Euler load "
          "(lowest frequency "
       << in.frequency_hz[0] << " Hz)";
    return Status::InvalidArgument(os.str());
  }
  // Consecutive numberings from every first order: the tree starts within
  // kOrderSearchMaxStep of order 1, so a record whose lowest modes are all
  // missing (a weak fundamental on a long tie, issue 12 class 1: modes
  // 1..4 below the noise) could only be numbered too low.
  for (int first = 1; first + s.modes - 1 <= kOrderSearchMaxOrder; ++first) {
    std::vector<int> consecutive(s.modes);
    for (int i = 0; i < s.modes; ++i) consecutive[i] = first + i;
    OrderHypothesis h;
    const bool ok = s.Score(consecutive, &h);
    if (ok && h.score < s.best.score) s.best = h;
  }
  // Shifted numberings of the best hypothesis (with its left-out modes):
  // every shift of the whole numbering by -kOrderSearchMaxStep..
  // +kOrderSearchMaxShift is scored the same way and competes (the
  // missing-order penalty charges the orders skipped below).
  {
    const OrderHypothesis base = s.best;
    for (int shift = -kOrderSearchMaxStep; shift <= kOrderSearchMaxShift; ++shift) {
      if (shift == 0) continue;
      std::vector<int> shifted = base.order;
      bool valid = true;
      for (int& n : shifted) {
        if (n == 0) continue;
        n += shift;
        valid = valid && n >= 1 && n <= kOrderSearchMaxOrder;
      }
      OrderHypothesis h;
      if (valid && s.Score(shifted, &h) && h.score < s.best.score) s.best = h;
    }
  }
  // The rival: the best whole-numbering shift by +-1, +-2 of the winner.
  for (int shift : {-2, -1, 1, 2}) {
    std::vector<int> shifted = s.best.order;
    bool valid = true;
    for (int& n : shifted) {
      if (n == 0) continue;
      n += shift;
      valid = valid && n >= 1 && n <= kOrderSearchMaxOrder;
    }
    OrderHypothesis h;
    if (valid && s.Score(shifted, &h) && h.score < s.best.rival_score) {
      s.best.rival_score = h.score;
      s.best.rival_order = shifted;
    }
  }
  if (!s.best.rival_order.empty()) s.best.rival_order.resize(total, 0);
  s.best.order.resize(total, 0);  // modes beyond the search are paired by the model
  *best = s.best;
  return Status::Ok();
}

std::vector<ModePair> PairModes(const std::vector<double>& measured_frequency_hz,
                                const std::vector<std::vector<double>>& measured_shape,
                                const std::vector<int>& model_index, const model::ModalResult& model,
                                const PairingOptions& options) {
  struct Candidate {
    double score;
    size_t i, j;
    double mac;
  };
  std::vector<Candidate> candidates;
  for (size_t i = 0; i < measured_frequency_hz.size(); ++i) {
    for (size_t j = 0; j < model.modes.size(); ++j) {
      const model::Mode& mode = model.modes[j];
      const double df = (measured_frequency_hz[i] - mode.frequency_hz) / mode.frequency_hz;
      if (std::abs(df) > options.max_relative_frequency_difference) continue;
      std::vector<double> model_shape;
      for (int k : model_index) model_shape.push_back(mode.shape_at_sensors[k]);
      const double mac = model_index.size() >= 2 ? Mac(measured_shape[i], model_shape) : 1.0;
      if (model_index.size() >= 2 && mac < options.min_mac) continue;
      const double score = std::pow(df / options.max_relative_frequency_difference, 2) +
                           std::pow((1.0 - mac) / (1.0 - options.min_mac), 2);
      candidates.push_back({score, i, j, mac});
    }
  }
  std::sort(candidates.begin(), candidates.end(),
            [](const Candidate& a, const Candidate& b) { return a.score < b.score; });
  std::vector<ModePair> pairs(measured_frequency_hz.size());
  std::vector<bool> model_used(model.modes.size(), false);
  for (const Candidate& c : candidates) {
    if (pairs[c.i].order || model_used[c.j]) continue;
    model_used[c.j] = true;
    pairs[c.i].order = model.modes[c.j].order;
    pairs[c.i].model_frequency_hz = model.modes[c.j].frequency_hz;
    pairs[c.i].mac = c.mac;
  }
  return pairs;
}

}  // namespace taut::estimation
