// Signal conditioning ahead of modal identification: mean and linear-trend
// removal, and decimation with an anti-alias filter.
//
// Storage: samples as in Record, rows = samples, cols = channels, m/s^2.
#pragma once

#include <Eigen/Core>

#include "model/status.h"

namespace taut::estimation {

// Removes from each column its least-squares straight line a + b t (which
// includes the mean). Columns of fewer than 2 rows are only de-meaned.
void RemoveLinearTrend(Eigen::MatrixXd* samples);

// Anti-alias low-pass of the decimator: a linear-phase FIR, Kaiser-windowed
// ideal low-pass (J. F. Kaiser, Nonrecursive digital filter design using the
// I0-sinh window function, Proc. IEEE ISCAS 1974; design formulas as in
// Oppenheim and Schafer, Discrete-Time Signal Processing, 3rd ed., 2010,
// eqs. 7.62-7.63):
//   beta = 0.1102 (A - 8.7),  taps = ceil((A - 8) / (2.285 dw)) + 1,
// with A = kDecimationStopbandDb and the transition band dw running from
// kDecimationPassbandShare of the new Nyquist frequency to the new Nyquist
// frequency itself. Content above the new Nyquist frequency, which would
// alias, is attenuated by at least A dB; the passband ripple is at most
// 10^(-A/20).
inline constexpr double kDecimationStopbandDb = 80.0;
inline constexpr double kDecimationPassbandShare = 0.8;
inline constexpr int kMaxDecimationFactor = 64;

// Filter taps for decimation by `factor` (sum of taps = 1, symmetric):
// KaiserLowPass(kDecimationPassbandShare pi / factor, pi / factor).
Eigen::VectorXd DecimationFilter(int factor);

// The Kaiser-windowed low-pass of the file comment for any band edges:
// pass band up to w_pass, stop band (attenuation >= kDecimationStopbandDb)
// from w_stop, both in rad/sample (2 pi f / fs), 0 < w_pass < w_stop <= pi.
// Odd length, symmetric, sum of taps = 1. Length about 5 / (w_stop - w_pass)
// x 2 pi: a narrow transition band costs a long filter.
Eigen::VectorXd KaiserLowPass(double w_pass, double w_stop);

// Filters each column with the symmetric `taps` (odd length) and keeps every
// `factor`-th output whose filter window lies wholly inside the input, as
// Decimate does (first output at input row (taps - 1) / 2). Errors: factor
// < 1, even or empty taps, input shorter than the filter.
Status FilterAndDecimate(const Eigen::MatrixXd& in, const Eigen::VectorXd& taps, int factor,
                         Eigen::MatrixXd* out);

// Low-pass filters each column with DecimationFilter(factor) and keeps every
// `factor`-th sample. Only outputs whose filter window lies wholly inside
// the record are kept (no edge transients), so the output has
// floor((rows - taps) / factor) + 1 rows and its first sample corresponds to
// input row (taps - 1) / 2. factor = 1 copies the input.
// Errors: factor outside [1, kMaxDecimationFactor], or a record shorter than
// the filter.
Status Decimate(const Eigen::MatrixXd& in, int factor, Eigen::MatrixXd* out);

}  // namespace taut::estimation
