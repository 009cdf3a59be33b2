#include "estimation/conditioning.h"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

namespace taut::estimation {

void RemoveLinearTrend(Eigen::MatrixXd* samples) {
  const Eigen::Index n = samples->rows();
  if (n == 0) return;
  if (n < 2) {
    samples->rowwise() -= samples->colwise().mean();
    return;
  }
  // Regressor centred on the middle sample, so that the two normal equations
  // decouple: a = mean(x), b = sum(t x) / sum(t^2).
  const Eigen::ArrayXd t = Eigen::ArrayXd::LinSpaced(n, 0.0, static_cast<double>(n - 1)) - 0.5 * (n - 1);
  const double tt = (t * t).sum();
  for (Eigen::Index c = 0; c < samples->cols(); ++c) {
    auto x = samples->col(c).array();
    const double a = x.mean();
    const double b = (t * x).sum() / tt;
    x -= a + b * t;
  }
}

Eigen::VectorXd DecimationFilter(int factor) {
  if (factor <= 1) return Eigen::VectorXd::Ones(1);
  // Normalised to the input rate: new Nyquist at pi / factor rad/sample.
  const double w_stop = std::numbers::pi / factor;
  return KaiserLowPass(kDecimationPassbandShare * w_stop, w_stop);
}

Eigen::VectorXd KaiserLowPass(double w_pass, double w_stop) {
  const double pi = std::numbers::pi;
  const double a_db = kDecimationStopbandDb;
  const double dw = w_stop - w_pass;
  const double w_cut = 0.5 * (w_pass + w_stop);
  const double beta = 0.1102 * (a_db - 8.7);  // Oppenheim and Schafer eq. 7.62, A > 50 dB
  int taps = static_cast<int>(std::ceil((a_db - 8.0) / (2.285 * dw))) + 1;  // eq. 7.63 (M + 1)
  if (taps % 2 == 0) ++taps;  // odd length: integer delay, symmetric about the centre tap
  const int m = taps - 1;
  Eigen::VectorXd h(taps);
  const double i0_beta = std::cyl_bessel_i(0.0, beta);
  for (int k = 0; k < taps; ++k) {
    const double x = k - 0.5 * m;
    const double ideal = (x == 0.0) ? w_cut / pi : std::sin(w_cut * x) / (pi * x);
    const double r = m > 0 ? 2.0 * k / m - 1.0 : 0.0;
    const double window = std::cyl_bessel_i(0.0, beta * std::sqrt(std::max(0.0, 1.0 - r * r))) / i0_beta;
    h[k] = ideal * window;
  }
  return h / h.sum();
}

Status FilterAndDecimate(const Eigen::MatrixXd& in, const Eigen::VectorXd& h, int factor,
                         Eigen::MatrixXd* out) {
  if (factor < 1) return Status::InvalidArgument("decimation factor " + std::to_string(factor) + " < 1");
  const Eigen::Index taps = h.size();
  if (taps == 0 || taps % 2 == 0)
    return Status::InvalidArgument("filter of " + std::to_string(taps) + " taps: must be odd");
  if (in.rows() < taps)
    return Status::InvalidArgument("record of " + std::to_string(in.rows()) +
                                   " samples is shorter than the " + std::to_string(taps) + "-tap filter");
  const Eigen::Index n_out = (in.rows() - taps) / factor + 1;
  out->resize(n_out, in.cols());
  // Polyphase in effect: only the kept outputs are computed, each a dot
  // product of the taps with a contiguous input segment.
  for (Eigen::Index c = 0; c < in.cols(); ++c) {
    for (Eigen::Index m = 0; m < n_out; ++m) {
      (*out)(m, c) = in.col(c).segment(m * factor, taps).dot(h);  // h is symmetric: no reversal needed
    }
  }
  return Status::Ok();
}

Status Decimate(const Eigen::MatrixXd& in, int factor, Eigen::MatrixXd* out) {
  if (factor < 1 || factor > kMaxDecimationFactor)
    return Status::InvalidArgument("decimation factor " + std::to_string(factor) + " outside [1, " +
                                   std::to_string(kMaxDecimationFactor) + "]");
  if (factor == 1) {
    *out = in;
    return Status::Ok();
  }
  const Eigen::VectorXd h = DecimationFilter(factor);
  if (in.rows() < h.size())
    return Status::InvalidArgument("record of " + std::to_string(in.rows()) +
                                   " samples is shorter than the " + std::to_string(h.size()) +
                                   "-tap anti-alias filter");
  return FilterAndDecimate(in, h, factor, out);
}

}  // namespace taut::estimation
