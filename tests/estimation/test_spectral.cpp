// Conditioning and spectral estimation (conditioning.h, spectral.h, fdd.h)
// against a reference library and closed-form results.
#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
#include <complex>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <random>
#include <string>

#include "estimation/conditioning.h"
#include "estimation/fdd.h"
#include "estimation/spectral.h"

namespace taut::estimation {
namespace {

// scipy from Debian's python3-scipy, always through /usr/bin/python3 (the
// first python3 on PATH may be another interpreter without it).
constexpr const char* kPython = "/usr/bin/python3";

bool HaveScipy() {
  const std::string cmd = std::string(kPython) + " -c 'import scipy.signal' >/dev/null 2>&1";
  return std::system(cmd.c_str()) == 0;
}

// Welch PSD and CSD of a two-channel invented test signal (two sinusoids,
// a trend and white noise) against scipy.signal.welch / scipy.signal.csd
// with window='hann', nperseg=512, noverlap=256 (scipy's defaults for
// detrend='constant', scaling='density', one-sided). Both compute the same
// finite sums in float64, so they agree to rounding; 1e-6 relative (issue 3)
// leaves room for the FFT algorithms' different rounding.
TEST(Welch, MatchesScipy) {
  if (!HaveScipy()) GTEST_SKIP() << "SKIPPED: /usr/bin/python3 with scipy not found; install python3-scipy";
  const double fs = 200.0;
  const int n = 6000, seg = 512;
  std::mt19937_64 rng(3);
  std::normal_distribution<double> g(0.0, 1.0);
  Eigen::MatrixXd x(n, 2);
  for (int k = 0; k < n; ++k) {
    const double t = k / fs;
    x(k, 0) = std::sin(2 * M_PI * 13.3 * t) + 0.02 * t + 0.3 * g(rng);
    x(k, 1) = 0.5 * std::cos(2 * M_PI * 41.7 * t) - 0.7 * x(k, 0) + 0.2 * g(rng);
  }
  const auto dir = std::filesystem::temp_directory_path() / ("taut_welch_" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  {
    std::ofstream f(dir / "x.txt");
    f.precision(17);
    for (int k = 0; k < n; ++k) f << x(k, 0) << " " << x(k, 1) << "\n";
  }
  const std::string script =
      "import numpy as np, scipy.signal as s\n"
      "x = np.loadtxt('" +
      (dir / "x.txt").string() +
      "')\n"
      "f, p0 = s.welch(x[:,0], fs=200.0, window='hann', nperseg=512, noverlap=256)\n"
      "_, p1 = s.welch(x[:,1], fs=200.0, window='hann', nperseg=512, noverlap=256)\n"
      "_, c = s.csd(x[:,0], x[:,1], fs=200.0, window='hann', nperseg=512, noverlap=256)\n"
      "np.savetxt('" +
      (dir / "p.txt").string() + "', np.column_stack([f, p0, p1, c.real, c.imag]), fmt='%.17g')\n";
  {
    std::ofstream f(dir / "ref.py");
    f << script;
  }
  ASSERT_EQ(std::system((std::string(kPython) + " " + (dir / "ref.py").string()).c_str()), 0);
  CrossSpectrum csd;
  WelchOptions wo;
  wo.segment_samples = seg;
  ASSERT_TRUE(WelchCsd(x, fs, wo, &csd).ok());
  EXPECT_EQ(csd.segments, (n - seg) / (seg / 2) + 1);
  std::ifstream ref(dir / "p.txt");
  int m = 0;
  double f, p0, p1, cr, ci;
  double worst = 0.0;
  while (ref >> f >> p0 >> p1 >> cr >> ci) {
    ASSERT_LT(m, static_cast<int>(csd.G.size()));
    EXPECT_NEAR(csd.frequency_hz[m], f, 1e-9);
    const auto& G = csd.G[static_cast<std::size_t>(m)];
    EXPECT_NEAR(G(0, 0).real(), p0, 1e-6 * p0) << "line " << m;
    EXPECT_NEAR(G(1, 1).real(), p1, 1e-6 * p1) << "line " << m;
    // scipy's csd(x, y) = conj(X) Y; ours G_01 = X_0 conj(X_1) = conj of it.
    const std::complex<double> c(cr, -ci);
    EXPECT_NEAR(std::abs(G(0, 1) - c), 0.0, 1e-6 * std::abs(c)) << "line " << m;
    worst = std::max(worst, std::abs(G(0, 0).real() - p0) / p0);
    ++m;
  }
  EXPECT_EQ(m, seg / 2 + 1);
  std::filesystem::remove_all(dir);
  std::cout << "worst relative PSD difference to scipy: " << worst << "\n";
}

// A sinusoid of known frequency in white noise: the FDD peak frequency
// within the interpolation accuracy fdd.h promises
// (kSinusoidInterpolationError_lines, Grandke 1983) for a line SNR above
// 40 dB. Here A = 1, sigma = 0.1, segment 2048: line SNR = A^2 S1^2 /
// (4 sigma^2 S2) = 10 log10(341 / 0.01) = 45 dB (S1 = sum w, S2 = sum w^2).
// Offsets of 0.1, 0.5 and 0.85 lines from a line cover the range.
TEST(Fdd, SinusoidPeakWithinInterpolationAccuracy) {
  const double fs = 128.0;
  const int n = 32768, seg = 2048;
  const double df = fs / seg;
  for (double offset : {0.1, 0.5, 0.85}) {
    const double f0 = (117 + offset) * df;
    std::mt19937_64 rng(9);
    std::normal_distribution<double> g(0.0, 0.1);
    Eigen::MatrixXd x(n, 1);
    for (int k = 0; k < n; ++k) x(k, 0) = std::sin(2 * M_PI * f0 * k / fs + 0.3) + g(rng);
    CrossSpectrum csd;
    WelchOptions wo;
    wo.segment_samples = seg;
    ASSERT_TRUE(WelchCsd(x, fs, wo, &csd).ok());
    const FddResult r = RunFdd(csd, 1.0, 60.0, 1);
    ASSERT_EQ(r.peaks.size(), 1u);
    std::cout << "offset " << offset << " lines: peak error " << (r.peaks[0].frequency_hz - f0) / df
              << " lines\n";
    EXPECT_NEAR(r.peaks[0].frequency_hz, f0, kSinusoidInterpolationError_lines * df) << "offset " << offset;
    EXPECT_TRUE(r.peaks[0].resolution_limited);  // a line has no damping width
  }
}

// Kaiser-window anti-alias filter: the design formulas (Oppenheim and
// Schafer 2010, eqs. 7.62-7.63) promise a ripple delta = 10^(-A/20) = 1e-4
// in the pass band and below delta in the stop band for A = 80 dB. The
// formula for the length is an approximation (within +-2 taps, same
// source), so the check allows 1.5 delta.
TEST(Decimation, KaiserFilterMeetsItsSpecification) {
  for (int q : {2, 4, 5}) {
    const Eigen::VectorXd h = DecimationFilter(q);
    const double delta = std::pow(10.0, -kDecimationStopbandDb / 20.0);
    EXPECT_NEAR(h.sum(), 1.0, 1e-14);
    EXPECT_LT((h - h.reverse()).cwiseAbs().maxCoeff(), 1e-15);  // linear phase
    const double w_stop = M_PI / q, w_pass = kDecimationPassbandShare * w_stop;
    for (int i = 0; i <= 400; ++i) {
      const double w = M_PI * i / 400.0;
      std::complex<double> H = 0.0;
      for (Eigen::Index k = 0; k < h.size(); ++k) H += h[k] * std::polar(1.0, -w * k);
      if (w <= w_pass) {
        EXPECT_NEAR(std::abs(H), 1.0, 1.5 * delta) << "q " << q << " w " << w;
      }
      if (w >= w_stop) {
        EXPECT_LT(std::abs(H), 1.5 * delta) << "q " << q << " w " << w;
      }
    }
  }
}

// Decimate keeps a pass-band sinusoid, on time (first output = input row
// (taps - 1) / 2), and suppresses one that would alias.
TEST(Decimation, KeepsPassBandAndSuppressesAliases) {
  const int q = 4;
  const double fs = 400.0, f_pass = 30.0, f_alias = 70.0;  // new Nyquist 50 Hz; 70 Hz would fold to 30 Hz
  const int n = 8000;
  Eigen::MatrixXd x(n, 2);
  for (int k = 0; k < n; ++k) {
    x(k, 0) = std::sin(2 * M_PI * f_pass * k / fs);
    x(k, 1) = std::sin(2 * M_PI * f_alias * k / fs);
  }
  Eigen::MatrixXd y;
  ASSERT_TRUE(Decimate(x, q, &y).ok());
  const Eigen::Index taps = DecimationFilter(q).size();
  ASSERT_EQ(y.rows(), (n - taps) / q + 1);
  const double delta = std::pow(10.0, -kDecimationStopbandDb / 20.0);
  for (Eigen::Index m = 0; m < y.rows(); ++m) {
    const double t_in = static_cast<double>(m * q + (taps - 1) / 2);
    EXPECT_NEAR(y(m, 0), std::sin(2 * M_PI * f_pass * t_in / fs), 1.5 * delta);
    EXPECT_LT(std::abs(y(m, 1)), 1.5 * delta);
  }
  Eigen::MatrixXd bad;
  EXPECT_FALSE(Decimate(x, 0, &bad).ok());
  EXPECT_FALSE(Decimate(x.topRows(10), 8, &bad).ok());
}

// Least-squares line removal: an exact line a + b t leaves nothing
// (normal equations), and a sinusoid of whole periods is left unchanged to
// the size of its own projection on the line (computed in closed form:
// sum t sin(...) over whole periods, here checked against direct removal).
TEST(Conditioning, LinearTrendRemoval) {
  const int n = 1000;
  Eigen::MatrixXd x(n, 2);
  for (int k = 0; k < n; ++k) {
    x(k, 0) = 3.0 - 0.25 * k;
    x(k, 1) = 1.5 + 0.01 * k + std::sin(2 * M_PI * 10 * k / n);
  }
  Eigen::MatrixXd y = x;
  RemoveLinearTrend(&y);
  EXPECT_LT(y.col(0).cwiseAbs().maxCoeff(), 1e-10);
  // Residual orthogonal to 1 and t (the normal equations of the fit).
  const Eigen::VectorXd t = Eigen::VectorXd::LinSpaced(n, 0, n - 1);
  EXPECT_NEAR(y.col(1).sum(), 0.0, 1e-9);
  EXPECT_NEAR(y.col(1).dot(t), 0.0, 1e-6);
}

// The analytic signal of a sinusoid in its band has envelope A and phase
// advancing at 2 pi f (Gabor 1946), away from the ends.
TEST(AnalyticSignal, EnvelopeAndPhaseOfASinusoid) {
  const double fs = 100.0, f = 7.0, a = 2.5;
  const int n = 4000;
  Eigen::VectorXd x(n);
  for (int k = 0; k < n; ++k) x[k] = a * std::cos(2 * M_PI * f * k / fs + 0.4);
  const Eigen::VectorXcd z = AnalyticSignal(x, fs, 6.0, 8.0);
  for (int k = 500; k < n - 500; k += 37) {
    EXPECT_NEAR(std::abs(z[k]), a, 1e-3 * a);
    const double expect = std::remainder(2 * M_PI * f * k / fs + 0.4, 2 * M_PI);
    EXPECT_NEAR(std::remainder(std::arg(z[k]) - expect, 2 * M_PI), 0.0, 1e-3);
  }
}

}  // namespace
}  // namespace taut::estimation
