#include "estimation/ssi_cov.h"

#include <Eigen/Eigenvalues>
#include <Eigen/QR>
#include <Eigen/SVD>
#include <algorithm>
#include <cmath>
#include <map>
#include <numbers>
#include <unsupported/Eigen/FFT>

#include "estimation/fdd.h"

namespace taut::estimation {

namespace {

// Correlations R_k, k = 0..kmax, of rows [begin, end) of y:
// R_k = 1/(len - k) sum_t y_{t+k} y_t^T. Stored as one l x l block per lag.
// Two ways to the same sums (equal to round-off):
//  - direct: one dot product of two contiguous column segments per entry,
//    (kmax + 1) l^2 len multiply-adds (with a few channels several times
//    cheaper than the (l x m) (m x l) matrix product, whose packing
//    dominated; callgrind);
//  - by FFT (Wiener-Khinchin): each channel zero-padded to nfft >= len +
//    kmax + 1, so that the circular cross-correlation IFFT(Y_a conj(Y_b))
//    at lag k equals the linear sum over t of y_a(t + k) y_b(t)
//    (Oppenheim and Schafer, Discrete-Time Signal Processing, 1989,
//    sec. 8.7): l forward and l^2 inverse real transforms, about
//    2 l (l + 1) nfft log2(nfft) operations.
// The cheaper one by those counts is used (measured on bench_identify:
// 25600 samples and 100 lags per segment, the 10-mode record, is about
// twice as fast by FFT; 8525 samples and 66 lags, the 5-mode one, a little
// faster direct).
void CorrelationsDirect(const Eigen::MatrixXd& y, Eigen::Index begin, Eigen::Index len,
                        std::vector<Eigen::MatrixXd>* R) {
  const Eigen::Index l = y.cols();
  for (std::size_t k = 0; k < R->size(); ++k) {
    const Eigen::Index m = len - static_cast<Eigen::Index>(k);
    for (Eigen::Index a = 0; a < l; ++a) {
      for (Eigen::Index b = 0; b < l; ++b) {
        (*R)[k](a, b) =
            y.col(a).segment(begin + static_cast<Eigen::Index>(k), m).dot(y.col(b).segment(begin, m)) /
            static_cast<double>(m);
      }
    }
  }
}

void CorrelationsFft(const Eigen::MatrixXd& y, Eigen::Index begin, Eigen::Index len, Eigen::Index nfft,
                     std::vector<Eigen::MatrixXd>* R) {
  const Eigen::Index l = y.cols();
  Eigen::FFT<double> fft;
  fft.SetFlag(Eigen::FFT<double>::HalfSpectrum);
  std::vector<Eigen::VectorXcd> spec(static_cast<std::size_t>(l));
  Eigen::VectorXd buf = Eigen::VectorXd::Zero(nfft);
  for (Eigen::Index a = 0; a < l; ++a) {
    buf.head(len) = y.col(a).segment(begin, len);
    fft.fwd(spec[static_cast<std::size_t>(a)], buf);
  }
  Eigen::VectorXcd prod;
  Eigen::VectorXd c;
  for (Eigen::Index a = 0; a < l; ++a) {
    for (Eigen::Index b = 0; b < l; ++b) {
      prod = spec[static_cast<std::size_t>(a)].cwiseProduct(spec[static_cast<std::size_t>(b)].conjugate());
      fft.inv(c, prod, nfft);
      for (std::size_t k = 0; k < R->size(); ++k)
        (*R)[k](a, b) =
            c[static_cast<Eigen::Index>(k)] / static_cast<double>(len - static_cast<Eigen::Index>(k));
    }
  }
}

std::vector<Eigen::MatrixXd> Correlations(const Eigen::MatrixXd& y, Eigen::Index begin, Eigen::Index end,
                                          int kmax) {
  std::vector<Eigen::MatrixXd> R(static_cast<std::size_t>(kmax + 1));
  const Eigen::Index len = end - begin;
  const Eigen::Index l = y.cols();
  for (auto& r : R) r.resize(l, l);
  Eigen::Index nfft = 1;
  while (nfft < len + kmax + 1) nfft *= 2;
  const double direct = static_cast<double>(kmax + 1) * static_cast<double>(l) * static_cast<double>(len);
  const double by_fft = 2.0 * static_cast<double>(l + 1) * static_cast<double>(nfft) * std::log2(nfft);
  if (by_fft < direct) {
    CorrelationsFft(y, begin, len, nfft, &R);
  } else {
    CorrelationsDirect(y, begin, len, &R);
  }
  return R;
}

// The observability factor U_n S_n^{1/2} for the largest order, from the
// block Toeplitz matrix of R (see the header).
Eigen::MatrixXd Observability(const std::vector<Eigen::MatrixXd>& R, int l, int i, int max_order) {
  Eigen::MatrixXd T(l * i, l * i);
  for (int p = 0; p < i; ++p)
    for (int q = 0; q < i; ++q) T.block(p * l, q * l, l, l) = R[static_cast<std::size_t>(i + p - q)];
  Eigen::BDCSVD<Eigen::MatrixXd> svd(T, Eigen::ComputeThinU);
  const int n = std::min<int>(max_order, l * i);
  return svd.matrixU().leftCols(n) * svd.singularValues().head(n).cwiseSqrt().asDiagonal();
}

// Physical poles (complex pairs, Im > 0) of the order-n realisation.
void PolesAtOrder(const Eigen::MatrixXd& O, int l, int n, double fs, std::vector<SsiPole>* out,
                  std::vector<SsiPole>* all_pairs) {
  const Eigen::Index rows = O.rows() - l;
  const Eigen::MatrixXd up = O.topRows(rows).leftCols(n);
  const Eigen::MatrixXd down = O.bottomRows(rows).leftCols(n);
  const Eigen::MatrixXd A = up.householderQr().solve(down);
  const Eigen::MatrixXd C = O.topRows(l).leftCols(n);
  Eigen::EigenSolver<Eigen::MatrixXd> es(A, true);
  if (es.info() != Eigen::Success) return;
  // eigenvectors() assembles the whole complex matrix on every call: once.
  const Eigen::MatrixXcd psi = es.eigenvectors();
  const Eigen::MatrixXcd c_complex = C.cast<std::complex<double>>();
  for (Eigen::Index k = 0; k < n; ++k) {
    const std::complex<double> mu = es.eigenvalues()[k];
    if (mu.imag() <= 0.0 || std::abs(mu) == 0.0) continue;  // one of each pair; real poles are not modes
    const std::complex<double> lambda = std::log(mu) * fs;
    SsiPole p;
    p.order = n;
    p.frequency_hz = std::abs(lambda) / (2.0 * std::numbers::pi);
    p.damping_ratio = -lambda.real() / std::abs(lambda);
    p.shape = c_complex * psi.col(k);
    if (all_pairs) all_pairs->push_back(p);
    out->push_back(std::move(p));
  }
}

double Median(std::vector<double> v) {
  if (v.empty()) return 0.0;
  std::nth_element(v.begin(), v.begin() + v.size() / 2, v.end());
  double hi = v[v.size() / 2];
  if (v.size() % 2 == 1) return hi;
  return 0.5 * (hi + *std::max_element(v.begin(), v.begin() + v.size() / 2));
}

double StdDev(const std::vector<double>& v) {
  if (v.size() < 2) return 0.0;
  double m = 0.0;
  for (double x : v) m += x;
  m /= static_cast<double>(v.size());
  double s = 0.0;
  for (double x : v) s += (x - m) * (x - m);
  return std::sqrt(s / static_cast<double>(v.size() - 1));
}

bool Physical(const SsiPole& p, double lo, double hi) {
  return p.frequency_hz >= lo && p.frequency_hz <= hi && p.damping_ratio >= kMinDampingRatio &&
         p.damping_ratio <= kMaxDampingRatio;
}

}  // namespace

Status RunSsiCov(const Eigen::MatrixXd& y, double fs, const SsiOptions& o, SsiResult* out) {
  *out = SsiResult{};
  const int l = static_cast<int>(y.cols());
  const Eigen::Index n = y.rows();
  if (l < 1) return Status::InvalidArgument("SSI-COV needs at least one channel");
  if (!(fs > 0.0)) return Status::InvalidArgument("SSI-COV: sample rate must be > 0");
  if (o.min_order < 2 || o.max_order < o.min_order || o.order_step < 1)
    return Status::InvalidArgument("SSI-COV: orders " + std::to_string(o.min_order) + ".." +
                                   std::to_string(o.max_order) + " step " + std::to_string(o.order_step) +
                                   " must satisfy 2 <= min <= max, step >= 1");
  const double nyquist = 0.5 * fs;
  const double lo = std::max(0.0, o.lo_hz);
  const double hi = std::min(o.hi_hz, nyquist);
  // Block rows: enough for the model order (l (i - 1) >= max_order so that
  // O_up has at least n rows) and for lags spanning kLagPeriods periods of
  // the lowest frequency of interest, within kMaxHankelRows.
  int i = o.block_rows;
  if (i <= 0) {
    const int i_order = (o.max_order + l - 1) / l + 1;
    const double f_low = o.lowest_hz > 0 ? o.lowest_hz : (lo > 0 ? lo : 0.0);
    const int i_lag = f_low > 0 ? static_cast<int>(std::ceil(kLagPeriods * fs / f_low)) : 0;
    // The lag count also follows the record length: 2 i lags need
    // kMinSamplesPerLag samples each (a short decay at a high rate would
    // otherwise be refused for lags it cannot estimate; issue 12, class 7).
    const int i_len = static_cast<int>(std::min<Eigen::Index>(n / (2 * kMinSamplesPerLag), kMaxHankelRows));
    i = std::max(i_order, std::min({i_lag, kMaxHankelRows / l, i_len}));
  }
  if (l * (i - 1) < o.max_order)
    return Status::InvalidArgument("SSI-COV: " + std::to_string(i) + " block rows x " + std::to_string(l) +
                                   " channels cannot carry model order " + std::to_string(o.max_order));
  const int kmax = 2 * i - 1;
  const Eigen::Index min_len = kMinSamplesPerLag * (kmax + 1);
  if (n < min_len)
    return Status::InvalidArgument("SSI-COV: " + std::to_string(n) + " samples are too few for " +
                                   std::to_string(kmax) + " correlation lags (at least " +
                                   std::to_string(min_len) + " needed)");
  // Fewer segments when they would be too short; none below
  // kMinSegmentsForStd (the cluster scatter is then used).
  int n_seg = std::min<int>(o.uncertainty_segments, static_cast<int>(n / min_len));
  if (n_seg < kMinSegmentsForStd) n_seg = 0;
  const Eigen::Index seg_len = n_seg > 0 ? n / n_seg : n;
  out->segments = n_seg;
  out->block_rows = i;

  // Correlations per segment; the whole-record correlations are their mean
  // (all segments have the same length).
  std::vector<std::vector<Eigen::MatrixXd>> Rseg;
  std::vector<Eigen::MatrixXd> R;
  if (n_seg > 0) {
    for (int s = 0; s < n_seg; ++s) Rseg.push_back(Correlations(y, s * seg_len, (s + 1) * seg_len, kmax));
    R = Rseg[0];
    for (int s = 1; s < n_seg; ++s)
      for (int k = 0; k <= kmax; ++k)
        R[static_cast<std::size_t>(k)] += Rseg[static_cast<std::size_t>(s)][static_cast<std::size_t>(k)];
    for (auto& r : R) r /= n_seg;
  } else {
    R = Correlations(y, 0, n, kmax);
  }

  const Eigen::MatrixXd O = Observability(R, l, i, o.max_order);
  const int top = static_cast<int>(O.cols());
  std::vector<std::vector<SsiPole>> by_order;
  std::vector<SsiPole> narrow;
  for (int ord = o.min_order; ord <= std::min(o.max_order, top); ord += o.order_step) {
    std::vector<SsiPole> all, phys;
    PolesAtOrder(O, l, ord, fs, &all, nullptr);
    for (auto& p : all) {
      if (p.frequency_hz < lo || p.frequency_hz > hi) continue;
      if (p.damping_ratio >= 0.0 && p.damping_ratio < kMinDampingRatio) narrow.push_back(p);
      if (Physical(p, lo, hi)) phys.push_back(std::move(p));
    }
    // Stability against the previous order.
    if (!by_order.empty()) {
      for (auto& p : phys) {
        for (const auto& q : by_order.back()) {
          if (std::abs(p.frequency_hz - q.frequency_hz) <= kStableFrequencyTol * q.frequency_hz &&
              std::abs(p.damping_ratio - q.damping_ratio) <= kStableDampingTol * q.damping_ratio &&
              (l == 1 || Mac(p.shape, q.shape) >= kStableMinMac)) {
            p.stable = true;
            break;
          }
        }
      }
    }
    by_order.push_back(std::move(phys));
  }
  const int n_orders = static_cast<int>(by_order.size());
  for (const auto& v : by_order) out->poles.insert(out->poles.end(), v.begin(), v.end());

  // Clustering of stable poles, in ascending frequency.
  std::vector<const SsiPole*> stable;
  for (const auto& p : out->poles)
    if (p.stable) stable.push_back(&p);
  std::sort(stable.begin(), stable.end(),
            [](const SsiPole* a, const SsiPole* b) { return a->frequency_hz < b->frequency_hz; });
  struct Cluster {
    std::vector<const SsiPole*> poles;
    double median_hz = 0.0;
  };
  std::vector<Cluster> clusters;
  for (const SsiPole* p : stable) {
    Cluster* best = nullptr;
    for (auto& c : clusters) {
      if (std::abs(p->frequency_hz - c.median_hz) > kClusterFrequencyTol * c.median_hz) continue;
      if (l > 1 && Mac(p->shape, c.poles.front()->shape) < kClusterMinMac) continue;
      best = &c;
      break;
    }
    if (best == nullptr) {
      clusters.push_back({{p}, p->frequency_hz});
      continue;
    }
    best->poles.push_back(p);
    std::vector<double> f;
    for (auto* q : best->poles) f.push_back(q->frequency_hz);
    best->median_hz = Median(f);
  }
  const int min_size = std::max(3, static_cast<int>(std::ceil(kMinClusterShare * n_orders)));
  for (auto& c : clusters) {
    // One pole per order: keep the one nearest the cluster median.
    std::vector<const SsiPole*> kept;
    for (auto* p : c.poles) {
      auto it =
          std::find_if(kept.begin(), kept.end(), [&](const SsiPole* q) { return q->order == p->order; });
      if (it == kept.end()) {
        kept.push_back(p);
      } else if (std::abs(p->frequency_hz - c.median_hz) < std::abs((*it)->frequency_hz - c.median_hz)) {
        *it = p;
      }
    }
    if (static_cast<int>(kept.size()) < min_size) continue;
    std::vector<double> f, z;
    for (auto* p : kept) {
      f.push_back(p->frequency_hz);
      z.push_back(p->damping_ratio);
    }
    SsiMode m;
    m.frequency_hz = Median(f);
    m.damping_ratio = Median(z);
    m.cluster_size = static_cast<int>(kept.size());
    m.cluster_frequency_std_hz = StdDev(f);
    const SsiPole* rep = *std::min_element(kept.begin(), kept.end(), [&](const SsiPole* a, const SsiPole* b) {
      return std::abs(a->frequency_hz - m.frequency_hz) < std::abs(b->frequency_hz - m.frequency_hz);
    });
    m.representative_order = rep->order;
    m.complex_shape = rep->shape;
    m.shape = RealNormalise(rep->shape);
    m.frequency_std_hz = m.cluster_frequency_std_hz;
    m.damping_std = StdDev(z);
    out->modes.push_back(std::move(m));
  }
  std::sort(out->modes.begin(), out->modes.end(),
            [](const SsiMode& a, const SsiMode& b) { return a.frequency_hz < b.frequency_hz; });

  // Narrow lines: cluster the near-zero-damping poles by frequency and keep
  // those seen at several orders.
  std::sort(narrow.begin(), narrow.end(),
            [](const SsiPole& a, const SsiPole& b) { return a.frequency_hz < b.frequency_hz; });
  for (std::size_t a = 0; a < narrow.size();) {
    std::size_t b = a + 1;
    while (b < narrow.size() &&
           narrow[b].frequency_hz - narrow[a].frequency_hz <= kClusterFrequencyTol * narrow[a].frequency_hz)
      ++b;
    if (static_cast<int>(b - a) >= min_size) out->narrow_lines_hz.push_back(narrow[(a + b) / 2].frequency_hz);
    a = b;
  }

  // Segment scatter. Each segment's estimate of a mode is the median over
  // the kSegmentOrders highest orders of the diagram (spaced by
  // kSegmentOrderSpacing), where every well excited mode is present; one
  // order alone is sometimes a poor realisation on a short segment, which
  // inflates the damping scatter.
  if (n_seg > 0 && !out->modes.empty()) {
    const int top_needed = std::min(o.max_order, l * i);
    std::vector<int> seg_orders;
    for (int j = 0; j < kSegmentOrders; ++j) {
      const int ord = top_needed - j * kSegmentOrderSpacing;
      if (ord >= o.min_order) seg_orders.push_back(ord);
    }
    std::vector<std::vector<double>> fs_seg(out->modes.size()), zs_seg(out->modes.size());
    for (int s = 0; s < n_seg; ++s) {
      const Eigen::MatrixXd Os = Observability(Rseg[static_cast<std::size_t>(s)], l, i, top_needed);
      std::map<int, std::vector<SsiPole>> cache;
      for (std::size_t k = 0; k < out->modes.size(); ++k) {
        const SsiMode& m = out->modes[k];
        std::vector<double> f_k, z_k;
        for (int ord : seg_orders) {
          auto it = cache.find(ord);
          if (it == cache.end()) {
            std::vector<SsiPole> poles;
            PolesAtOrder(Os, l, ord, fs, &poles, nullptr);
            it = cache.emplace(ord, std::move(poles)).first;
          }
          const SsiPole* best = nullptr;
          double best_d = kSegmentMatchTol;
          for (const auto& p : it->second) {
            const double d = std::abs(p.frequency_hz - m.frequency_hz) / m.frequency_hz;
            if (d < best_d && p.damping_ratio > 0 &&
                (l == 1 || Mac(p.shape, m.complex_shape) >= kSegmentMinMac)) {
              best = &p;
              best_d = d;
            }
          }
          if (best) {
            f_k.push_back(best->frequency_hz);
            z_k.push_back(best->damping_ratio);
          }
        }
        if (!f_k.empty()) {
          fs_seg[k].push_back(Median(f_k));
          zs_seg[k].push_back(Median(z_k));
        }
      }
    }
    for (std::size_t k = 0; k < out->modes.size(); ++k) {
      SsiMode& m = out->modes[k];
      m.segments_found = static_cast<int>(fs_seg[k].size());
      if (m.segments_found >= kMinSegmentsForStd) {
        const double root = std::sqrt(static_cast<double>(m.segments_found));
        m.frequency_std_hz = StdDev(fs_seg[k]) / root;
        m.damping_std = StdDev(zs_seg[k]) / root;
        m.std_from_segments = true;
      }
    }
  }
  return Status::Ok();
}

}  // namespace taut::estimation
