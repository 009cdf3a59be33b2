// Covariance-driven stochastic subspace identification (B. Peeters,
// G. De Roeck, Reference-based stochastic subspace identification for
// output-only modal analysis, MSSP 13, 1999, section 3; all channels are
// references here).
//
// Model: x_{t+1} = A x_t + w_t, y_t = C x_t + v_t, with y the l output
// channels. The output correlations R_k = E[y_{t+k} y_t^T] = C A^{k-1} G
// (G = E[x_{t+1} y_t^T]) fill the block Toeplitz matrix (their eq. 13)
//   T = [R_i     R_{i-1} ... R_1 ]
//       [R_{i+1} R_i     ... R_2 ]   (l i x l i, i = block rows)
//       [ ...                    ]
//       [R_{2i-1}        ... R_i ]  = O_i Gamma_i,
// O_i = [C; C A; ...; C A^{i-1}] the observability matrix. From the SVD
// T = U S V^T, O = U_n S_n^{1/2} for model order n (the n largest singular
// values), C = first l rows of O, and A solves O_up A = O_down in the least-
// squares sense (O without its last / first block row; their eq. 15-16).
// Eigenvalues mu of A give the poles lambda = fs ln(mu), the natural
// frequency f = |lambda| / 2 pi [Hz] (undamped, the quantity a beam model
// predicts), the damping ratio zeta = -Re(lambda) / |lambda|, and the shape
// phi = C psi (psi the eigenvector).
//
// Stabilisation diagram: orders min_order..max_order in order_step; a pole
// is stable when the previous order has one within the frequency, damping
// and MAC tolerances. Stable poles are clustered (frequency and MAC) into
// modes; clusters too small are noise.
//
// Uncertainty: the record is split into `uncertainty_segments` contiguous,
// non-overlapping segments; their correlations average to those of the
// whole record, so each segment gives an independent estimate (median over
// the highest orders of the diagram), and the standard deviation of the whole-record
// estimate is the scatter of the segment estimates divided by sqrt(segments found) (the batch-means idea of
// the segment approach in E. Reynders, R. Pintelon, G. De Roeck, Uncertainty bounds on modal parameters
// obtained from stochastic subspace identification, MSSP 22, 2008). When fewer than kMinSegmentsForStd
// segments find a mode its std falls back to the cluster scatter (which understates it) and
// `std_from_segments` is false.
#pragma once

#include <Eigen/Core>
#include <string>
#include <vector>

#include "model/status.h"

namespace taut::estimation {

// Stabilisation tolerances: common practice (Peeters and De Roeck 1999 used
// 1 % on frequency, 5 % on damping and 2 % on 1 - MAC; recalled from
// memory).
inline constexpr double kStableFrequencyTol = 0.01;  // relative
inline constexpr double kStableDampingTol = 0.05;    // relative
inline constexpr double kStableMinMac = 0.98;
// Cluster membership: relative frequency distance to the cluster median and
// MAC to its representative shape.
inline constexpr double kClusterFrequencyTol = 0.01;
inline constexpr double kClusterMinMac = 0.9;
// A cluster needs stable poles in at least this share of the orders.
inline constexpr double kMinClusterShare = 0.25;
// Physical damping range of bending modes of steel and iron members: below
// kMinDampingRatio a line is a mains or machinery harmonic (a forced
// sinusoid has zero damping; members of this kind show 0.1 % to a few %,
// common practice); above kMaxDampingRatio it is noise.
inline constexpr double kMinDampingRatio = 2e-4;
inline constexpr double kMaxDampingRatio = 0.2;
// Block rows: the correlation lags should span kLagPeriods periods of the
// lowest frequency of interest; l i is capped at kMaxHankelRows, and the
// 2 i lags at the record length / kMinSamplesPerLag (never below what the
// model order needs).
inline constexpr double kLagPeriods = 1.0;
inline constexpr int kMaxHankelRows = 150;
inline constexpr int kMinSegmentsForStd = 3;
// Correlation estimates need many more samples than lags: a record (or
// uncertainty segment) must hold at least this many samples per lag.
inline constexpr int kMinSamplesPerLag = 20;
// A segment pole belongs to a mode when within this relative frequency and
// above this MAC.
inline constexpr double kSegmentMatchTol = 0.05;
inline constexpr double kSegmentMinMac = 0.8;
// Orders used per segment: the highest order and the next ones below it.
// Three rather than five: the segment eigen-decompositions were a third of
// an identification, and the reported std still matches the replication
// scatter (test_modal_id ThreeDofStdMatchesReplicationScatter: frequency
// chi-square statistics 32.0, 22.1, 31.1 against 31.7, 23.6, 31.9 with
// five, all inside the 99 % band [13.1, 52.3] of 29 degrees of freedom).
inline constexpr int kSegmentOrders = 3;
inline constexpr int kSegmentOrderSpacing = 2;

struct SsiOptions {
  int min_order = 2;
  int max_order = 40;
  int order_step = 2;
  int block_rows = 0;            // i; 0 = automatic (kLagPeriods, kMaxHankelRows)
  double lo_hz = 0.0;            // poles outside [lo_hz, hi_hz] are dropped
  double hi_hz = 1e9;            // clipped to the Nyquist frequency
  double lowest_hz = 0.0;        // lowest frequency of interest for the automatic i; 0 = lo_hz
  int uncertainty_segments = 6;  // upper bound; 0 disables the segment runs
};

struct SsiPole {
  int order = 0;
  double frequency_hz = 0.0;
  double damping_ratio = 0.0;
  Eigen::VectorXcd shape;  // C psi, unscaled
  bool stable = false;
};

struct SsiMode {
  double frequency_hz = 0.0;      // cluster median
  double damping_ratio = 0.0;     // cluster median
  double frequency_std_hz = 0.0;  // see the header comment
  double damping_std = 0.0;
  Eigen::VectorXd shape;           // real-normalised, max |.| = +1
  Eigen::VectorXcd complex_shape;  // of the representative pole
  int representative_order = 0;
  int cluster_size = 0;
  double cluster_frequency_std_hz = 0.0;
  int segments_found = 0;
  bool std_from_segments = false;
};

struct SsiResult {
  int block_rows = 0;
  int segments = 0;                     // uncertainty segments used (0 = cluster scatter only)
  std::vector<SsiPole> poles;           // the stabilisation diagram (physical poles in band)
  std::vector<SsiMode> modes;           // ascending frequency
  std::vector<double> narrow_lines_hz;  // rejected near-zero-damping lines (harmonics)
};

// y: rows = samples, cols = channels (conditioned: trend removed). Errors:
// bad options, too few samples for the lags.
Status RunSsiCov(const Eigen::MatrixXd& y, double sample_rate_hz, const SsiOptions& options, SsiResult* out);

}  // namespace taut::estimation
