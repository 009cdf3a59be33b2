// Spectral estimation: the Welch cross-spectral density matrix and a
// band-limited analytic signal.
//
// FFT: Eigen's unsupported FFT module with its bundled kissfft backend
// (libeigen3-dev; kissfft is BSD-3-Clause, the module MPL-2.0, both
// permissive). It is header-only, already a dependency, handles any length
// (mixed radix) and is fast enough for the segment lengths used here
// (< 1 ms per 8192-point transform). FFTW would be faster but is GPL, which
// a permissively licensed service cannot link; pocketfft is not packaged as
// a C++ library in Debian bookworm.
#pragma once

#include <Eigen/Core>
#include <complex>
#include <vector>

#include "model/status.h"

namespace taut::estimation {

struct WelchOptions {
  // Samples per segment; 0 picks DefaultSegmentSamples. Must be >= 16 and
  // <= the number of samples.
  int segment_samples = 0;
  // Remove each segment's mean before windowing (scipy.signal.welch's
  // default detrend='constant').
  bool demean_segments = true;
};

// Welch (1967) estimate of the one-sided cross-spectral density matrix,
// periodic Hann window, 50 % overlap, segments starting at 0, s, 2s, ...
// (s = segment/2) while they fit:
//   G_jk(f_m) = c_m / (fs sum_n w_n^2) * (1/K) sum_seg X_j,seg(f_m) conj(X_k,seg(f_m)),
// c_m = 2 except at 0 Hz and (even segment length) the Nyquist line, where
// c_m = 1. Units (m/s^2)^2/Hz. The diagonal equals
// scipy.signal.welch(x, fs, window='hann', nperseg=segment, noverlap=segment//2).
struct CrossSpectrum {
  double sample_rate_hz = 0.0;
  double line_spacing_hz = 0.0;  // fs / segment
  int segment_samples = 0;
  int segments = 0;                 // K
  Eigen::VectorXd frequency_hz;     // lines m = 0 .. segment/2
  std::vector<Eigen::MatrixXcd> G;  // one Hermitian channels x channels matrix per line
};

// Segment length for a record of n samples: the power of two nearest to
// n / kDefaultSegmentsPerRecord, clamped to [256, 16384] (and to n). About
// 15 averages (at 50 % overlap) keep the random error of each line near
// 1/sqrt(15) = 26 % (Welch 1967) while keeping the lines fine.
inline constexpr int kDefaultSegmentsPerRecord = 8;
int DefaultSegmentSamples(Eigen::Index n);

// x: rows = samples, cols = channels. Errors: fs <= 0, bad segment length.
Status WelchCsd(const Eigen::MatrixXd& x, double sample_rate_hz, const WelchOptions& options,
                CrossSpectrum* out);

// Band-limited analytic signal of x (Gabor 1946; the FFT construction of
// Marple, Computing the discrete-time analytic signal via FFT, IEEE Trans.
// Signal Process. 47, 1999): the spectrum is set to zero at negative
// frequencies, doubled at positive ones, and multiplied by a pass band
// [lo_hz, hi_hz] with raised-cosine edges of kBandEdgeShare of the band
// width on each side (a brick wall would ring). Re(z) is x band-passed,
// |z| its envelope, arg(z) its phase.
inline constexpr double kBandEdgeShare = 0.15;
Eigen::VectorXcd AnalyticSignal(const Eigen::VectorXd& x, double sample_rate_hz, double lo_hz, double hi_hz);

}  // namespace taut::estimation
