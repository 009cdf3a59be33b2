// Frequency-domain decomposition (R. Brincker, L. Zhang, P. Andersen, Modal
// identification of output-only systems using frequency domain
// decomposition, Smart Mater. Struct. 10, 2001).
//
// At every line f_m the Hermitian, positive semi-definite CSD matrix is
// decomposed G(f_m) = U S U^H (for such a matrix the SVD and the eigen
// decomposition coincide). Near a well separated mode the first singular
// value s1 is the mode's auto spectrum and u1 its shape. Peaks of s1 are
// picked with a prominence rule, their frequency refined between lines,
// shapes real-normalised, and damping estimated from the half-power width.
#pragma once

#include <Eigen/Core>
#include <vector>

#include "estimation/spectral.h"

namespace taut::estimation {

// A peak is kept when its topographic prominence (height above the higher
// of the two lowest points separating it from a higher peak on either side,
// the definition of scipy.signal.peak_prominences) is at least this ratio:
// 10 dB in s1, a practical choice. The random ripple of a 15-average Welch
// estimate has a 95 % band of about +-2.3 dB per line (chi-square with 30
// degrees of freedom, Welch 1967), but among thousands of noise lines its
// largest local maxima reach 6 dB of prominence (seen on white noise), so
// 6 dB would keep noise peaks; modes of the members taut serves stand
// 20-40 dB above the floor.
inline constexpr double kMinPeakProminenceRatio = 10.0;  // 10^(10/10)
// Peaks within this many lines of the band edges are ignored (no
// interpolation neighbours).
inline constexpr int kPeakEdgeLines = 2;

struct FddPeak {
  int line = 0;               // index into CrossSpectrum::frequency_hz
  double frequency_hz = 0.0;  // interpolated, see PickFddPeaks
  double s1 = 0.0;            // first singular value at the line, (m/s^2)^2/Hz
  double prominence = 0.0;    // ratio, >= kMinPeakProminenceRatio
  // Half-power damping: zeta = (f_hi - f_lo) / (2 f), f_lo, f_hi where s1
  // falls to s1_peak / 2 (linear interpolation between lines). Biased high
  // when the width spans few lines (the Hann main lobe is 4 lines wide);
  // resolution_limited is then set. A first look only: SSI-COV is the
  // damping estimator.
  double damping_ratio = 0.0;
  bool resolution_limited = false;
  Eigen::VectorXd shape;  // real-normalised u1, max |.| = +1
  // Ratio s2 / s1 at the peak: near 0 for one dominant mode, near 1 for
  // close modes or a noise-dominated line.
  double s2_over_s1 = 0.0;
};

struct FddResult {
  Eigen::VectorXd s1;          // first singular value per line
  Eigen::VectorXd s2;          // second (0 for one channel)
  std::vector<FddPeak> peaks;  // ascending frequency
};

// Bin interpolation: for a Hann-windowed sinusoid between lines k and k+1
// the magnitude ratio a = |X_{k+1}| / |X_k| gives the offset
//   delta = (2 a - 1) / (a + 1)   (in lines, 0 <= delta <= 1)
// exactly (Grandke, Interpolation algorithms for discrete Fourier transforms
// of weighted signals, IEEE Trans. Instrum. Meas. 32, 1983), apart from the
// leakage of the negative-frequency image. Magnitudes are sqrt(s1). For a
// sinusoid at least 10 lines above 0 Hz with a line signal-to-noise ratio
// above 40 dB the error is below kSinusoidInterpolationError_lines.
inline constexpr double kSinusoidInterpolationError_lines = 0.01;

// Decomposes every line, then picks at most max_peaks peaks (the most
// prominent) with lo_hz <= f <= hi_hz.
FddResult RunFdd(const CrossSpectrum& csd, double lo_hz, double hi_hz, int max_peaks);

// Real normalisation of a complex shape: rotated by the angle that
// maximises the norm of its real part, real part taken, scaled so that the
// entry of largest magnitude is +1.
Eigen::VectorXd RealNormalise(const Eigen::VectorXcd& shape);

// Modal assurance criterion (Allemang 2003) of two real shapes, in [0, 1].
double Mac(const Eigen::VectorXd& a, const Eigen::VectorXd& b);
double Mac(const Eigen::VectorXcd& a, const Eigen::VectorXcd& b);

}  // namespace taut::estimation
