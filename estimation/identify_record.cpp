#include "estimation/identify_record.h"

#include <Eigen/Dense>
#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <numbers>
#include <optional>
#include <sstream>

#include "estimation/channel_faults.h"
#include "estimation/conditioning.h"
#include "estimation/pairing.h"
#include "estimation/tolerance_budget.h"
#include "model/modal.h"

namespace taut::estimation {

namespace {

constexpr double kPi = std::numbers::pi;
// Relative step of the central difference d(omega^2)/dN in
// NonlinearFrequencyShift. omega^2 is linear in N without sag (K_T is), so
// the difference is exact up to the eigen-solver's round-off (~1e-13
// relative, modal.cpp) divided by the step: 1e-9 relative at this step.
constexpr double kShiftForceStep = 1e-4;
// Mesh of the amplitude check's modal model (`taut modes`' default): its
// frequency error is far below the precision the check needs (a few %).
constexpr int kCheckElements = 40;
// Progress shares (IdentifyRecordOptions::progress): the modal
// identification and the modal fit take similar times (bench_identify);
// a time-domain fit takes far longer than both.
constexpr double kProgressAfterModes = 0.5;
constexpr double kProgressBeforeTransient = 0.6;

bool Elastic(const model::RotationEnd& e) { return e.kind == model::RotationEnd::Kind::kElastic; }

// The model parameters of an estimate (fixities only for elastic ends: the
// others resolve from the member).
model::ModalParameters ParamsOf(const model::Member& member, const Estimate& e) {
  model::ModalParameters p;
  p.axial_force_n = e.axial_force_n.value;
  p.bending_stiffness_nm2 = e.bending_stiffness_nm2.value;
  if (Elastic(member.left)) p.fixity_left = e.fixity_left.value;
  if (Elastic(member.right)) p.fixity_right = e.fixity_right.value;
  if (!e.axial_support_ratio.fixed) p.axial_support_stiffness_n_per_m = e.axial_support_stiffness_n_per_m;
  return p;
}

// Lowest paired order of an estimate and the index of that mode (-1: none).
int LowestPaired(const Estimate& e) {
  int best = -1;
  for (size_t i = 0; i < e.modes.size(); ++i) {
    const auto& m = e.modes[i];
    if (!m.paired || !m.measured.order) continue;
    if (best < 0 || *m.measured.order < *e.modes[best].measured.order) best = static_cast<int>(i);
  }
  return best;
}

int HighestPairedOrder(const Estimate& e) {
  int k = 0;
  for (const auto& m : e.modes) {
    if (m.paired && m.measured.order) k = std::max(k, *m.measured.order);
  }
  return k;
}

int DistinctPairedOrders(const Estimate& e, int up_to) {
  std::vector<int> orders;
  for (const auto& m : e.modes) {
    if (m.paired && m.measured.order && *m.measured.order <= up_to) orders.push_back(*m.measured.order);
  }
  std::sort(orders.begin(), orders.end());
  return static_cast<int>(std::unique(orders.begin(), orders.end()) - orders.begin());
}

// Record column of every channel of the member's sensors in `plane`, in
// member order (-1: not in the record).
std::vector<int> PlaneColumns(const model::Member& member, model::Direction plane, const Record& record) {
  std::vector<int> cols;
  for (const auto& s : member.sensors) {
    if (s.direction != plane) continue;
    const auto it = std::find(record.channels.begin(), record.channels.end(), s.channel);
    cols.push_back(it == record.channels.end() ? -1 : static_cast<int>(it - record.channels.begin()));
  }
  return cols;
}

// The amplitude check (identify.h AmplitudeCheck) of the modal estimate:
// the lowest paired mode for a stationary record (it has the largest
// displacement per acceleration; its RMS displacement at the sensor where
// its shape is largest is bounded by RMS(a) / omega^2 there, the whole
// acceleration taken as its own, since uncorrelated modes add in mean
// square and omega_k >= omega), or, for an impact record, the mode of the
// decay backbone at its largest amplitude (modal_id.h ImpactDecay).
AmplitudeCheck CheckAmplitude(const model::Member& member, const Eigen::MatrixXd& y, const Record& record,
                              const ModalIdentification& modes, const Estimate& modal) {
  AmplitudeCheck check;
  const model::Direction plane = modal.direction;
  int index = LowestPaired(modal);
  bool peak = false;
  int channel = -1;  // record column
  double amplitude_at_channel = 0.0;
  if (modes.impact && !modes.impact->backbone.empty()) {
    // The paired mode nearest the backbone's frequency, on the backbone's channel.
    double best = std::numeric_limits<double>::infinity();
    for (size_t i = 0; i < modal.modes.size(); ++i) {
      const auto& m = modal.modes[i];
      if (!m.paired) continue;
      const double d = std::abs(m.measured.frequency_hz - modes.impact->mode_frequency_hz);
      if (d < best) {
        best = d;
        index = static_cast<int>(i);
      }
    }
    const auto it = std::find(record.channels.begin(), record.channels.end(), modes.impact->channel);
    if (it != record.channels.end()) {
      channel = static_cast<int>(it - record.channels.begin());
      peak = true;
      amplitude_at_channel = modes.impact->backbone.front().displacement_m;
    }
  }
  if (index < 0) return check;
  const EstimatedMode& mode = modal.modes[index];
  const int order = *mode.measured.order;
  model::ModalResult r;
  if (!model::ComputeModes(member, plane, ParamsOf(member, modal), order, &r, {kCheckElements}).ok()) {
    return check;
  }
  const model::Mode& m = r.modes[order - 1];
  // Shape value at each in-plane record channel.
  const std::vector<int> cols = PlaneColumns(member, plane, record);
  double phi_channel = 0.0;
  if (peak) {
    for (size_t k = 0; k < cols.size(); ++k) {
      if (cols[k] == channel) phi_channel = std::abs(m.shape_at_sensors[k]);
    }
    if (phi_channel == 0.0) peak = false;  // the backbone's channel is not in the plane
  }
  if (!peak) {
    channel = -1;
    for (size_t k = 0; k < cols.size(); ++k) {
      if (cols[k] >= 0 && std::abs(m.shape_at_sensors[k]) > phi_channel) {
        phi_channel = std::abs(m.shape_at_sensors[k]);
        channel = cols[k];
      }
    }
    if (channel < 0) return check;
    const double rms = std::sqrt(y.col(channel).squaredNorm() / std::max<Eigen::Index>(1, y.rows()));
    amplitude_at_channel = rms / m.eigenvalue;
  }
  const double phi_max = m.w_nodes.cwiseAbs().maxCoeff();
  if (!(phi_channel > 0.0) || !(phi_max > 0.0)) return check;
  double shift = 0.0, bias = 0.0;
  if (!NonlinearFrequencyShift(member, plane, ParamsOf(member, modal), order,
                               amplitude_at_channel * phi_max / phi_channel, peak, &shift, &bias)
           .ok()) {
    return check;
  }
  check.order = order;
  check.frequency_hz = mode.measured.frequency_hz;
  check.frequency_std_hz =
      std::max(mode.measured.frequency_std_hz, kMinRelativeFrequencyStd * mode.measured.frequency_hz);
  check.amplitude_m = amplitude_at_channel * phi_max / phi_channel;
  check.frequency_shift_hz = shift;
  check.force_bias_n = bias;
  check.basis = peak ? "free-decay peak" : "ambient RMS (upper bound)";
  check.exceeds_std = shift > check.frequency_std_hz;
  return check;
}

std::string AmplitudeText(const AmplitudeCheck& a) {
  return "the predicted stretching shift of mode " + std::to_string(a.order) +
         " at the record's amplitude (" + a.basis + " " + FormatNumber(1000.0 * a.amplitude_m, 3) +
         " mm) is " + FormatNumber(a.frequency_shift_hz, 3) + " Hz against its frequency std " +
         FormatNumber(a.frequency_std_hz, 3) + " Hz";
}

EstimatedQuantity FromFit(const FitEstimate& f, bool covariance_ok) {
  EstimatedQuantity q;
  q.value = f.value;
  q.std = f.std;
  q.ci95_low = f.lower95;
  q.ci95_high = f.upper95;
  q.identifiable = covariance_ok && std::isfinite(f.std);
  return q;
}

// Model-error floor (issue 12, failure class 7): widens the time-domain
// interval of `q` to at least the modal estimate's relative 95 % half-widths
// around q's value (see TransientPath). Returns whether it widened.
bool FloorAtModalWidth(const EstimatedQuantity& modal, EstimatedQuantity* q) {
  if (modal.value == 0.0 || !std::isfinite(modal.ci95_low) || !std::isfinite(modal.ci95_high)) return false;
  const double scale = std::abs(q->value / modal.value);
  const double lo = q->value - scale * (modal.value - modal.ci95_low);
  const double hi = q->value + scale * (modal.ci95_high - modal.value);
  if (!(lo < q->ci95_low || hi > q->ci95_high)) return false;
  q->ci95_low = std::min(q->ci95_low, lo);
  q->ci95_high = std::max(q->ci95_high, hi);
  q->std = std::max(q->std, (hi - lo) / (2.0 * 1.959963984540054));
  return true;
}

// The time-domain path of the file comment (identify_record.h) on the rows
// [begin, end) of the trend-removed record y. On success fills `out` from
// `modal`; on failure returns the reason (the caller keeps `modal`).
Status TransientPath(const model::Member& member, const Record& record, const Eigen::MatrixXd& y,
                     Eigen::Index begin, Eigen::Index end, const ModalIdentification& modes,
                     const Estimate& modal, const TransientPathOptions& options, Estimate* out) {
  const model::Direction plane = modal.direction;
  const double fs = record.sample_rate_hz;
  // Columns of the in-plane sensors. A sensor missing from the record is
  // moved to the other plane in a copy of the member: its mass stays on the
  // member (beam_fe.h adds sensor masses whatever their direction), its
  // channel leaves the fitted columns.
  model::Member fit_member = member;
  // An estimated axial support enters the transient model as the member's
  // declared spring (FitTransient holds it).
  if (!modal.axial_support_ratio.fixed) {
    if (std::isfinite(modal.axial_support_stiffness_n_per_m) && modal.axial_support_stiffness_n_per_m > 0.0) {
      fit_member.axial.kind = model::AxialEnds::Kind::kSpring;
      fit_member.axial.stiffness_n_per_m = modal.axial_support_stiffness_n_per_m;
    } else {
      fit_member.axial.kind = modal.axial_support_stiffness_n_per_m > 0.0 ? model::AxialEnds::Kind::kFixed
                                                                          : model::AxialEnds::Kind::kFree;
    }
  }
  std::vector<int> cols;
  {
    const std::vector<int> all = PlaneColumns(member, plane, record);
    size_t k = 0;
    for (auto& s : fit_member.sensors) {
      if (s.direction != plane) continue;
      if (all[k] >= 0) {
        cols.push_back(all[k]);
      } else {
        s.direction =
            plane == model::Direction::kVertical ? model::Direction::kLateral : model::Direction::kVertical;
      }
      ++k;
    }
  }
  if (cols.empty()) return Status::InvalidArgument("no record channel in the plane of the estimate");

  // Modes of the fit, filter edges.
  int k = std::min({options.max_modes, kMaxTransientModes, std::max(1, HighestPairedOrder(modal))});
  const model::ModalParameters p0 = ParamsOf(member, modal);
  model::ModalResult lin;
  if (Status s = model::ComputeModes(member, plane, p0, k + 1, &lin, {kCheckElements}); !s.ok()) return s;
  const double margin = std::max(kTransientPassMargin,
                                 modal.amplitude.frequency_hz > 0.0
                                     ? 2.0 * modal.amplitude.frequency_shift_hz / modal.amplitude.frequency_hz
                                     : 0.0);
  double pass_hz = 0.0, stop_hz = 0.0;
  for (; k >= 1; --k) {
    pass_hz = (1.0 + margin) * lin.modes[k - 1].frequency_hz;
    stop_hz = kTransientStopShare * lin.modes[k].frequency_hz;
    if (stop_hz > (1.0 + kTransientPassMargin) * pass_hz) break;
  }
  if (k < 1)
    return Status::InvalidArgument("the modes are too close for the low-pass of the time-domain fit");
  const double nyquist = 0.5 * fs;
  Eigen::VectorXd taps = Eigen::VectorXd::Ones(1);
  int q = 1;
  double pass_used = 0.0;
  if (stop_hz < nyquist) {
    taps = KaiserLowPass(2.0 * kPi * pass_hz / fs, 2.0 * kPi * stop_hz / fs);
    q = std::max(1, static_cast<int>(std::floor(fs / (2.0 * stop_hz))));
    pass_used = pass_hz;
  }
  const Eigen::Index half = (taps.size() - 1) / 2;
  const double f1 = lin.modes[0].frequency_hz;
  const Eigen::Index window_rows =
      static_cast<Eigen::Index>(std::ceil(options.max_window_periods * fs / f1)) + 2 * half + 1;
  const Eigen::Index in_end = std::min(end, begin + window_rows);
  if (in_end - begin < taps.size()) {
    return Status::InvalidArgument("the free decay (" + FormatNumber((end - begin) / fs, 3) +
                                   " s) is shorter than the low-pass of the time-domain fit");
  }
  Eigen::MatrixXd plane_y(in_end - begin, static_cast<Eigen::Index>(cols.size()));
  for (size_t c = 0; c < cols.size(); ++c) plane_y.col(c) = y.col(cols[c]).segment(begin, in_end - begin);
  Eigen::MatrixXd window;
  if (Status s = FilterAndDecimate(plane_y, taps, q, &window); !s.ok()) return s;
  const double fs_fit = fs / q;

  // Start from the modal estimate.
  TransientFitStart start;
  start.axial_force_n = modal.axial_force_n.value;
  start.bending_stiffness_nm2 = modal.bending_stiffness_nm2.value;
  if (Elastic(member.left)) start.fixity_left = modal.fixity_left.value;
  if (Elastic(member.right)) start.fixity_right = modal.fixity_right.value;
  if (const int low = LowestPaired(modal); low >= 0) {
    start.damping_ratio = modal.modes[low].measured.damping_ratio;
  }
  TransientFitOptions fo;
  fo.modes = k;
  fo.target_elements = options.target_elements;
  fo.steps_per_period = options.steps_per_period;
  fo.fit_bending_stiffness = DistinctPairedOrders(modal, k) >= 2;
  TransientFitResult r;
  if (Status s = FitTransient(fit_member, plane, window, fs_fit, start, fo, &r); !s.ok()) return s;

  Estimate e = modal;
  e.fit = FitSummary{};
  e.fit.model = kFitModelTransient;
  e.fit.converged = r.converged;
  // N, ln EI (when fitted), the elastic fixities, the damping ratio, q_k and v_k.
  const int n_unknowns =
      1 + fo.fit_bending_stiffness + Elastic(member.left) + Elastic(member.right) + 1 + 2 * k;
  const int n_res = static_cast<int>(window.size());
  e.fit.degrees_of_freedom = n_res - n_unknowns;
  // The noise variance is estimated from the residual (FitTransient: s^2 =
  // sum r^2 / dof, Seber and Wild 1989, sec. 2.1), so in those units the
  // cost is dof / 2 and the reduced chi-square 1 by construction; the fit's
  // quality is residual_rms against signal_rms (the poor-fit caution).
  e.fit.cost = 0.5 * std::max(0, e.fit.degrees_of_freedom);
  e.fit.reduced_chi2 = e.fit.degrees_of_freedom > 0 ? 1.0 : 0.0;
  e.fit.iterations = r.iterations;
  e.fit.starts = 1;
  e.fit.starts_at_best = 1;
  e.fit.forward_model_calls = modal.fit.forward_model_calls;
  e.fit.profile_model_calls = modal.fit.profile_model_calls;
  e.fit.elements = options.target_elements;
  e.fit.axial_force_interval = "wald";
  const bool cov_ok = std::isfinite(r.axial_force_n.std);
  e.axial_force_n = FromFit(r.axial_force_n, cov_ok);
  // Model-error floor (issue 12, failure class 7): the Wald interval of the
  // time-domain fit counts only white measurement noise in thousands of
  // samples, and was 0.01-0.7 % wide around forces 0.1-1.5 % off on decays
  // from an independent nonlinear simulator. The fit cannot know N better
  // than the frequencies of the modes it reproduces: its interval is at
  // least the modal estimate's relative 95 % half-widths (frequency
  // uncertainty, fixity trade-off, profile) around the time-domain value.
  if (FloorAtModalWidth(modal.axial_force_n, &e.axial_force_n)) e.fit.axial_force_interval = "modal-floor";
  if (fo.fit_bending_stiffness) {
    e.bending_stiffness_nm2 = FromFit(r.bending_stiffness_nm2, cov_ok);
    // The same floor for EI (its Wald interval held the truth of 6 of 20
    // reference decays of the coverage study, 0.2-1.2 % off in +-0.3 %).
    if (FloorAtModalWidth(modal.bending_stiffness_nm2, &e.bending_stiffness_nm2))
      e.fit.bending_stiffness_interval = "modal-floor";
  } else {  // held at the modal estimate, whose interval (prior-dominated) stands
    e.fit.bending_stiffness_interval = modal.fit.bending_stiffness_interval;
  }
  auto fixity = [&](const std::optional<FitEstimate>& f, EstimatedQuantity* q) {
    if (!f) return;  // declared end: the modal estimate's fixed value
    *q = FromFit(*f, cov_ok);
    q->ci95_low = std::clamp(q->ci95_low, 0.0, 1.0);
    q->ci95_high = std::clamp(q->ci95_high, 0.0, 1.0);
  };
  fixity(r.fixity_left, &e.fixity_left);
  fixity(r.fixity_right, &e.fixity_right);

  TransientSummary ts;
  ts.window_start_s = (begin + half) / fs;
  ts.window_end_s = ts.window_start_s + window.rows() / fs_fit;
  ts.sample_rate_hz = fs_fit;
  ts.low_pass_hz = pass_used;
  ts.modes = k;
  ts.model_runs = r.model_runs;
  ts.residual_rms_m_s2 = r.residual_rms_m_s2;
  ts.signal_rms_m_s2 = r.signal_rms_m_s2;
  ts.damping_ratio = r.damping_ratio;
  ts.axial_force_swing_n = r.axial_force_swing_n;
  ts.modal_displacement_m = r.modal_displacement_m;
  ts.modal_axial_force_n = modal.axial_force_n.value;
  e.transient = ts;

  // Measured modes against the model at the new estimate.
  const model::ModalParameters p1 = ParamsOf(member, e);
  int top = 1;
  for (const auto& m : e.modes) {
    if (m.paired && m.measured.order) top = std::max(top, *m.measured.order);
  }
  model::ModalModel final_model(member, plane, {kCheckElements});
  model::ModalResult final_modes;
  if (final_model.Solve(p1, top, &final_modes).ok()) {
    std::vector<int> in_plane;  // index into shape_at_sensors of each estimate channel
    for (const auto& c : e.channels) {
      const auto it = std::find(final_modes.channels.begin(), final_modes.channels.end(), c);
      in_plane.push_back(
          it == final_modes.channels.end() ? -1 : static_cast<int>(it - final_modes.channels.begin()));
    }
    for (auto& m : e.modes) {
      if (!m.paired || !m.measured.order) continue;
      const model::Mode& fm = final_modes.modes[*m.measured.order - 1];
      m.model_frequency_hz = fm.frequency_hz;
      std::vector<double> measured, model_shape;
      for (size_t c = 0; c < e.channels.size(); ++c) {
        const auto it = std::find(e.shape_channels.begin(), e.shape_channels.end(), e.channels[c]);
        if (in_plane[c] < 0 || it == e.shape_channels.end()) continue;
        measured.push_back(m.measured.shape[it - e.shape_channels.begin()]);
        model_shape.push_back(fm.shape_at_sensors[in_plane[c]]);
      }
      m.mac = measured.size() >= 2 ? Mac(measured, model_shape) : 1.0;
    }
  }
  double n_cr = 0.0;
  if (final_model.CriticalCompression(p1, &n_cr).ok()) e.critical_compression_n = n_cr;

  // Cautions: the record's and the modal identification's, what the modal
  // fit found about the modes and channels, the choice, the transient fit's
  // own, the member's.
  e.cautions = modes.cautions;
  for (const auto& c : modal.cautions) {
    if (c.code == "unpaired-mode" || c.code == "other-plane-channels-ignored") e.cautions.push_back(c);
  }
  std::string why = record.excitation == Excitation::kImpact
                        ? "the record is a free decay after a blow (excitation=impact)"
                        : "the record holds a free decay and " + AmplitudeText(modal.amplitude);
  e.cautions.push_back(
      {"time-domain-fit",
       "The force, bending stiffness and fixities come from the nonlinear (von Karman) transient model "
       "fitted to the accelerations of the decay from " +
           FormatNumber(ts.window_start_s, 4) + " s to " + FormatNumber(ts.window_end_s, 4) + " s (" +
           std::to_string(k) + " mode(s), low-passed below " + FormatNumber(stop_hz, 4) + " Hz), because " +
           why + "; the linear modal fit gave " + FormatKn(modal.axial_force_n.value) +
           ". Its intervals assume white measurement noise."});
  for (const auto& c : r.cautions) e.cautions.push_back(c);
  if (cols.size() == 1) {
    e.cautions.push_back({"single-sensor", "Only one sensor in the " + std::string(model::ToString(plane)) +
                                               " plane: mode shapes cannot confirm the mode orders."});
  }
  AppendForceCautions(member, plane, e.axial_force_n.value, e.critical_compression_n, &e.cautions);
  e.identifiability = cov_ok ? "all unknowns of the time-domain fit have a covariance"
                             : "the time-domain fit gives no covariance: the unknowns are not all separated";
  e.verdict = MakeVerdict(e.cautions);
  *out = std::move(e);
  return Status::Ok();
}

// The verdict of the final cautions; a refusal (verdict "unusable") is
// returned as kInvalidArgument whose message is the verdict's summary, with
// the estimate still filled (identify_record.h).
template <typename Progress>
Status Finish(Estimate e, Estimate* out, const Progress& progress) {
  e.verdict = MakeVerdict(e.cautions);
  const bool refused = e.verdict.code == "unusable";
  const std::string summary = e.verdict.summary;
  *out = std::move(e);
  progress(1.0);
  return refused ? Status::InvalidArgument(summary) : Status::Ok();
}

}  // namespace

Status NonlinearFrequencyShift(const model::Member& member, model::Direction direction,
                               const model::ModalParameters& params, int order, double amplitude_m, bool peak,
                               double* shift_hz, double* force_bias_n) {
  if (order < 1) return Status::InvalidArgument("order = " + std::to_string(order) + ": must be >= 1");
  if (!(amplitude_m >= 0.0) || !std::isfinite(amplitude_m)) {
    return Status::InvalidArgument("amplitude = " + FormatNumber(amplitude_m) +
                                   " m: must be finite and >= 0");
  }
  model::ResolvedParameters rp;
  if (Status s = model::ResolveParameters(member, direction, params, &rp); !s.ok()) return s;
  const model::ModalModel mm(member, direction, {kCheckElements});
  model::ModalResult r, plus, minus;
  if (Status s = mm.Solve(params, order, &r); !s.ok()) return s;
  // gamma = d(omega^2)/dN without sag, where K_T is linear in N.
  const double n_scale =
      std::max(std::abs(params.axial_force_n), kPi * kPi * rp.ei_nm2 / (member.length_m * member.length_m));
  const double dn = kShiftForceStep * n_scale;
  model::ModalParameters pp = params, pm = params;
  pp.gravity_m_s2 = pm.gravity_m_s2 = 0.0;
  pp.axial_force_n += dn;
  pm.axial_force_n -= dn;
  if (Status s = mm.Solve(pp, order, &plus); !s.ok()) return s;
  if (Status s = mm.Solve(pm, order, &minus); !s.ok()) return s;
  const double gamma = (plus.modes[order - 1].eigenvalue - minus.modes[order - 1].eigenvalue) / (2.0 * dn);
  const model::Mode& m = r.modes[order - 1];
  const double phi_max = m.w_nodes.cwiseAbs().maxCoeff();
  if (!(phi_max > 0.0) || !(gamma > 0.0)) return Status::Numerical("mode shape or d(omega^2)/dN vanishes");
  const double a_q = amplitude_m / phi_max;
  const double k3 = 0.5 * rp.k_axial_n_per_m * gamma * gamma;
  const double rel = (peak ? 3.0 / 8.0 : 3.0 / 2.0) * k3 * a_q * a_q / m.eigenvalue;
  *shift_hz = rel * m.frequency_hz;
  if (force_bias_n) *force_bias_n = 2.0 * m.eigenvalue * rel / gamma;
  return Status::Ok();
}

Status IdentifyRecord(const model::Member& member, const Record& full_record,
                      const IdentifyRecordOptions& options, Estimate* estimate) {
  // Faulty channels (dead, clipped, dropped out) are left out where the
  // plane keeps a good channel, with a caution (channel_faults.h).
  const Record record = LeaveOutFaultyChannels(member, full_record);
  const auto t0 = std::chrono::steady_clock::now();
  auto progress = [&](double share) {
    if (options.progress) options.progress(share);
  };
  progress(0.0);
  ModalIdentification modes;  // carries the record's quality cautions (modal_id.cpp)
  if (Status s = IdentifyModes(record, options.modal, &modes); !s.ok()) return s;
  progress(kProgressAfterModes);
  Estimate modal;
  if (Status s = IdentifyFromModes(member, modes, options.identify, &modal); !s.ok()) return s;
  if (modal.verdict.code == "unusable") return Finish(std::move(modal), estimate, progress);  // refused
  // Issue 17: the member's tolerances, on the modal model at the modal
  // estimate (tolerance_budget.h), applied to whichever estimate is reported.
  const ToleranceTerms tolerance_terms = ComputeToleranceTerms(member, options.identify, modal);

  // The amplitude check and the choice of the model.
  Eigen::MatrixXd y = record.samples;
  RemoveLinearTrend(&y);
  modal.amplitude = CheckAmplitude(member, y, record, modes, modal);
  const bool impact = record.excitation == Excitation::kImpact;
  const bool large = modal.amplitude.exceeds_std;
  bool want_transient =
      options.path == FitPath::kTransient || (options.path == FitPath::kAuto && (impact || large));
  std::optional<FreeDecayWindow> decay;
  if (want_transient) {
    const FreeDecayWindow w = FindFreeDecay(y, record.sample_rate_hz);
    if (impact || w.decays) decay = w;
  }
  if (options.path == FitPath::kTransient && !decay) {
    return Status::InvalidArgument(
        "the time-domain fit needs a free decay, and the record holds none (its RMS does not fall after "
        "its largest sample)");
  }
  if (!decay) {
    const bool cautioned = std::any_of(modal.cautions.begin(), modal.cautions.end(),
                                       [](const Caution& c) { return c.code == "large-amplitude"; });
    if (large && !cautioned) {
      modal.cautions.push_back(
          {"large-amplitude",
           "The linear modal model was fitted although " + AmplitudeText(modal.amplitude) +
               ": membrane stretching raises the frequencies, so the force may read high by up to " +
               FormatKn(modal.amplitude.force_bias_n) +
               ". The record holds no free decay for the nonlinear time-domain fit; record a free decay "
               "(excitation=impact) or at a smaller amplitude."});
    }
    ApplyToleranceTerms(member, tolerance_terms, &modal);
    modal.fit.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    return Finish(std::move(modal), estimate, progress);
  }
  progress(kProgressBeforeTransient);
  Estimate transient;
  if (Status s = TransientPath(member, record, y, decay->begin, decay->end, modes, modal, options.transient,
                               &transient);
      !s.ok()) {
    modal.cautions.push_back({"time-domain-fit-failed",
                              "The nonlinear time-domain fit of the free decay failed (" + s.message +
                                  "); the linear modal estimate is reported, which reads large-amplitude "
                                  "vibration as extra force."});
    transient = std::move(modal);
  }
  ApplyToleranceTerms(member, tolerance_terms, &transient);
  transient.fit.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  return Finish(std::move(transient), estimate, progress);
}

}  // namespace taut::estimation
