#include "estimation/transient_fit.h"

#include <ceres/ceres.h>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <memory>
#include <numbers>

#include "model/beam_fe.h"
#include "model/modal.h"
#include "model/parameters.h"
#include "model/transient.h"

namespace taut::estimation {
namespace {

using model::Direction;
using model::Member;

constexpr double kPi = std::numbers::pi;

// Positions of the unknowns in the one parameter block (-1 = not fitted).
struct Layout {
  int n = 0;  // N / n_ref
  int ln_ei = -1;
  int r_left = -1;
  int r_right = -1;
  int zeta = -1;
  int q0 = -1;  // q_k / q_ref, k = 0..modes-1
  int v0 = -1;  // v_k / (omega_k q_ref)
  int modes = 0;
  int size = 0;
};

// Everything a model evaluation needs; the scales map the order-one
// unknowns x to physical values.
struct Setup {
  const Member* member = nullptr;
  Direction direction = Direction::kVertical;
  const Eigen::MatrixXd* measured = nullptr;  // rows = samples, cols = channels
  double sample_rate_hz = 0.0;
  int elements = 10;
  int substeps = 1;
  double gravity_m_s2 = 0.0;
  Layout layout;
  double n_ref_n = 1.0;
  double ei_start_nm2 = 1.0;
  double q_ref_m = 1.0;
  std::vector<double> omega_start;  // rad/s, per fitted mode
  std::optional<double> held_fixity_left, held_fixity_right;
  int* runs = nullptr;
};

struct Decoded {
  model::ModalParameters params;
  double zeta = 0.0;
  std::vector<double> q, v;
};

Decoded Decode(const Setup& s, const double* x) {
  const Layout& L = s.layout;
  Decoded d;
  d.params.axial_force_n = x[L.n] * s.n_ref_n;
  d.params.bending_stiffness_nm2 = s.ei_start_nm2 * (L.ln_ei >= 0 ? std::exp(x[L.ln_ei]) : 1.0);
  d.params.fixity_left = L.r_left >= 0 ? std::optional<double>(x[L.r_left]) : s.held_fixity_left;
  d.params.fixity_right = L.r_right >= 0 ? std::optional<double>(x[L.r_right]) : s.held_fixity_right;
  d.params.gravity_m_s2 = s.gravity_m_s2;
  d.zeta = x[L.zeta];
  for (int k = 0; k < L.modes; ++k) {
    d.q.push_back(x[L.q0 + k] * s.q_ref_m);
    d.v.push_back(x[L.v0 + k] * s.omega_start[k] * s.q_ref_m);
  }
  return d;
}

// One transient run of `rows` samples at the parameters x.
Status Simulate(const Setup& s, const double* x, int rows, model::TransientResult* out) {
  const Decoded d = Decode(s, x);
  model::TransientOptions o;
  o.target_elements = s.elements;
  o.output_rate_hz = s.sample_rate_hz;
  o.duration_s = (rows - 1) / s.sample_rate_hz;
  o.substeps = s.substeps;
  o.damping_ratio = d.zeta;
  const model::TransientModel tm(*s.member, s.direction, d.params, o);
  if (!tm.status().ok()) return tm.status();
  model::TransientLoads loads;
  const int n = tm.mesh().FreeDofs();
  loads.initial_displacement = Eigen::VectorXd::Zero(n);
  loads.initial_velocity = Eigen::VectorXd::Zero(n);
  for (int k = 0; k < s.layout.modes; ++k) {
    const Eigen::VectorXd phi = tm.ModeShape(k + 1, 1.0);
    if (phi.size() != n) return Status::Numerical("mode shape " + std::to_string(k + 1) + " unavailable");
    loads.initial_displacement += d.q[k] * phi;
    loads.initial_velocity += d.v[k] * phi;
  }
  if (s.runs) ++*s.runs;
  const Status st = tm.Run(loads, out);
  if (!st.ok()) return st;
  if (out->acceleration_m_s2.rows() < rows)
    return Status::Numerical("transient run returned too few samples");
  return Status::Ok();
}

// The residual functor of one continuation stage (first `rows` samples).
// It remembers its last 2 P + 2 evaluations (P unknowns: one central-
// difference stencil and its centre), keyed by the exact unknowns: the
// covariance (ceres::Covariance evaluates the Jacobian at the solution
// again) then costs no model runs when the solver's last Jacobian was
// taken there.
struct Misfit {
  const Setup* setup;
  int rows;
  struct Memo {
    std::vector<double> key, residuals;
  };
  mutable std::vector<Memo> memo = {};
  mutable size_t memo_next = 0;

  bool operator()(double const* const* parameters, double* residuals) const {
    const int size = setup->layout.size;
    const int ch = static_cast<int>(setup->measured->cols());
    const size_t n_res = static_cast<size_t>(rows) * ch;
    for (const Memo& m : memo) {
      if (std::equal(m.key.begin(), m.key.end(), parameters[0]) && m.residuals.size() == n_res) {
        std::copy(m.residuals.begin(), m.residuals.end(), residuals);
        return true;
      }
    }
    model::TransientResult r;
    if (!Simulate(*setup, parameters[0], rows, &r).ok()) return false;
    const Eigen::MatrixXd& m = *setup->measured;
    for (int i = 0; i < rows; ++i) {
      for (int c = 0; c < ch; ++c) residuals[i * ch + c] = r.acceleration_m_s2(i, c) - m(i, c);
    }
    const size_t capacity = 2 * static_cast<size_t>(size) + 2;
    Memo entry{std::vector<double>(parameters[0], parameters[0] + size),
               std::vector<double>(residuals, residuals + n_res)};
    if (memo.size() < capacity) {
      memo.push_back(std::move(entry));
    } else {
      memo[memo_next] = std::move(entry);
      memo_next = (memo_next + 1) % capacity;
    }
    return true;
  }
};

FitEstimate Estimate(double value, double std, bool at_bound) {
  FitEstimate e;
  e.value = value;
  e.std = std;
  e.lower95 = value - kZ95 * std;
  e.upper95 = value + kZ95 * std;
  e.at_bound = at_bound;
  return e;
}

std::string Fmt(double v, int digits = 4) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g", digits, v);
  return buf;
}

}  // namespace

Status FitTransient(const Member& member, Direction direction, const Eigen::MatrixXd& acceleration_m_s2,
                    double sample_rate_hz, const TransientFitStart& start, const TransientFitOptions& options,
                    TransientFitResult* result) {
  if (result == nullptr) return Status::InvalidArgument("result must not be null");
  *result = TransientFitResult{};
  result->notice = StandingNotice();
  if (Status st = model::ValidateMember(member); !st.ok()) return st;
  if (!(sample_rate_hz > 0.0) || !std::isfinite(sample_rate_hz)) {
    return Status::InvalidArgument("sample rate = " + Fmt(sample_rate_hz) + " Hz: must be finite and > 0");
  }
  if (options.modes < 1 || options.modes > kMaxTransientModes) {
    return Status::InvalidArgument("modes = " + std::to_string(options.modes) + ": must be in [1, " +
                                   std::to_string(kMaxTransientModes) + "]");
  }
  if (options.target_elements < 1) return Status::InvalidArgument("target_elements must be >= 1");
  if (options.steps_per_period < 10) {
    return Status::InvalidArgument("steps_per_period = " + std::to_string(options.steps_per_period) +
                                   ": must be >= 10");
  }
  if (options.max_iterations < 1) return Status::InvalidArgument("max_iterations must be >= 1");
  if (!std::isfinite(start.axial_force_n)) return Status::InvalidArgument("start axial force is not finite");
  std::vector<double> sensor_x;
  for (const auto& s : member.sensors) {
    if (s.direction == direction) sensor_x.push_back(s.position_m);
  }
  const int ch = static_cast<int>(sensor_x.size());
  if (ch == 0) {
    return Status::InvalidArgument(std::string("member has no sensor in the ") + model::ToString(direction) +
                                   " plane");
  }
  if (acceleration_m_s2.cols() != ch) {
    return Status::InvalidArgument("acceleration has " + std::to_string(acceleration_m_s2.cols()) +
                                   " columns: must be " + std::to_string(ch) +
                                   " (the member's sensors in the " + model::ToString(direction) + " plane)");
  }
  if (!acceleration_m_s2.allFinite()) return Status::InvalidArgument("acceleration holds a non-finite value");
  const int rows = static_cast<int>(acceleration_m_s2.rows());

  // Layout of the unknowns.
  const bool elastic_left = member.left.kind == model::RotationEnd::Kind::kElastic;
  const bool elastic_right = member.right.kind == model::RotationEnd::Kind::kElastic;
  Layout L;
  int next = 0;
  L.n = next++;
  if (options.fit_bending_stiffness) L.ln_ei = next++;
  if (elastic_left) L.r_left = next++;
  if (elastic_right) L.r_right = next++;
  L.zeta = next++;
  L.modes = options.modes;
  L.q0 = next;
  next += options.modes;
  L.v0 = next;
  next += options.modes;
  L.size = next;
  if (rows < 4 * L.size) {
    return Status::InvalidArgument("window has " + std::to_string(rows) + " samples: at least " +
                                   std::to_string(4 * L.size) + " (4 per unknown) are needed");
  }

  Setup s;
  s.member = &member;
  s.direction = direction;
  s.measured = &acceleration_m_s2;
  s.sample_rate_hz = sample_rate_hz;
  s.elements = options.target_elements;
  s.gravity_m_s2 = options.gravity_m_s2;
  s.layout = L;
  s.runs = &result->model_runs;
  s.ei_start_nm2 = start.bending_stiffness_nm2.value_or(member.NominalBendingStiffness_nm2(direction));
  if (!(s.ei_start_nm2 > 0.0) || !std::isfinite(s.ei_start_nm2)) {
    return Status::InvalidArgument("start bending stiffness = " + Fmt(s.ei_start_nm2) +
                                   " N m^2: must be > 0");
  }
  auto clamp_fixity = [](double r) { return std::clamp(r, kFixityMargin, 1.0 - kFixityMargin); };
  const double r_left0 = clamp_fixity(start.fixity_left.value_or(model::kDefaultElasticFixity));
  const double r_right0 = clamp_fixity(start.fixity_right.value_or(model::kDefaultElasticFixity));
  const double len = member.length_m;
  s.n_ref_n = std::abs(start.axial_force_n) + kPi * kPi * s.ei_start_nm2 / (len * len);

  // Linear modes at the start parameters: frequencies for the scales, the
  // projection and the step size.
  model::ModalParameters p0;
  p0.axial_force_n = start.axial_force_n;
  p0.bending_stiffness_nm2 = s.ei_start_nm2;
  if (elastic_left) p0.fixity_left = r_left0;
  if (elastic_right) p0.fixity_right = r_right0;
  p0.gravity_m_s2 = options.gravity_m_s2;
  model::ModalOptions mo;
  mo.target_elements = options.target_elements;
  model::ModalResult modal;
  if (Status st = model::ComputeModes(member, direction, p0, options.modes, &modal, mo); !st.ok()) {
    return Status{st.code, "transient fit start: " + st.message};
  }
  if (static_cast<int>(modal.modes.size()) < options.modes) {
    return Status::Numerical("transient fit start: fewer linear modes than requested");
  }
  for (int k = 0; k < options.modes; ++k) s.omega_start.push_back(2.0 * kPi * modal.modes[k].frequency_hz);
  const double f1 = modal.modes[0].frequency_hz;
  // Amplitude raises frequencies: a margin of 1.5 on the highest one.
  const double f_high = 1.5 * modal.modes[options.modes - 1].frequency_hz;
  s.substeps = std::max(1, static_cast<int>(std::ceil(options.steps_per_period * f_high / sample_rate_hz)));

  // Initial modal amplitudes: linear projection of the first samples.
  std::vector<double> x(L.size, 0.0);
  x[L.n] = start.axial_force_n / s.n_ref_n;
  if (L.ln_ei >= 0) x[L.ln_ei] = 0.0;
  if (L.r_left >= 0) x[L.r_left] = r_left0;
  if (L.r_right >= 0) x[L.r_right] = r_right0;
  x[L.zeta] = std::clamp(start.damping_ratio, kMinDampingRatio, kMaxDampingRatio);
  {
    model::TransientOptions o;
    o.target_elements = options.target_elements;
    o.output_rate_hz = sample_rate_hz;
    o.duration_s = 1.0 / sample_rate_hz;
    const model::TransientModel tm(member, direction, p0, o);
    if (!tm.status().ok()) return Status{tm.status().code, "transient fit start: " + tm.status().message};
    Eigen::MatrixXd phi(ch, options.modes);
    for (int k = 0; k < options.modes; ++k) {
      const Eigen::VectorXd shape = tm.ModeShape(k + 1, 1.0);
      if (shape.size() != tm.mesh().FreeDofs())
        return Status::Numerical("transient fit start: no mode shape");
      for (int c = 0; c < ch; ++c) phi(c, k) = model::InterpolateW(tm.mesh(), shape, sensor_x[c]);
    }
    const int n_proj = std::min(
        rows,
        std::max(4 * L.size, static_cast<int>(std::ceil(kProjectionPeriods * sample_rate_hz / f1)) + 1));
    Eigen::MatrixXd D(n_proj * ch, 2 * options.modes);
    Eigen::VectorXd b(n_proj * ch);
    for (int i = 0; i < n_proj; ++i) {
      const double t = i / sample_rate_hz;
      for (int c = 0; c < ch; ++c) {
        for (int k = 0; k < options.modes; ++k) {
          const double w = s.omega_start[k];
          D(i * ch + c, 2 * k) = -phi(c, k) * w * w * std::cos(w * t);
          D(i * ch + c, 2 * k + 1) = -phi(c, k) * w * std::sin(w * t);
        }
        b[i * ch + c] = acceleration_m_s2(i, c);
      }
    }
    const Eigen::VectorXd qv = D.colPivHouseholderQr().solve(b);
    double q_ref = 0.0;
    for (int k = 0; k < options.modes; ++k) {
      q_ref = std::max({q_ref, std::abs(qv[2 * k]), std::abs(qv[2 * k + 1]) / s.omega_start[k]});
    }
    s.q_ref_m = q_ref > 0.0 && std::isfinite(q_ref) ? q_ref : 1e-3;
    for (int k = 0; k < options.modes; ++k) {
      x[L.q0 + k] = std::isfinite(qv[2 * k]) ? qv[2 * k] / s.q_ref_m : 0.0;
      x[L.v0 + k] = std::isfinite(qv[2 * k + 1]) ? qv[2 * k + 1] / (s.omega_start[k] * s.q_ref_m) : 0.0;
    }
  }

  // Continuation stages over growing windows.
  std::vector<int> stages;
  if (options.continuation) {
    int n = std::max(4 * L.size, static_cast<int>(std::ceil(kContinuationPeriods * sample_rate_hz / f1)) + 1);
    while (n < rows) {
      stages.push_back(n);
      n *= kContinuationGrowth;
    }
  }
  stages.push_back(rows);

  std::unique_ptr<ceres::Problem> problem;
  ceres::Solver::Summary summary;
  for (size_t stage = 0; stage < stages.size(); ++stage) {
    const int stage_rows = stages[stage];
    const bool last = stage + 1 == stages.size();
    auto* cost =
        new ceres::DynamicNumericDiffCostFunction<Misfit, ceres::CENTRAL>(new Misfit{&s, stage_rows});
    cost->AddParameterBlock(L.size);
    cost->SetNumResiduals(stage_rows * ch);
    problem = std::make_unique<ceres::Problem>();
    problem->AddResidualBlock(cost, nullptr, x.data());
    if (L.ln_ei >= 0) {
      problem->SetParameterLowerBound(x.data(), L.ln_ei, -std::log(kEiBoundFactor));
      problem->SetParameterUpperBound(x.data(), L.ln_ei, std::log(kEiBoundFactor));
    }
    for (int idx : {L.r_left, L.r_right}) {
      if (idx < 0) continue;
      problem->SetParameterLowerBound(x.data(), idx, kFixityMargin);
      problem->SetParameterUpperBound(x.data(), idx, 1.0 - kFixityMargin);
    }
    problem->SetParameterLowerBound(x.data(), L.zeta, kMinDampingRatio);
    problem->SetParameterUpperBound(x.data(), L.zeta, kMaxDampingRatio);
    ceres::Solver::Options so;
    so.minimizer_type = ceres::TRUST_REGION;
    so.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
    so.linear_solver_type = ceres::DENSE_QR;
    so.max_num_iterations = options.max_iterations;
    // Ceres projects each step onto the bounds and runs an Armijo line
    // search; with its default cubic interpolation every trial point costs
    // a full numeric Jacobian (2 P model runs), which the next iteration
    // then computes again (callgrind: 38 % of a fit). Quadratic
    // interpolation needs only the cost at the trial points.
    so.line_search_interpolation_type = ceres::QUADRATIC;
    // Intermediate stages only need to bring the phase within reach of the
    // next, longer window.
    if (!last) so.function_tolerance = kStageFunctionTolerance;
    so.logging_type = ceres::SILENT;
    so.minimizer_progress_to_stdout = false;
    so.num_threads = 1;
    ceres::Solve(so, problem.get(), &summary);
    result->iterations += static_cast<int>(summary.iterations.size());
    if (!summary.IsSolutionUsable()) {
      return Status::Numerical("transient fit: the solver failed over the first " +
                               std::to_string(stage_rows) + " samples: " + summary.message);
    }
  }
  result->converged = summary.termination_type == ceres::CONVERGENCE;

  // Covariance of the scaled unknowns, scaled by the reduced chi-square.
  const int n_res = rows * ch;
  const double chi2 = 2.0 * summary.final_cost / std::max(1, n_res - L.size);
  result->reduced_chi_square = chi2;
  Eigen::MatrixXd cov = Eigen::MatrixXd::Constant(L.size, L.size, std::numeric_limits<double>::quiet_NaN());
  {
    ceres::Covariance::Options co;
    co.algorithm_type = ceres::DENSE_SVD;
    co.num_threads = 1;
    ceres::Covariance covariance(co);
    std::vector<std::pair<const double*, const double*>> blocks = {{x.data(), x.data()}};
    if (covariance.Compute(blocks, problem.get())) {
      Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> c(L.size, L.size);
      if (covariance.GetCovarianceBlock(x.data(), x.data(), c.data())) cov = c * chi2;
    }
  }
  const bool cov_ok = cov.allFinite();
  auto sd = [&](int i) { return std::sqrt(std::max(0.0, cov(i, i))); };
  auto at_bound = [&](int i, double lo, double hi) {
    const double tol = 1e-6 * std::max(1.0, hi - lo);
    return x[i] <= lo + tol || x[i] >= hi - tol;
  };

  const Decoded d = Decode(s, x.data());
  result->axial_force_n = Estimate(d.params.axial_force_n, s.n_ref_n * sd(L.n), false);
  const double ei = *d.params.bending_stiffness_nm2;
  if (L.ln_ei >= 0) {
    const double sl = sd(L.ln_ei);
    result->bending_stiffness_nm2 =
        Estimate(ei, ei * sl, at_bound(L.ln_ei, -std::log(kEiBoundFactor), std::log(kEiBoundFactor)));
    result->bending_stiffness_nm2.lower95 = ei * std::exp(-kZ95 * sl);
    result->bending_stiffness_nm2.upper95 = ei * std::exp(kZ95 * sl);
  } else {
    result->bending_stiffness_nm2 = Estimate(ei, 0.0, false);
  }
  if (L.r_left >= 0) {
    result->fixity_left =
        Estimate(x[L.r_left], sd(L.r_left), at_bound(L.r_left, kFixityMargin, 1 - kFixityMargin));
  }
  if (L.r_right >= 0) {
    result->fixity_right =
        Estimate(x[L.r_right], sd(L.r_right), at_bound(L.r_right, kFixityMargin, 1 - kFixityMargin));
  }
  result->damping_ratio = d.zeta;
  result->modal_displacement_m = d.q;
  result->modal_velocity_m_s = d.v;

  // The fitted run: residual, amplitude and axial force swing.
  model::TransientResult fitted;
  if (Status st = Simulate(s, x.data(), rows, &fitted); !st.ok()) {
    return Status{st.code, "transient fit: the fitted model cannot be run: " + st.message};
  }
  const Eigen::MatrixXd res = fitted.acceleration_m_s2.topRows(rows) - acceleration_m_s2;
  result->residual_rms_m_s2 = std::sqrt(res.squaredNorm() / n_res);
  result->signal_rms_m_s2 = std::sqrt(acceleration_m_s2.squaredNorm() / n_res);
  const Eigen::VectorXd nf = fitted.axial_force_n.head(rows);
  result->axial_force_swing_n = nf.maxCoeff() - nf.minCoeff();
  const double r_g = std::sqrt(member.section.SecondMoment(direction) / member.section.Area());
  result->peak_amplitude_ratio = fitted.displacement_m.topRows(rows).cwiseAbs().maxCoeff() / r_g;

  // Cautions.
  Cautions& cz = result->cautions;
  const double n_lin = std::abs(d.params.axial_force_n) + kPi * kPi * ei / (len * len);
  if (result->axial_force_swing_n > kLargeAmplitudeForceShare * n_lin) {
    cz.push_back(
        {"large-amplitude", "the fitted free decay stretches the member: the axial force swings by " +
                                Fmt(result->axial_force_swing_n) + " N (peak amplitude " +
                                Fmt(result->peak_amplitude_ratio, 3) +
                                " radii of gyration), so frequencies rise with amplitude and the "
                                "nonlinear transient model was fitted instead of the linear one."});
  }
  if (!result->converged) {
    cz.push_back({"fit-not-converged", "the transient fit stopped before convergence (" + summary.message +
                                           "); treat the estimates as approximate."});
  }
  if (result->residual_rms_m_s2 > kPoorFitRmsShare * result->signal_rms_m_s2) {
    cz.push_back({"poor-fit", "the fitted transient leaves a residual of " +
                                  Fmt(100.0 * result->residual_rms_m_s2 / result->signal_rms_m_s2, 3) +
                                  " % of the signal RMS; the model may miss modes or the window may not be a "
                                  "free decay, and the intervals are optimistic."});
  }
  if (!cov_ok) {
    cz.push_back({"covariance-unavailable",
                  "the covariance of the transient fit could not be computed (the unknowns are not all "
                  "separable from this record); no intervals are given."});
  } else if (L.ln_ei >= 0) {
    const double rho = cov(L.n, L.ln_ei) / std::sqrt(cov(L.n, L.n) * cov(L.ln_ei, L.ln_ei));
    if (std::abs(rho) > 0.99) {
      cz.push_back({"force-stiffness-correlated",
                    "axial force and bending stiffness are hard to tell apart in this record (correlation " +
                        Fmt(rho, 3) + "); a record with more modes, or a known EI, narrows the force."});
    }
  }
  if (result->bending_stiffness_nm2.at_bound || (result->fixity_left && result->fixity_left->at_bound) ||
      (result->fixity_right && result->fixity_right->at_bound)) {
    cz.push_back({"parameter-at-bound",
                  "a fitted bending stiffness or fixity sits on its bound; its interval "
                  "is not meaningful."});
  }
  if (cov_ok &&
      2.0 * kZ95 * result->axial_force_n.std > kWideIntervalShare * std::abs(result->axial_force_n.value)) {
    cz.push_back({"wide-interval", "the 95 % interval of the axial force, [" +
                                       Fmt(result->axial_force_n.lower95) + ", " +
                                       Fmt(result->axial_force_n.upper95) + "] N, is wider than " +
                                       Fmt(100.0 * kWideIntervalShare, 3) + " % of the estimate."});
  }
  if (!options.fit_bending_stiffness) {
    cz.push_back({"bending-stiffness-held", "the bending stiffness was held at " + Fmt(ei) +
                                                " N m^2 and not fitted; the force interval does not include "
                                                "its uncertainty."});
  }
  return Status::Ok();
}

Status FitTransient(const Member& member, Direction direction, const Record& record, double window_start_s,
                    double window_duration_s, const TransientFitStart& start,
                    const TransientFitOptions& options, TransientFitResult* result) {
  if (result == nullptr) return Status::InvalidArgument("result must not be null");
  if (!(record.sample_rate_hz > 0.0)) return Status::InvalidArgument("record has no sample rate");
  std::vector<int> cols;
  for (const auto& s : member.sensors) {
    if (s.direction != direction) continue;
    const auto it = std::find(record.channels.begin(), record.channels.end(), s.channel);
    if (it == record.channels.end()) {
      return Status::InvalidArgument("sensor channel \"" + s.channel + "\" is not in the record");
    }
    cols.push_back(static_cast<int>(it - record.channels.begin()));
  }
  if (!(window_start_s >= 0.0) || !(window_duration_s >= 0.0)) {
    return Status::InvalidArgument("window start and duration must be >= 0 s");
  }
  const Eigen::Index first = static_cast<Eigen::Index>(std::llround(window_start_s * record.sample_rate_hz));
  Eigen::Index count = record.samples.rows() - first;
  if (window_duration_s > 0.0) {
    count = std::min<Eigen::Index>(count, std::llround(window_duration_s * record.sample_rate_hz));
  }
  if (first >= record.samples.rows() || count <= 0) {
    return Status::InvalidArgument("window start " + Fmt(window_start_s) + " s is beyond the record (" +
                                   Fmt(record.duration_s()) + " s)");
  }
  Eigen::MatrixXd a(count, static_cast<Eigen::Index>(cols.size()));
  for (size_t c = 0; c < cols.size(); ++c) a.col(c) = record.samples.col(cols[c]).segment(first, count);
  const Status st = FitTransient(member, direction, a, record.sample_rate_hz, start, options, result);
  result->cautions.insert(result->cautions.begin(), record.cautions.begin(), record.cautions.end());
  return st;
}

}  // namespace taut::estimation
