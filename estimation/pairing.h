// Mode pairing: which bending order of the member model does each
// identified mode belong to?
//
// Two steps, both cheap compared with one model update:
//  1. An order hypothesis without the finite-element model: every
//     assignment of increasing orders to the measured modes (a mode may also
//     be left out) is scored by the pinned-beam regression
//       f_n^2 / n^2 = N / (4 m L^2) + n^2 pi^2 EI / (4 m L^4)
//     (the pinned-pinned closed form of docs/DESIGN.md squared; linear least
//     squares in a = N/(4 m L^2) and b = pi^2 EI/(4 m L^4)), the MAC of each
//     measured shape with the pinned shape sin(n pi x / L) at the sensors,
//     a penalty for every order below the highest that is missing although
//     it would be visible at the sensors, and a penalty for every left-out
//     mode. Candidates: every increasing assignment whose first order is
//     at most kOrderSearchMaxStep, every consecutive numbering from any
//     first order (the lowest modes of a long tie may all be missing), and
//     shifts of the best one; a hypothesis must number at least half of
//     the searched modes (one high mode never stands alone for the
//     member), and end restraint enters as an effective-order offset
//     (OrderSearchInput::max_order_offset). The best hypothesis also gives
//     the first start of the update.
//  2. Pairing against model modes computed at given parameters: a measured
//     mode pairs with the model mode of closest frequency and shape, one to
//     one, only when the relative frequency difference and the MAC are
//     within PairingOptions; anything else stays unpaired and is reported.
//
// MAC (Allemang, The modal assurance criterion, Sound and Vibration 2003):
//   MAC(a, b) = (a^T b)^2 / ((a^T a)(b^T b)), in [0, 1], scale- and
// sign-free.
#pragma once

#include <limits>
#include <optional>
#include <vector>

#include "model/modal.h"
#include "model/status.h"

namespace taut::estimation {

// MAC of two real shapes of equal size (Allemang 2003). Returns 0 when
// either is the zero vector or the sizes differ; 1 for one-entry shapes
// (a single sensor carries no shape information).
double Mac(const std::vector<double>& a, const std::vector<double>& b);

// Input of the order search, per measured mode, in ascending frequency.
struct OrderSearchInput {
  std::vector<double> frequency_hz;        // > 0, ascending
  std::vector<double> frequency_std_hz;    // > 0
  std::vector<std::vector<double>> shape;  // at sensor_x_m, any scale
  std::vector<double> sensor_x_m;          // in-plane sensor positions, (0, L)
  double length_m = 0.0;
  double mass_per_length_kg_m = 0.0;  // including smeared sensor masses
  double nominal_ei_nm2 = 0.0;
  double ei_prior_sigma_ln = 0.15;  // one-sigma of ln EI around the nominal
  // Largest effective-order offset of end restraint (0.25 per end that is
  // not pinned: clamped-clamped bending modes have beta L = (n + 1/2) pi).
  double max_order_offset = 0.0;
};

struct OrderHypothesis {
  std::vector<int> order;      // per measured mode; 0 = left out
  double axial_force_n = 0.0;  // from the pinned-beam regression
  double bending_stiffness_nm2 = 0.0;
  double score = 0.0;  // lower is better; see pairing.cpp for the terms
  // The best numbering shifted by +-1 or +-2 orders as a whole (the usual
  // confusion on a record with few modes or one sensor): its orders and
  // score (empty / +inf when no shift is admissible).
  std::vector<int> rival_order;
  double rival_score = std::numeric_limits<double>::infinity();
};

// Relative model tolerance used when scoring orders: the pinned-beam
// regression ignores end restraint and sag, so a frequency is not expected
// to fit it better than about 1 % (common practice; recalled value).
inline constexpr double kOrderSearchModelTolerance = 0.01;
// Highest order the search considers and largest step between the orders
// of consecutive measured modes.
inline constexpr int kOrderSearchMaxOrder = 24;
inline constexpr int kOrderSearchMaxStep = 3;
// Largest upward shift of the whole numbering tried after the tree search
// (the lowest modes of a long tie may all be missing; pairing.cpp).
inline constexpr int kOrderSearchMaxShift = 8;
// Only the lowest this many modes enter the search (4^8 hypotheses at
// most); the others are paired against the model in step 2.
inline constexpr int kOrderSearchMaxModes = 8;

// Weighted linear least squares of the pinned-beam regression for the
// given orders (0 = not used), with a prior row b = b_nominal +- sigma_ln b.
// Outputs N [N] and EI [N m^2] and the chi-square of the frequency rows
// (frequency std floored at kOrderSearchModelTolerance f). Fails when no
// order is positive or the normal equations are singular.
// `order_offset` is added to every order (n + offset in the formula; end
// restraint, OrderSearchInput::max_order_offset).
Status PinnedBeamRegression(const OrderSearchInput& in, const std::vector<int>& order, double* axial_force_n,
                            double* bending_stiffness_nm2, double* chi2, double order_offset = 0.0);

// Step 1 above. Fails (kInvalidArgument) when the input is malformed or no
// hypothesis gives a positive EI and a force above the pinned Euler load
// -pi^2 EI / L^2.
Status SearchModeOrders(const OrderSearchInput& in, OrderHypothesis* best);

struct PairingOptions {
  // A pair needs |f_measured - f_model| <= max_relative_frequency_difference
  // * f_model: generous, because pairing happens at the start parameters.
  double max_relative_frequency_difference = 0.15;
  // and MAC >= min_mac when at least two in-plane sensors carry the shape
  // (0.8: a common-practice threshold for "the same mode").
  double min_mac = 0.8;
};

struct ModePair {
  std::optional<int> order;         // model order (1 = fundamental), unset = unpaired
  double model_frequency_hz = 0.0;  // of the paired model mode
  double mac = 0.0;                 // with the paired model mode
};

// Step 2. `measured_shape[i]` are the measured shapes at the in-plane
// channels, `model_index[k]` the index into Mode::shape_at_sensors of the
// k-th such channel. Greedy one-to-one assignment by increasing
//   (df / (tol f))^2 + ((1 - MAC) / (1 - min_mac))^2.
// Returns one ModePair per measured mode.
std::vector<ModePair> PairModes(const std::vector<double>& measured_frequency_hz,
                                const std::vector<std::vector<double>>& measured_shape,
                                const std::vector<int>& model_index, const model::ModalResult& model,
                                const PairingOptions& options = {});

}  // namespace taut::estimation
