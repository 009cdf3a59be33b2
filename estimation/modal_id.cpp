#include "estimation/modal_id.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <sstream>

#include "estimation/conditioning.h"
#include "estimation/fdd.h"
#include "estimation/spectral.h"
#include "estimation/ssi_cov.h"

namespace taut::estimation {

namespace {

constexpr int kMaxModesLimit = 32;

std::string Fmt(double v, int precision = 4) {
  std::ostringstream o;
  o.precision(precision);
  o << v;
  return o.str();
}

// RMS of consecutive blocks of `block` rows (over all channels).
std::vector<double> BlockRms(const Eigen::MatrixXd& y, Eigen::Index block) {
  std::vector<double> out;
  for (Eigen::Index s = 0; s + block <= y.rows(); s += block)
    out.push_back(std::sqrt(y.middleRows(s, block).squaredNorm() / static_cast<double>(block * y.cols())));
  return out;
}

}  // namespace

FreeDecayWindow FindFreeDecay(const Eigen::MatrixXd& y, double fs) {
  FreeDecayWindow w;
  w.end = y.rows();
  if (y.rows() == 0) return w;
  y.rowwise().squaredNorm().maxCoeff(&w.blow);
  w.begin = std::min<Eigen::Index>(y.rows() - 1, w.blow + std::lround(kImpactGuard_s * fs));
  const Eigen::Index block = std::max<Eigen::Index>(1, std::lround(fs));  // 1 s
  const std::vector<double> rms = BlockRms(y.middleRows(w.begin, y.rows() - w.begin), block);
  if (!rms.empty()) {
    w.noise_rms_m_s2 = rms.back();
    std::size_t b = 0;
    while (b < rms.size() && rms[b] > kDecayNoiseRatio * w.noise_rms_m_s2) ++b;
    w.decays = b > 0;
    w.end = std::max(w.begin + std::min<Eigen::Index>(y.rows() - w.begin, 10 * block),
                     w.begin + static_cast<Eigen::Index>(b) * block);
    w.end = std::min(w.end, y.rows());
  }
  return w;
}

std::vector<BackbonePoint> DecayBackbone(const Eigen::VectorXd& x, double fs, double f_hz, double lo_hz,
                                         double hi_hz, double noise_floor) {
  std::vector<BackbonePoint> out;
  if (x.size() < 16 || !(f_hz > 0)) return out;
  const Eigen::VectorXcd z = AnalyticSignal(x, fs, lo_hz, hi_hz);
  const Eigen::Index n = z.size();
  // Unwrapped phase.
  Eigen::VectorXd phase(n);
  phase[0] = std::arg(z[0]);
  for (Eigen::Index k = 1; k < n; ++k) {
    double d = std::arg(z[k]) - std::arg(z[k - 1]);
    d -= 2.0 * std::numbers::pi * std::round(d / (2.0 * std::numbers::pi));
    phase[k] = phase[k - 1] + d;
  }
  const Eigen::Index win = std::max<Eigen::Index>(4, std::lround(kBackboneWindowCycles * fs / f_hz));
  const Eigen::Index edge = std::lround(kBackboneEdgeCycles * fs / f_hz);
  for (Eigen::Index s = edge; s + win <= n - edge; s += win) {
    const double amp = z.segment(s, win).cwiseAbs().mean();
    if (amp < noise_floor) break;
    BackbonePoint p;
    p.time_s = (s + 0.5 * win) / fs;
    p.amplitude_m_s2 = amp;
    // Mean instantaneous frequency = phase advance / (2 pi window time).
    p.frequency_hz = (phase[s + win - 1] - phase[s]) / (2.0 * std::numbers::pi * (win - 1) / fs);
    const double f = p.frequency_hz > 0.0 ? p.frequency_hz : f_hz;
    p.displacement_m = amp / std::pow(2.0 * std::numbers::pi * f, 2);
    out.push_back(p);
  }
  return out;
}

Status IdentifyModes(const Record& record, const ModalIdOptions& o, ModalIdentification* out) {
  *out = ModalIdentification{};
  const Eigen::Index nch = record.samples.cols();
  if (record.samples.rows() == 0 || nch == 0 || static_cast<std::size_t>(nch) != record.channels.size())
    return Status::InvalidArgument("record has no samples, or its channel names do not match its columns");
  if (!(record.sample_rate_hz > 0.0))
    return Status::InvalidArgument("record sample_rate_hz = " + Fmt(record.sample_rate_hz) + " must be > 0");
  if (o.max_modes < 1 || o.max_modes > kMaxModesLimit)
    return Status::InvalidArgument("max_modes = " + std::to_string(o.max_modes) + " must lie in 1.." +
                                   std::to_string(kMaxModesLimit));
  const double fs = record.sample_rate_hz;
  const double nyquist = 0.5 * fs;
  out->channels = record.channels;
  out->sample_rate_hz = fs;
  out->duration_s = record.duration_s();
  out->cautions = record.cautions;

  double lo = o.band_lo_hz.value_or(0.0);
  double hi = o.band_hi_hz.value_or(kDefaultBandTopShare * nyquist);
  if (!(lo >= 0.0) || !(hi > lo) || !std::isfinite(hi))
    return Status::InvalidArgument("band " + Fmt(lo) + ":" + Fmt(hi) + " Hz must satisfy 0 <= lo < hi");
  if (lo >= nyquist)
    return Status::InvalidArgument("band_lo_hz = " + Fmt(lo) + " is at or above the Nyquist frequency " +
                                   Fmt(nyquist) + " Hz");
  if (hi > kDefaultBandTopShare * nyquist) {
    out->cautions.push_back(
        {"rate-too-low", "the band top " + Fmt(hi) + " Hz is above " + Fmt(kDefaultBandTopShare * 100, 2) +
                             " % of the Nyquist frequency " + Fmt(nyquist) + " Hz: it is lowered to " +
                             Fmt(kDefaultBandTopShare * nyquist) +
                             " Hz; record at a higher rate for the modes above."});
    hi = kDefaultBandTopShare * nyquist;
  }

  // 1. Conditioning.
  Eigen::MatrixXd y = record.samples;
  RemoveLinearTrend(&y);
  if (y.squaredNorm() == 0.0) {
    out->cautions.push_back({"no-mode", "the record carries no signal (all channels constant)."});
    out->uncertainty_method = "none (no mode)";
    return Status::Ok();
  }

  // 2. Impact: the decay window.
  const bool impact = record.excitation == Excitation::kImpact;
  Eigen::Index decay_begin = 0, decay_end = y.rows();
  double noise_rms = 0.0;
  if (impact) {
    const FreeDecayWindow w = FindFreeDecay(y, fs);
    decay_begin = w.begin;
    decay_end = w.end;
    noise_rms = w.noise_rms_m_s2;
    ImpactDecay d;
    d.blow_time_s = w.blow / fs;
    d.decay_start_s = decay_begin / fs;
    d.decay_end_s = decay_end / fs;
    out->impact = d;
    y = Eigen::MatrixXd(y.middleRows(decay_begin, decay_end - decay_begin));
  }

  // 3. FDD.
  WelchOptions wo;
  wo.segment_samples = o.welch_segment_samples > 0
                           ? std::min<int>(o.welch_segment_samples, static_cast<int>(y.rows()))
                           : DefaultSegmentSamples(y.rows());
  CrossSpectrum csd;
  if (Status s = WelchCsd(y, fs, wo, &csd); !s.ok()) return s;
  const FddResult fdd = RunFdd(csd, lo, hi, 2 * o.max_modes);

  // 4. Decimation to the band.
  double top = hi;
  if (!o.band_hi_hz && !fdd.peaks.empty()) top = std::min(hi, 1.25 * fdd.peaks.back().frequency_hz);
  int q = static_cast<int>(std::floor(kDecimationPassbandShare * nyquist / top));
  q = std::clamp(q, 1, kMaxDecimationFactor);
  Eigen::MatrixXd yd;
  while (q > 1 && y.rows() / q < 2000) --q;  // keep enough samples for the lags
  if (Status s = Decimate(y, q, &yd); !s.ok()) return s;
  const double fs_d = fs / q;

  // 5. SSI-COV.
  SsiOptions so;
  so.min_order = o.min_order;
  so.max_order = o.max_order;
  so.lo_hz = lo;
  so.hi_hz = std::min(hi, kDecimationPassbandShare * 0.5 * fs_d);
  so.lowest_hz =
      o.band_lo_hz.value_or(fdd.peaks.empty() ? so.hi_hz / 20.0 : 0.8 * fdd.peaks.front().frequency_hz);
  so.uncertainty_segments = impact ? 0 : o.uncertainty_segments;
  SsiResult ssi;
  if (Status s = RunSsiCov(yd, fs_d, so, &ssi); !s.ok()) return s;

  // 6. Pairing, selection.
  struct Candidate {
    IdentifiedMode mode;
    int cluster_size;
    bool confirmed;
    bool std_from_segments;
  };
  std::vector<Candidate> cand;
  std::vector<bool> fdd_used(fdd.peaks.size(), false);
  for (const SsiMode& m : ssi.modes) {
    Candidate c;
    c.mode.frequency_hz = m.frequency_hz;
    c.mode.damping_ratio = m.damping_ratio;
    c.mode.frequency_std_hz = m.frequency_std_hz;
    c.mode.damping_std = m.damping_std;
    c.mode.shape.assign(m.shape.data(), m.shape.data() + m.shape.size());
    c.cluster_size = m.cluster_size;
    c.std_from_segments = m.std_from_segments;
    c.confirmed = false;
    double best = kFddSsiPairTol;
    int best_k = -1;
    for (std::size_t k = 0; k < fdd.peaks.size(); ++k) {
      const double d = std::abs(fdd.peaks[k].frequency_hz - m.frequency_hz) / m.frequency_hz;
      if (d < best) {
        best = d;
        best_k = static_cast<int>(k);
      }
    }
    if (best_k >= 0) {
      c.confirmed = true;
      fdd_used[static_cast<std::size_t>(best_k)] = true;
      if (nch > 1) c.mode.mac_fdd_ssi = Mac(fdd.peaks[static_cast<std::size_t>(best_k)].shape, m.shape);
    }
    cand.push_back(std::move(c));
  }
  // FDD cross-check: an SSI-COV mode without an FDD peak near it is most
  // often a noise pole that happened to be stable (with one channel there is
  // no shape to reject it by); it is dropped with a caution.
  for (auto it = cand.begin(); it != cand.end();) {
    if (it->confirmed) {
      ++it;
      continue;
    }
    out->cautions.push_back(
        {"ssi-mode-unconfirmed", "a stable SSI-COV pole cluster at " + Fmt(it->mode.frequency_hz) +
                                     " Hz has no spectral peak in the FDD and is not reported."});
    it = cand.erase(it);
  }
  // Selection by frequency: every confirmed mode is kept from the bottom of
  // the band up, and only the highest ones go when there are more than
  // max_modes (cluster size breaks ties). The low modes carry the force
  // (f_n^2 / n^2 -> N / (4 m L^2) as n -> 0) and fix the numbering of the
  // others; on long ties the fundamental can be 20-30 dB below the
  // strongest mode and a small pole cluster, and ranking by cluster size
  // dropped it first (issue 12, failure class 1).
  std::stable_sort(cand.begin(), cand.end(), [](const Candidate& a, const Candidate& b) {
    if (a.mode.frequency_hz != b.mode.frequency_hz) return a.mode.frequency_hz < b.mode.frequency_hz;
    return a.cluster_size > b.cluster_size;
  });
  if (static_cast<int>(cand.size()) > o.max_modes) cand.resize(static_cast<std::size_t>(o.max_modes));

  // A free decay of a hardening member sweeps its frequency; SSI-COV then
  // splits one mode into close pole clusters. Clusters within
  // kBackboneMergeShare with alike shapes are one mode: the lowest
  // frequency (the small-amplitude limit a linear model describes) is kept
  // and the sweep is cautioned; the backbone describes it.
  if (impact) {
    for (std::size_t k = 0; k + 1 < cand.size();) {
      const IdentifiedMode& a = cand[k].mode;
      const IdentifiedMode& b = cand[k + 1].mode;
      const Eigen::Map<const Eigen::VectorXd> sa(a.shape.data(), static_cast<Eigen::Index>(a.shape.size()));
      const Eigen::Map<const Eigen::VectorXd> sb(b.shape.data(), static_cast<Eigen::Index>(b.shape.size()));
      const bool alike = nch == 1 || Mac(Eigen::VectorXd(sa), Eigen::VectorXd(sb)) > kClusterMinMac;
      if (b.frequency_hz - a.frequency_hz < kBackboneMergeShare * a.frequency_hz && alike) {
        out->cautions.push_back(
            {"amplitude-dependent-frequency",
             "the free decay of the mode near " + Fmt(a.frequency_hz) + " Hz sweeps up to " +
                 Fmt(b.frequency_hz) +
                 " Hz with amplitude: the small-amplitude value is reported; a linear model "
                 "is biased at the large amplitudes (see the backbone)."});
        cand.erase(cand.begin() + static_cast<long>(k) + 1);
      } else {
        ++k;
      }
    }
  }
  bool any_cluster_std = false;
  for (auto& c : cand) {
    // A std of exactly zero (a cluster of identical poles) is not a
    // measurement; floor at a hundredth of the FDD line spacing.
    c.mode.frequency_std_hz = std::max(c.mode.frequency_std_hz, 0.01 * csd.line_spacing_hz);
    if (!c.std_from_segments) any_cluster_std = true;
    out->modes.push_back(c.mode);
  }
  const int seg = ssi.segments;
  if (impact) {
    out->uncertainty_method =
        "scatter over the stable pole cluster (free decay; understates the random error)";
  } else if (seg == 0) {
    out->uncertainty_method =
        "scatter over the stable pole cluster (record too short for segments; understates "
        "the random error)";
    out->cautions.push_back({"weak-uncertainty",
                             "the record is too short to split into segments; the frequency "
                             "standard deviations come from the pole cluster and are likely "
                             "too small."});
  } else if (any_cluster_std) {
    out->uncertainty_method = "scatter over " + std::to_string(seg) +
                              " record segments (std of the mean); scatter over the stable pole cluster for "
                              "modes found in fewer than " +
                              std::to_string(kMinSegmentsForStd) + " segments";
    out->cautions.push_back({"weak-uncertainty",
                             "some modes were not found in enough record segments; their "
                             "standard deviation comes from the pole cluster and is likely "
                             "too small."});
  } else {
    out->uncertainty_method = "scatter over " + std::to_string(seg) + " record segments (std of the mean)";
  }

  // 7. Cautions of the identification.
  for (double f : ssi.narrow_lines_hz) {
    out->cautions.push_back(
        {"narrow-line-rejected", "a line at " + Fmt(f) +
                                     " Hz with near-zero damping was rejected as a mains or "
                                     "machinery harmonic, not a mode of the member."});
  }
  for (std::size_t k = 0; k < fdd.peaks.size(); ++k) {
    if (fdd_used[k]) continue;
    bool narrow = std::any_of(ssi.narrow_lines_hz.begin(), ssi.narrow_lines_hz.end(), [&](double f) {
      return std::abs(f - fdd.peaks[k].frequency_hz) < kFddSsiPairTol * f;
    });
    if (narrow || fdd.peaks[k].prominence < kUnconfirmedPeakProminence) continue;
    out->cautions.push_back(
        {"fdd-peak-unconfirmed", "a strong spectral peak at " + Fmt(fdd.peaks[k].frequency_hz) +
                                     " Hz was not confirmed by SSI-COV and is not reported."});
  }
  if (out->modes.empty()) {
    out->cautions.push_back({"no-mode", "no stable mode was identified in " + Fmt(lo) + ".." + Fmt(hi) +
                                            " Hz; check the sensors, the band and the excitation."});
    return Status::Ok();
  }
  if (out->modes.size() == 1)
    out->cautions.push_back({"single-mode",
                             "only one mode was identified: force and bending stiffness cannot "
                             "be separated from one frequency."});
  const double f1 = out->modes.front().frequency_hz;
  const double decay_duration = y.rows() / fs;
  if (!impact && decay_duration * f1 < kMinLowestModePeriods)
    out->cautions.push_back(
        {"record-too-short", "the record spans " + Fmt(decay_duration * f1, 3) +
                                 " periods of the lowest mode (" + Fmt(f1) + " Hz), fewer than " +
                                 Fmt(kMinLowestModePeriods, 3) +
                                 ": frequency and damping are uncertain; record for at least " +
                                 Fmt(kMinLowestModePeriods / f1, 3) + " s."});
  for (const auto& m : out->modes) {
    if (m.mac_fdd_ssi && *m.mac_fdd_ssi < 0.9)
      out->cautions.push_back({"shape-disagreement", "FDD and SSI-COV shapes of the mode at " +
                                                         Fmt(m.frequency_hz) + " Hz disagree (MAC " +
                                                         Fmt(*m.mac_fdd_ssi, 3) +
                                                         "): close modes or a noisy channel."});
  }

  // 8. Impact: backbone of the dominant mode.
  if (impact) {
    // Dominant: the reported mode nearest the strongest FDD peak.
    const FddPeak* strongest = nullptr;
    for (const auto& p : fdd.peaks)
      if (!strongest || p.s1 > strongest->s1) strongest = &p;
    std::size_t dom = 0;
    if (strongest) {
      double best = std::numeric_limits<double>::infinity();
      for (std::size_t k = 0; k < out->modes.size(); ++k) {
        const double d = std::abs(out->modes[k].frequency_hz - strongest->frequency_hz);
        if (d < best) {
          best = d;
          dom = k;
        }
      }
    }
    const IdentifiedMode& m = out->modes[dom];
    double half = kBackboneBandShare * m.frequency_hz;
    for (std::size_t k = 0; k < out->modes.size(); ++k)
      if (const double dist = std::abs(out->modes[k].frequency_hz - m.frequency_hz);
          k != dom && dist > kBackboneMergeShare * m.frequency_hz)
        half = std::min(half, 0.5 * dist);
    Eigen::Index ch = 0;
    Eigen::VectorXd(
        Eigen::Map<const Eigen::VectorXd>(m.shape.data(), static_cast<Eigen::Index>(m.shape.size())))
        .cwiseAbs()
        .maxCoeff(&ch);
    ImpactDecay& d = *out->impact;
    d.channel = record.channels[static_cast<std::size_t>(ch)];
    d.mode_frequency_hz = m.frequency_hz;
    d.backbone = DecayBackbone(y.col(ch), fs, m.frequency_hz, m.frequency_hz - half, m.frequency_hz + half,
                               kBackboneMinSnr * noise_rms * std::sqrt(4.0 * half / fs));
    for (auto& p : d.backbone) p.time_s += d.decay_start_s;
    if (d.backbone.size() < 3)
      out->cautions.push_back({"short-decay",
                               "the free decay is too short or too noisy for an amplitude-"
                               "dependent frequency (fewer than 3 backbone points)."});
  }
  return Status::Ok();
}

}  // namespace taut::estimation
