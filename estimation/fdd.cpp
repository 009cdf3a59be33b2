#include "estimation/fdd.h"

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <limits>

namespace taut::estimation {

Eigen::VectorXd RealNormalise(const Eigen::VectorXcd& u) {
  // Maximise |Re(e^{i t} u)|^2 = (1/2)(|u|^2 + Re(e^{2it} sum u_j^2)):
  // the maximum is at 2t = -arg(sum u_j^2).
  const std::complex<double> s = (u.array() * u.array()).sum();
  const double t = -0.5 * std::arg(s);
  Eigen::VectorXd r = (u * std::polar(1.0, t)).real();
  Eigen::Index imax = 0;
  r.cwiseAbs().maxCoeff(&imax);
  if (r[imax] != 0.0) r /= r[imax];
  return r;
}

double Mac(const Eigen::VectorXd& a, const Eigen::VectorXd& b) {
  const double den = a.squaredNorm() * b.squaredNorm();
  if (den == 0.0) return 0.0;
  const double d = a.dot(b);
  return d * d / den;
}

double Mac(const Eigen::VectorXcd& a, const Eigen::VectorXcd& b) {
  const double den = a.squaredNorm() * b.squaredNorm();
  if (den == 0.0) return 0.0;
  return std::norm(a.dot(b)) / den;
}

FddResult RunFdd(const CrossSpectrum& csd, double lo_hz, double hi_hz, int max_peaks) {
  FddResult r;
  const int lines = static_cast<int>(csd.G.size());
  if (lines == 0) return r;
  const Eigen::Index nch = csd.G[0].rows();
  r.s1.resize(lines);
  r.s2 = Eigen::VectorXd::Zero(lines);
  std::vector<Eigen::VectorXcd> u1(static_cast<std::size_t>(lines));
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXcd> eig;
  for (int m = 0; m < lines; ++m) {
    if (nch == 1) {
      r.s1[m] = csd.G[static_cast<std::size_t>(m)](0, 0).real();
      u1[static_cast<std::size_t>(m)] = Eigen::VectorXcd::Ones(1);
      continue;
    }
    eig.compute(csd.G[static_cast<std::size_t>(m)]);  // ascending eigenvalues
    r.s1[m] = std::max(0.0, eig.eigenvalues()[nch - 1]);
    r.s2[m] = std::max(0.0, eig.eigenvalues()[nch - 2]);
    u1[static_cast<std::size_t>(m)] = eig.eigenvectors().col(nch - 1);
  }

  const double df = csd.line_spacing_hz;
  const int m_lo = std::max(kPeakEdgeLines, static_cast<int>(std::ceil(lo_hz / df)));
  const int m_hi = std::min(lines - 1 - kPeakEdgeLines, static_cast<int>(std::floor(hi_hz / df)));
  std::vector<FddPeak> cand;
  for (int m = m_lo; m <= m_hi; ++m) {
    const double v = r.s1[m];
    if (!(v > r.s1[m - 1] && v >= r.s1[m + 1]) || v <= 0.0) continue;
    // Prominence: walk left and right until a higher value (or the band
    // edge) and take the minimum on each side.
    double left_min = v, right_min = v;
    for (int k = m - 1; k >= 0 && r.s1[k] <= v; --k) left_min = std::min(left_min, r.s1[k]);
    for (int k = m + 1; k < lines && r.s1[k] <= v; ++k) right_min = std::min(right_min, r.s1[k]);
    const double base = std::max(left_min, right_min);
    const double prominence = base > 0.0 ? v / base : std::numeric_limits<double>::infinity();
    if (prominence < kMinPeakProminenceRatio) continue;
    FddPeak p;
    p.line = m;
    p.s1 = v;
    p.prominence = prominence;
    // Grandke's Hann interpolation towards the larger neighbour.
    const double a0 = std::sqrt(v);
    const bool right = r.s1[m + 1] >= r.s1[m - 1];
    const double a1 = std::sqrt(right ? r.s1[m + 1] : r.s1[m - 1]);
    const double alpha = a1 / a0;
    const double delta = std::clamp((2.0 * alpha - 1.0) / (alpha + 1.0), 0.0, 1.0);
    p.frequency_hz = (m + (right ? delta : -delta)) * df;
    // Half-power points.
    const double half = 0.5 * v;
    int kl = m, kr = m;
    while (kl > 0 && r.s1[kl] > half) --kl;
    while (kr < lines - 1 && r.s1[kr] > half) ++kr;
    auto cross = [&](int a, int b) {  // linear interpolation of the half-power crossing between lines a, b
      const double ya = r.s1[a], yb = r.s1[b];
      const double t = (ya == yb) ? 0.0 : (half - ya) / (yb - ya);
      return (a + t * (b - a)) * df;
    };
    const double f_lo = (kl < m) ? cross(kl, kl + 1) : m * df;
    const double f_hi = (kr > m) ? cross(kr - 1, kr) : m * df;
    p.damping_ratio = (f_hi - f_lo) / (2.0 * std::max(p.frequency_hz, df));
    // The Hann main lobe has a half-power width of about 1.44 lines; a
    // width below 3 lines is dominated by the window, not the damping.
    p.resolution_limited = (f_hi - f_lo) < 3.0 * df;
    p.shape = RealNormalise(u1[static_cast<std::size_t>(m)]);
    p.s2_over_s1 = r.s2[m] / v;
    cand.push_back(std::move(p));
  }
  std::sort(cand.begin(), cand.end(),
            [](const FddPeak& a, const FddPeak& b) { return a.prominence > b.prominence; });
  if (static_cast<int>(cand.size()) > max_peaks)
    cand.resize(static_cast<std::size_t>(std::max(0, max_peaks)));
  std::sort(cand.begin(), cand.end(),
            [](const FddPeak& a, const FddPeak& b) { return a.frequency_hz < b.frequency_hz; });
  r.peaks = std::move(cand);
  return r;
}

}  // namespace taut::estimation
