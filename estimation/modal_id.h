// Modal identification of one record: conditioning -> Welch CSD -> FDD
// (seeds, cross-check) -> decimation to the band -> SSI-COV (accurate
// frequencies, damping, shapes, uncertainty) -> ModalIdentification.
//
// The chain, and why:
//  1. Mean and linear trend are removed from every channel (conditioning.h).
//  2. Impact records: the blow is the sample of largest |a| over all
//     channels; identification uses the decay from kImpactGuard_s after it
//     until the 1-s RMS falls to kDecayNoiseRatio times the record's final
//     noise level. The backbone (instantaneous frequency of the dominant
//     mode against amplitude) comes from the band-passed analytic signal
//     (spectral.h AnalyticSignal), averaged over windows of
//     kBackboneWindowCycles periods.
//  3. FDD (fdd.h) over [band_lo, band_hi] gives the peaks; they set the top
//     of the band (when band_hi is not given) and the lowest frequency of
//     interest that sizes the SSI lags.
//  4. The record is decimated (Kaiser anti-alias filter) so that the new
//     Nyquist frequency is about the band top / kDecimationPassbandShare:
//     fewer samples, and lags that span the low modes.
//  5. SSI-COV (ssi_cov.h), orders 2..40; its modes are reported, paired
//     with FDD peaks within kFddSsiPairTol for mac_fdd_ssi. Near-zero-
//     damping lines (mains, machinery) are rejected with a caution.
// Frequencies are undamped natural frequencies |lambda| / 2 pi.
#pragma once

#include <optional>

#include "estimation/modes.h"
#include "estimation/record.h"
#include "model/status.h"

namespace taut::estimation {

inline constexpr double kImpactGuard_s = 0.05;
inline constexpr double kDecayNoiseRatio = 3.0;
inline constexpr double kBackboneWindowCycles = 5.0;
// Windows within this many periods of the decay's ends are dropped (the
// band-pass filter's transients).
inline constexpr double kBackboneEdgeCycles = 5.0;
// Half-width of the backbone band-pass, as a share of the mode frequency
// (narrowed to half the distance to a neighbouring mode).
inline constexpr double kBackboneBandShare = 0.15;
// The backbone stops where the mode's envelope falls below this multiple of
// the in-band noise, taken as white at the record's final 1-s RMS:
// noise_rms sqrt(2 B / fs), B the band width. At 30 (about 30 dB) the
// phase noise over a 5-period window moves the window frequency by less
// than 0.2 % of a mode near 10 Hz.
inline constexpr double kBackboneMinSnr = 30.0;
// Modes closer than this share of the dominant frequency are taken as the
// same mode split by its amplitude-dependent frequency (a hardening decay
// sweeps a few per cent) and do not narrow the band.
inline constexpr double kBackboneMergeShare = 0.05;
// An FDD peak and an SSI mode are the same mode within this relative
// frequency distance.
inline constexpr double kFddSsiPairTol = 0.03;
// An FDD peak that SSI-COV does not confirm is cautioned when its
// prominence exceeds this ratio (20 dB): a strong peak should not vanish
// silently; weaker ones are common noise.
inline constexpr double kUnconfirmedPeakProminence = 100.0;
// Default top of the band when none is given: this share of the Nyquist
// frequency (above it the decimation filter's transition band starts).
inline constexpr double kDefaultBandTopShare = 0.8;
// A record shorter than this many periods of its lowest mode resolves the
// mode's damping and frequency poorly. Ambient-testing practice recommends
// 1000 to 2000 periods of the fundamental (recalled from memory, e.g.
// Cantieni's guidance); taut cautions below 500.
inline constexpr double kMinLowestModePeriods = 500.0;

struct ModalIdOptions {
  std::optional<double> band_lo_hz;  // default 0
  std::optional<double> band_hi_hz;  // default kDefaultBandTopShare x Nyquist
  // At most this many modes reported, 1..32: the lowest ones (selection by
  // frequency). 16 covers the 10-14 bending modes in band of a long
  // low-tension tie with room for other-plane modes.
  int max_modes = 16;
  int welch_segment_samples = 0;  // 0 = DefaultSegmentSamples
  int min_order = 2;              // SSI-COV orders
  int max_order = 40;
  int uncertainty_segments = 6;  // SSI-COV segment scatter (ambient records)
};

// Fills `out` (channels, modes ascending with max |shape| = +1, the
// uncertainty method, rate, duration, the record's cautions plus those of
// the identification, and for impact records `impact`). A record without an
// identifiable mode is a result (empty modes, caution "no-mode"), not an
// error. Errors (kInvalidArgument): empty record, band outside
// [0, Nyquist] or lo >= hi, max_modes outside 1..32, record too short for
// the SSI lags.
Status IdentifyModes(const Record& record, const ModalIdOptions& options, ModalIdentification* out);

// The free-decay window of a record after its largest sample (step 2 of the
// file comment): y holds trend-removed samples (rows = samples, cols =
// channels, m/s^2) at fs Hz.
struct FreeDecayWindow {
  Eigen::Index blow = 0;        // row of the largest |a| over all channels
  Eigen::Index begin = 0;       // blow + kImpactGuard_s
  Eigen::Index end = 0;         // one past the last row of the window
  double noise_rms_m_s2 = 0.0;  // RMS of the last whole second of the record (all channels)
  // The first second after `begin` has an RMS above kDecayNoiseRatio times
  // the last second's: the record holds a decay, not a stationary response.
  bool decays = false;
};
// At least 10 s long when the record allows (a short decay still gives
// SSI-COV enough lags), extended while the 1-s RMS stays above
// kDecayNoiseRatio x noise_rms_m_s2.
FreeDecayWindow FindFreeDecay(const Eigen::MatrixXd& y, double sample_rate_hz);

// The backbone of a free decay x (one channel, trend removed) around a mode
// in [lo_hz, hi_hz]: windows of kBackboneWindowCycles periods of f_hz,
// edges dropped, stopping where the envelope falls below noise_floor_m_s2
// (0 = no floor). time_s counts from the first sample of x.
std::vector<BackbonePoint> DecayBackbone(const Eigen::VectorXd& x, double sample_rate_hz, double f_hz,
                                         double lo_hz, double hi_hz, double noise_floor_m_s2);

}  // namespace taut::estimation
