#include "estimation/spectral.h"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <unsupported/Eigen/FFT>

namespace taut::estimation {

int DefaultSegmentSamples(Eigen::Index n) {
  constexpr int kMinSegment = 256, kMaxSegment = 16384;
  const double target = static_cast<double>(n) / kDefaultSegmentsPerRecord;
  int p = 1 << static_cast<int>(std::lround(std::log2(std::max(target, 1.0))));
  p = std::clamp(p, kMinSegment, kMaxSegment);
  while (p > n && p > 16) p /= 2;
  return p;
}

Status WelchCsd(const Eigen::MatrixXd& x, double fs, const WelchOptions& options, CrossSpectrum* out) {
  if (!(fs > 0.0) || !std::isfinite(fs))
    return Status::InvalidArgument("sample rate " + std::to_string(fs) + " Hz must be > 0");
  const Eigen::Index n = x.rows();
  const Eigen::Index nch = x.cols();
  const int seg = options.segment_samples > 0 ? options.segment_samples : DefaultSegmentSamples(n);
  if (seg < 16 || seg > n)
    return Status::InvalidArgument("Welch segment of " + std::to_string(seg) + " samples must lie in [16, " +
                                   std::to_string(n) + "] (the record length)");
  const int step = seg - seg / 2;  // noverlap = seg // 2, as scipy
  const int n_seg = static_cast<int>((n - seg) / step) + 1;
  const int lines = seg / 2 + 1;

  // Periodic Hann window (scipy.signal.get_window('hann', seg), sym=False).
  Eigen::VectorXd w(seg);
  for (int k = 0; k < seg; ++k) w[k] = 0.5 - 0.5 * std::cos(2.0 * std::numbers::pi * k / seg);
  const double scale = 1.0 / (fs * w.squaredNorm() * n_seg);

  Eigen::FFT<double> fft;
  fft.SetFlag(Eigen::FFT<double>::HalfSpectrum);
  std::vector<double> buf(static_cast<std::size_t>(seg));
  std::vector<std::complex<double>> spec;
  Eigen::MatrixXcd X(lines, nch);  // spectra of one segment, all channels
  std::vector<Eigen::MatrixXcd> G(static_cast<std::size_t>(lines), Eigen::MatrixXcd::Zero(nch, nch));
  for (int s = 0; s < n_seg; ++s) {
    const Eigen::Index start = static_cast<Eigen::Index>(s) * step;
    for (Eigen::Index c = 0; c < nch; ++c) {
      auto xs = x.col(c).segment(start, seg);
      const double mean = options.demean_segments ? xs.mean() : 0.0;
      for (int k = 0; k < seg; ++k) buf[static_cast<std::size_t>(k)] = (xs[k] - mean) * w[k];
      fft.fwd(spec, buf);
      for (int m = 0; m < lines; ++m) X(m, c) = spec[static_cast<std::size_t>(m)];
    }
    for (int m = 0; m < lines; ++m) {
      // Accumulate X X^H (j, k) = X_j conj(X_k): rank-one update per line.
      G[static_cast<std::size_t>(m)].noalias() += X.row(m).transpose() * X.row(m).conjugate();
    }
  }
  out->sample_rate_hz = fs;
  out->segment_samples = seg;
  out->segments = n_seg;
  out->line_spacing_hz = fs / seg;
  out->frequency_hz = Eigen::VectorXd::LinSpaced(lines, 0.0, (lines - 1) * fs / seg);
  for (int m = 0; m < lines; ++m) {
    const bool single = (m == 0) || (seg % 2 == 0 && m == lines - 1);
    G[static_cast<std::size_t>(m)] *= (single ? 1.0 : 2.0) * scale;
  }
  out->G = std::move(G);
  return Status::Ok();
}

Eigen::VectorXcd AnalyticSignal(const Eigen::VectorXd& x, double fs, double lo_hz, double hi_hz) {
  // Zero padding to twice the length keeps the (circular) FFT filter from
  // wrapping the end of the record onto its start.
  const Eigen::Index n_x = x.size();
  const Eigen::Index n = 2 * n_x;
  Eigen::FFT<double> fft;
  std::vector<double> in(static_cast<std::size_t>(n), 0.0);
  std::copy(x.data(), x.data() + n_x, in.begin());
  std::vector<std::complex<double>> spec;
  fft.fwd(spec, in);  // full spectrum, n lines
  const double df = fs / static_cast<double>(n);
  const double edge = kBandEdgeShare * (hi_hz - lo_hz);
  auto gain = [&](double f) {
    if (f < lo_hz - edge || f > hi_hz + edge) return 0.0;
    if (f < lo_hz) return 0.5 - 0.5 * std::cos(std::numbers::pi * (f - (lo_hz - edge)) / edge);
    if (f > hi_hz) return 0.5 - 0.5 * std::cos(std::numbers::pi * ((hi_hz + edge) - f) / edge);
    return 1.0;
  };
  for (Eigen::Index m = 0; m < n; ++m) {
    const auto k = static_cast<std::size_t>(m);
    if (m == 0 || 2 * m >= n) {
      spec[k] = 0.0;  // DC, Nyquist and negative frequencies
    } else {
      spec[k] *= 2.0 * gain(m * df);
    }
  }
  std::vector<std::complex<double>> z;
  fft.inv(z, spec);
  Eigen::VectorXcd out(n_x);
  for (Eigen::Index m = 0; m < n_x; ++m) out[m] = z[static_cast<std::size_t>(m)];
  return out;
}

}  // namespace taut::estimation
