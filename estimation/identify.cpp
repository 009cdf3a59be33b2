// Model updating, one identification (identify.h): channels and plane,
// the order search's start, pairing, mesh, the starts and the re-pairing
// rounds, then the uncertainty and the cautions of the fit. The units:
// identify_problem.h (unknowns, residuals, bounds, one fit),
// identify_hypotheses.h (starts, relaxed prior, rival numberings),
// identify_uncertainty.h (covariance, identifiability, profiles),
// identify_cautions.h (the fit's cautions).
#include "estimation/identify.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <memory>
#include <numbers>
#include <string>

#include "estimation/identify_cautions.h"
#include "estimation/identify_hypotheses.h"
#include "estimation/identify_problem.h"
#include "estimation/identify_uncertainty.h"
#include "estimation/other_plane.h"
#include "estimation/refusal.h"
#include "model/modal.h"

namespace taut::estimation {

namespace fit {

namespace {

// Posterior std of ln EI above this share of the prior std: EI comes mainly
// from the prior.
constexpr double kPriorDominatedShare = 0.8;
// Mesh refinements allowed when the mesh error check fails.
constexpr int kMaxMeshRefinements = 3;
// Re-pairing rounds after a fit (the pairing is redone at the estimate).
constexpr int kMaxPairingRounds = 2;
// Model modes beyond the highest expected order that pairing considers.
constexpr int kPairingExtraModes = 2;
// Fixity of the first start (the middle of [0, 1]).
constexpr double kMidFixity = 0.5;

}  // namespace

// One identification (identify_hypotheses.h): IdentifyFromModes adds the
// prior conflict check, the rival numbering, the refusals and the verdict.
Status IdentifyWithPrior(const model::Member& member, const ModalIdentification& ident,
                         const IdentifyOptions& options, Estimate* estimate,
                         const std::vector<int>* forced_orders, OrderHypothesis* search) {
  const auto t0 = std::chrono::steady_clock::now();
  if (Status s = model::ValidateMember(member); !s.ok()) return s;
  if (!(options.shape_std > 0.0 && options.ei_prior_sigma_ln > 0.0 && options.min_elements >= 1 &&
        options.elements_per_order >= 1 && options.max_iterations >= 1)) {
    return Status::InvalidArgument(
        "identify options: shape_std, ei_prior_sigma_ln, min_elements, elements_per_order and "
        "max_iterations must be > 0");
  }
  if (ident.channels.empty()) return Status::InvalidArgument("the identified modes name no channels");
  if (ident.modes.empty()) {
    return Status::InvalidArgument(
        "no mode was identified in the record: nothing to fit the member model to");
  }

  // --- Channels -> sensors, plane ------------------------------------------
  std::vector<int> sensor_of_channel;
  for (const std::string& c : ident.channels) {
    int found = -1;
    for (size_t s = 0; s < member.sensors.size(); ++s) {
      if (member.sensors[s].channel == c) found = static_cast<int>(s);
    }
    if (found < 0) {
      std::string names;
      for (const auto& s : member.sensors) names += (names.empty() ? "" : ", ") + s.channel;
      return Status::InvalidArgument("record channel '" + c + "' is not a sensor of member '" + member.id +
                                     "' (its sensors: " + (names.empty() ? "none" : names) + ")");
    }
    sensor_of_channel.push_back(found);
  }
  int vertical = 0, lateral = 0;
  for (int s : sensor_of_channel)
    (member.sensors[s].direction == model::Direction::kVertical ? vertical : lateral)++;
  const model::Direction plane =
      lateral > vertical ? model::Direction::kLateral : model::Direction::kVertical;

  // Modes, validated and sorted by frequency.
  std::vector<IdentifiedMode> measured = ident.modes;
  for (size_t i = 0; i < measured.size(); ++i) {
    const IdentifiedMode& m = measured[i];
    const std::string where = "mode " + std::to_string(i + 1);
    if (!(std::isfinite(m.frequency_hz) && m.frequency_hz > 0.0)) {
      return Status::InvalidArgument(where + ": frequency_hz = " + FormatNumber(m.frequency_hz) +
                                     ": must be finite and > 0");
    }
    if (!(std::isfinite(m.frequency_std_hz) && m.frequency_std_hz > 0.0)) {
      return Status::InvalidArgument(where + ": frequency_std_hz = " + FormatNumber(m.frequency_std_hz) +
                                     ": must be finite and > 0");
    }
    if (m.shape.size() != ident.channels.size()) {
      return Status::InvalidArgument(where + ": shape has " + std::to_string(m.shape.size()) +
                                     " entries for " + std::to_string(ident.channels.size()) + " channels");
    }
    for (double v : m.shape) {
      if (!std::isfinite(v)) return Status::InvalidArgument(where + ": shape entry is not finite");
    }
  }
  std::stable_sort(measured.begin(), measured.end(), [](const IdentifiedMode& a, const IdentifiedMode& b) {
    return a.frequency_hz < b.frequency_hz;
  });

  Estimate est;
  est.direction = plane;
  est.notice = StandingNotice();
  est.cautions = ident.cautions;
  // Large amplitude: the free-decay backbone of an impact record shows the
  // frequency moving with amplitude (membrane stretching hardens the member,
  // docs/DESIGN.md; Nayfeh and Mook 1979), so the linear tangent model, fitted to
  // the identified frequencies, is biased towards the larger amplitudes.
  if (ident.impact && ident.impact->backbone.size() >= 2) {
    double f_min = std::numeric_limits<double>::infinity(), f_max = 0.0;
    for (const auto& p : ident.impact->backbone) {
      f_min = std::min(f_min, p.frequency_hz);
      f_max = std::max(f_max, p.frequency_hz);
    }
    if (f_min > 0.0 && (f_max - f_min) / f_min > kLargeAmplitudeFrequencyShift) {
      est.cautions.push_back(
          {"large-amplitude",
           "The dominant frequency moves by " + FormatNumber(100.0 * (f_max - f_min) / f_min, 2) +
               " % over the free decay: the member vibrated at amplitudes where stretching "
               "stiffens it, and the linear model's force is biased high."});
    }
  }
  est.shape_channels = ident.channels;

  // In-plane channels: their record index and their index in the model's
  // shape vector (ModalResult::channels lists the plane's sensors in member order).
  std::vector<int> record_index, model_index;
  std::vector<double> sensor_x;
  {
    int k_model = 0;
    for (size_t s = 0; s < member.sensors.size(); ++s) {
      if (member.sensors[s].direction != plane) continue;
      for (size_t c = 0; c < sensor_of_channel.size(); ++c) {
        if (sensor_of_channel[c] == static_cast<int>(s)) {
          record_index.push_back(static_cast<int>(c));
          model_index.push_back(k_model);
          sensor_x.push_back(member.sensors[s].position_m);
          est.channels.push_back(ident.channels[c]);
        }
      }
      ++k_model;
    }
  }
  if (static_cast<int>(record_index.size()) < static_cast<int>(ident.channels.size())) {
    est.cautions.push_back({"other-plane-channels-ignored",
                            "The record has " + std::to_string(ident.channels.size() - record_index.size()) +
                                " channel(s) sensing the other plane; only the " + model::ToString(plane) +
                                " channels were used."});
  }
  std::vector<std::vector<double>> shapes_in_plane;
  for (const auto& m : measured) {
    std::vector<double> v;
    for (int c : record_index) v.push_back(m.shape[c]);
    shapes_in_plane.push_back(v);
  }

  const double length = member.length_m;
  double sensor_mass = 0.0;
  for (const auto& s : member.sensors) sensor_mass += s.mass_kg;
  const double ei_nominal = member.NominalBendingStiffness_nm2(plane);
  const double n_euler_pinned = std::numbers::pi * std::numbers::pi * ei_nominal / (length * length);

  // --- Order hypothesis and pinned-beam regression --------------------------
  OrderSearchInput osi;
  for (const auto& m : measured) {
    osi.frequency_hz.push_back(m.frequency_hz);
    osi.frequency_std_hz.push_back(std::max(m.frequency_std_hz, kMinRelativeFrequencyStd * m.frequency_hz));
  }
  osi.shape = shapes_in_plane;
  osi.sensor_x_m = sensor_x;
  osi.length_m = length;
  osi.mass_per_length_kg_m = member.MassPerLength_kg_m() + sensor_mass / length;
  osi.nominal_ei_nm2 = ei_nominal;
  osi.ei_prior_sigma_ln = options.ei_prior_sigma_ln;
  osi.max_order_offset = 0.25 * ((member.left.kind != model::RotationEnd::Kind::kPinned) +
                                 (member.right.kind != model::RotationEnd::Kind::kPinned));
  OrderHypothesis hyp;
  if (Status s = SearchModeOrders(osi, &hyp); !s.ok()) return s;
  if (search != nullptr) *search = hyp;
  if (forced_orders != nullptr && forced_orders->size() == measured.size()) {
    double chi2 = 0.0;
    if (Status s =
            PinnedBeamRegression(osi, *forced_orders, &hyp.axial_force_n, &hyp.bending_stiffness_nm2, &chi2);
        !s.ok()) {
      return s;
    }
    hyp.order = *forced_orders;
  }
  int highest = 1;
  for (int n : hyp.order) highest = std::max(highest, n);

  FitContext ctx;
  ctx.model_index = model_index;
  ctx.ei_nominal = ei_nominal;
  ctx.ei_prior_sigma_ln = options.ei_prior_sigma_ln;
  ctx.shape_std = options.shape_std;
  ctx.free_left = member.left.kind == model::RotationEnd::Kind::kElastic;
  ctx.free_right = member.right.kind == model::RotationEnd::Kind::kElastic;
  ctx.ea_over_l = member.AxialRigidity_n() / member.length_m;
  ctx.length_m = member.length_m;
  ctx.ea_from_fitted_e = options.sag_ea_from_fitted_e;
  // Declared axial support ratio (the start of x4; see AxialSupportMatters).
  double rho_declared = 1.0;
  {
    model::ResolvedParameters rp;
    model::ModalParameters p0;
    p0.bending_stiffness_nm2 = ei_nominal;
    if (model::ResolveParameters(member, plane, p0, &rp).ok() && ctx.ea_over_l > 0.0)
      rho_declared = std::clamp(rp.k_axial_n_per_m / ctx.ea_over_l, 0.0, 1.0);
  }
  // Pairing looks at kPairingExtraModes model modes beyond the highest order
  // the measured modes may have; the fits then solve only up to the highest
  // paired order (fewer Lanczos vectors per model call).
  const int expected_highest = std::max(highest, static_cast<int>(measured.size()));
  int pairing_modes = expected_highest + kPairingExtraModes;
  ctx.n_scale = std::max(std::abs(hyp.axial_force_n), n_euler_pinned);

  int elements = std::max(options.min_elements, options.elements_per_order * expected_highest);
  auto model = std::make_unique<model::ModalModel>(member, plane, model::ModalOptions{elements});
  pairing_modes = std::min(pairing_modes, model->mesh().FreeDofs() / 2);
  ctx.num_modes = pairing_modes;
  auto set_fit_modes = [&]() {
    ctx.num_modes = 1;
    for (const PairData& p : ctx.pairs) ctx.num_modes = std::max(ctx.num_modes, p.order);
  };
  ctx.model = model.get();

  // Start 1: the regression (fixities 0, consistent with its pinned ends).
  // The regression's EI, within 0.5-2 times the nominal or two prior stds
  // (the relaxed prior of a conflict, IdentifyFromModes, opens the range).
  const double ei_spread = std::max(2.0, std::exp(2.0 * options.ei_prior_sigma_ln));
  const double ei_start =
      std::clamp(hyp.bending_stiffness_nm2, ei_nominal / ei_spread, ei_nominal * ei_spread);
  const double x1_start = std::log(ei_start / ei_nominal) + kLnEiOffset;
  Unknowns x_reg = {hyp.axial_force_n / ctx.n_scale, x1_start, kFixityOffset + 0.0, kFixityOffset + 0.0,
                    kFixityOffset + rho_declared};
  if (!ctx.free_left) x_reg[2] = kFixityOffset;  // unused for held ends
  if (!ctx.free_right) x_reg[3] = kFixityOffset;
  // No start beyond kStartCriticalShare of the critical load at its own
  // fixities (identify_hypotheses.h).
  x_reg[0] = AboveCompressionFloor(ctx, x_reg, n_euler_pinned);

  auto pairs_from = [&](const std::vector<ModePair>& mp) {
    std::vector<PairData> out;
    for (size_t i = 0; i < mp.size(); ++i) {
      if (!mp[i].order || *mp[i].order > pairing_modes) continue;
      PairData p;
      p.measured = static_cast<int>(i);
      p.order = *mp[i].order;
      p.frequency_hz = measured[i].frequency_hz;
      p.sigma_hz = osi.frequency_std_hz[i];
      p.shape = shapes_in_plane[i];
      out.push_back(p);
    }
    return out;
  };
  auto model_at = [&](const Unknowns& x, model::ModalResult* r, int modes) {
    ++ctx.calls;
    return ctx.model->Solve(ctx.Params(x), modes, r);
  };

  // Pairing point and first start: the regression's N and EI with mid-range
  // fixities, the force corrected by one Newton step (pinned-beam slope
  // d(f^2)/dN = n^2 / (4 m L^2), the closed form of pairing.h) so that the
  // model reproduces the lowest hypothesised mode; the regression itself
  // assumed pinned ends, which elastic ends contradict.
  const double f2_per_n = 1.0 / (4.0 * osi.mass_per_length_kg_m * length * length);
  Unknowns x_pair = x_reg;
  if (ctx.free_left) x_pair[2] = kFixityOffset + kMidFixity;
  if (ctx.free_right) x_pair[3] = kFixityOffset + kMidFixity;
  {
    int i0 = -1;
    for (size_t i = 0; i < hyp.order.size(); ++i) {
      if (hyp.order[i] > 0 && (i0 < 0 || hyp.order[i] < hyp.order[i0])) i0 = static_cast<int>(i);
    }
    model::ModalResult r;
    if (i0 >= 0 && hyp.order[i0] <= pairing_modes && model_at(x_pair, &r, pairing_modes).ok()) {
      const int n0 = hyp.order[i0];
      const double f_model = r.modes[n0 - 1].frequency_hz, f = measured[i0].frequency_hz;
      const double n_new = ctx.N(x_pair.data()) + (f * f - f_model * f_model) / (n0 * n0 * f2_per_n);
      x_pair[0] = n_new / ctx.n_scale;
      x_pair[0] = AboveCompressionFloor(ctx, x_pair, n_euler_pinned);
    }
  }
  model::ModalResult start_modes;
  if (!model_at(x_pair, &start_modes, pairing_modes).ok()) {
    x_pair = x_reg;
    if (Status s = model_at(x_reg, &start_modes, pairing_modes); !s.ok()) {
      return Status::InvalidArgument(
          "the member model cannot be evaluated at the pinned-beam regression start (N = " +
          FormatNumber(ctx.N(x_reg.data())) + " N): " + s.message);
    }
  }
  std::vector<double> f_measured;
  for (const auto& m : measured) f_measured.push_back(m.frequency_hz);
  std::vector<ModePair> pairing =
      PairModes(f_measured, shapes_in_plane, model_index, start_modes, options.pairing);
  ctx.pairs = pairs_from(pairing);
  ctx.Reset();
  set_fit_modes();
  if (ctx.pairs.empty()) {
    return Status::InvalidArgument(
        "none of the " + std::to_string(measured.size()) +
        " identified modes pairs with a bending mode of the member model (lowest " +
        FormatNumber(measured[0].frequency_hz) + " Hz, model fundamental " +
        FormatNumber(start_modes.modes[0].frequency_hz) + " Hz at the regression start)");
  }

  // Mesh check: the frequency change of every paired mode on doubling the
  // mesh must stay below max_mesh_error_sigma of its std. Refines (doubling,
  // at most kMaxMeshRefinements times) and returns true when the mesh changed.
  bool mesh_caution = false;
  auto check_mesh = [&](const Unknowns& at) {
    bool changed = false;
    for (int refine = 0;; ++refine) {
      model::ModalModel fine(member, plane, model::ModalOptions{2 * elements});
      model::ModalResult coarse_r, fine_r;
      const auto params = ctx.Params(at);
      ctx.calls += 2;
      if (!ctx.model->Solve(params, ctx.num_modes, &coarse_r).ok() ||
          !fine.Solve(params, ctx.num_modes, &fine_r).ok()) {
        return changed;
      }
      double worst = 0.0;
      for (const PairData& p : ctx.pairs) {
        worst = std::max(worst, std::abs(coarse_r.modes[p.order - 1].frequency_hz -
                                         fine_r.modes[p.order - 1].frequency_hz) /
                                    p.sigma_hz);
      }
      if (worst <= options.max_mesh_error_sigma) return changed;
      if (refine == kMaxMeshRefinements) {
        if (!mesh_caution) {
          est.cautions.push_back({"mesh-error", "The finite-element discretisation error (" +
                                                    FormatNumber(worst, 2) +
                                                    " frequency stds) could not be brought below " +
                                                    FormatNumber(options.max_mesh_error_sigma, 2) + " std."});
        }
        mesh_caution = true;
        return changed;
      }
      elements *= 2;
      model = std::make_unique<model::ModalModel>(member, plane, model::ModalOptions{elements});
      ctx.model = model.get();
      ctx.Reset();
      pairing_modes = std::min(expected_highest + kPairingExtraModes, model->mesh().FreeDofs() / 2);
      changed = true;
    }
  };
  check_mesh(x_pair);

  // Axial support stiffness: an unknown where the member declares a support
  // spring (its stiffness is then an engineer's estimate; `fixed` declares
  // rigid supports and `free` no stretching) in the vertical plane, and
  // where the sag coupling it controls matters: switching the stretching
  // off (rho = 0) and making the supports rigid (rho = 1) moves the lowest
  // paired mode by more than its frequency std. Elsewhere the data cannot
  // tell it from N and the declared ends hold.
  if (options.estimate_axial_support && plane == model::Direction::kVertical &&
      member.axial.kind == model::AxialEnds::Kind::kSpring && !ctx.pairs.empty()) {
    const PairData* low = &ctx.pairs.front();
    for (const PairData& p : ctx.pairs) {
      if (p.order < low->order) low = &p;
    }
    ctx.free_axial = true;  // so that Params sets the ratio
    Unknowns rigid = x_pair, none = x_pair;
    rigid[kAxial] = kFixityOffset + 1.0;
    none[kAxial] = kFixityOffset + 0.0;
    model::ModalResult a, b;
    const bool ok = model_at(rigid, &a, low->order).ok() && model_at(none, &b, low->order).ok();
    est.axial_support_sag_shift_hz =
        ok ? std::abs(a.modes[low->order - 1].frequency_hz - b.modes[low->order - 1].frequency_hz) : 0.0;
    ctx.free_axial = ok && est.axial_support_sag_shift_hz > low->sigma_hz;
    ctx.Reset();
  }

  // --- Starts ----------------------------------------------------------------
  // Start 1: the pairing point (regression N and EI, mid-range fixities, N
  // corrected). A start at the regression's own pinned ends would sit on
  // the bound r = 0, where the reflected differences cost extra model calls.
  std::vector<Unknowns> starts = {x_pair};
  for (const Unknowns& s : GridStarts(ctx, x_reg, options)) starts.push_back(s);

  // Each start's force is corrected by one Newton step on the lowest paired
  // mode, using the pinned-beam slope d(f^2)/dN = n^2 / (4 m L^2) (the
  // closed form of pairing.h): the grid fixities raise the frequencies the
  // regression force was fitted to, and a start near the right force saves
  // Levenberg-Marquardt iterations.
  for (Unknowns& st : starts) {
    const PairData* low = &ctx.pairs.front();
    for (const PairData& p : ctx.pairs) {
      if (p.order < low->order) low = &p;
    }
    model::ModalResult r;
    if (!model_at(st, &r, ctx.num_modes).ok()) continue;
    const double f_model = r.modes[low->order - 1].frequency_hz;
    const double slope = low->order * low->order * f2_per_n;
    const double n_new =
        ctx.N(st.data()) + (low->frequency_hz * low->frequency_hz - f_model * f_model) / slope;
    st[0] = n_new / ctx.n_scale;
    st[0] = AboveCompressionFloor(ctx, st, n_euler_pinned);
  }
  // Compression: a grid over N / P_cr (restrained critical load) at
  // mid-range fixities (identify_hypotheses.h), not corrected.
  if (ctx.N(x_pair.data()) < 0.0) {
    for (const Unknowns& st : CompressionStarts(ctx, x_pair)) starts.push_back(st);
  }

  std::vector<FitOutcome> outcomes;
  FitOutcome best;
  auto run_starts = [&]() {
    outcomes.clear();
    best = FitOutcome{};
    for (const Unknowns& s : starts) {
      FitOutcome o = RunFit(ctx, s, -1, options, best.usable ? &best : nullptr);
      outcomes.push_back(o);
      if (o.usable && !o.arrived && o.cost < best.cost) best = o;
    }
  };
  run_starts();
  if (!best.usable) {
    return Status::Numerical("model updating failed from all " + std::to_string(starts.size()) +
                             " starts (the model could not be evaluated near them)");
  }

  FitOutcome best_start = best;  // the minimum the starts are compared with
  // Re-pair at the estimate; when the pairing changed, run all starts again
  // with the new pairing.
  for (int round = 0; round < kMaxPairingRounds; ++round) {
    model::ModalResult at_best;
    if (!model_at(best.x, &at_best, pairing_modes).ok()) break;
    std::vector<ModePair> again =
        PairModes(f_measured, shapes_in_plane, model_index, at_best, options.pairing);
    bool same = true;
    for (size_t i = 0; i < again.size(); ++i) same = same && again[i].order == pairing[i].order;
    if (same) break;
    std::vector<PairData> candidate = pairs_from(again);
    if (candidate.empty()) break;
    // Only modes added (none dropped or re-ordered): polish from the estimate;
    // the starts' verdict stands for the pairs they shared.
    bool superset = true;
    for (size_t i = 0; i < again.size(); ++i)
      superset = superset && (!pairing[i].order || again[i].order == pairing[i].order);
    if (superset) {
      pairing = again;
      ctx.pairs = candidate;
      ctx.Reset();
      set_fit_modes();
      check_mesh(best.x);
      FitOutcome o = RunFit(ctx, best.x, -1, options);
      if (!o.usable) break;
      best = o;
      continue;
    }
    const FitOutcome previous = best;
    const std::vector<PairData> previous_pairs = ctx.pairs;
    pairing = again;
    ctx.pairs = candidate;
    ctx.Reset();
    set_fit_modes();
    check_mesh(best.x);
    run_starts();
    best_start = best;
    if (!best.usable) {  // keep the first pairing's result
      ctx.pairs = previous_pairs;
      ctx.Reset();
      set_fit_modes();
      best = previous;
      best_start = previous;
      break;
    }
  }

  // Mesh check at the estimate; a refined mesh is polished from the estimate.
  if (check_mesh(best.x)) {
    FitOutcome o = RunFit(ctx, best.x, -1, options);
    if (o.usable) best = o;
  }

  // --- Degrees of freedom, reduced chi-square --------------------------------
  const int n_free = 2 + ctx.free_left + ctx.free_right + ctx.free_axial;
  int n_data = 1;  // prior
  for (const auto& p : ctx.pairs) n_data += 1 + (ctx.UseShapes() ? static_cast<int>(p.shape.size()) - 1 : 0);
  const int dof = n_data - n_free;

  // EA of the sag term: from the fitted E, or the nominal one where the
  // data prefer it (identify_hypotheses.h).
  const SagComparison sag = CompareSagAxialRigidity(
      ctx, options,
      plane == model::Direction::kVertical && member.axial.kind != model::AxialEnds::Kind::kFree, dof, &best);
  const double chi2 = 2.0 * best.cost;
  const double reduced_chi2 = dof > 0 ? chi2 / dof : 0.0;
  const double cov_scale = std::max(1.0, reduced_chi2);

  // --- Identifiability --------------------------------------------------------
  const Unknowns& x = best.x;
  const double n_hat = ctx.N(x.data());
  Blocks free_block{};
  for (int j = 0; j < kUnknowns; ++j) free_block[j] = ctx.Free(j);
  const Blocks unidentified = UnidentifiedUnknowns(ctx, x, free_block, cov_scale);
  {
    static const char* names[kUnknowns] = {"axial force", "bending stiffness", "left fixity", "right fixity",
                                           "axial support stiffness"};
    std::string list;
    for (int j = 0; j < kUnknowns; ++j) {
      if (unidentified[j]) list += (list.empty() ? "" : ", ") + std::string(names[j]);
    }
    est.identifiability =
        list.empty() ? "all unknowns separated by the data" : "the data cannot separate: " + list;
    if (!list.empty()) {
      est.cautions.push_back(
          {"not-identifiable", "The identified modes cannot separate " + list +
                                   "; the intervals of these quantities span what the data allow, not a "
                                   "precise value."});
    }
  }

  // --- Covariance (Wald) -------------------------------------------------------
  // Unidentified fixities enter the covariance with a range prior (see
  // CovarianceAt) and are reported with the whole range [0, 1]; the profile
  // likelihood of N re-optimises them within their bounds.
  Blocks held{}, range_prior{};
  for (int j = 0; j < kUnknowns; ++j) {
    held[j] = !free_block[j];
    range_prior[j] = j >= kLeft && unidentified[j];
  }
  CovarianceMatrix cov;
  const bool have_cov = CovarianceAt(ctx, x, held, range_prior, &cov);
  if (have_cov) cov *= cov_scale;
  auto std_of = [&](int j) {
    return have_cov ? std::sqrt(std::max(0.0, cov(j, j))) : std::numeric_limits<double>::infinity();
  };

  // N: Wald, then profile.
  double n_std = std_of(0) * ctx.n_scale;
  double n_lo = n_hat - kZ95 * n_std, n_hi = n_hat + kZ95 * n_std;
  std::string n_method = "wald";
  bool profile_open = false;
  // Starts that reached the best minimum: the same cost and a force that
  // differs by less than a tenth of its Wald std (a flat minimum ends at
  // slightly different forces from different starts) or kSameMinimumForce.
  int at_best = 0;
  {
    const double force_tol = std::max(kSameMinimumForce * std::max(1.0, std::abs(x[0])),
                                      std::isfinite(n_std) ? 0.1 * std_of(0) : 0.0);
    for (const auto& o : outcomes) {
      if (!o.usable) continue;
      const bool same_cost =
          std::abs(o.cost - best_start.cost) <= kSameMinimumCost * std::max(1.0, best_start.cost);
      at_best += (same_cost && std::abs(o.x[0] - best_start.x[0]) <= force_tol);
    }
  }
  const long calls_before_profile = ctx.calls;
  if (options.profile_axial_force) {
    ProfileInput pin;
    pin.unknown = 0;
    pin.cov = have_cov ? &cov : nullptr;
    pin.cov_scale = cov_scale;
    pin.fallback_step = 0.1 * std::max(std::abs(x[0]), 1.0);
    pin.min_step = 1e-3 * std::max(std::abs(x[0]), 0.1);
    const ProfileInterval prof = Profile(ctx, best, free_block, pin, options);
    profile_open = prof.open;
    const double p_lo = prof.low * ctx.n_scale, p_hi = prof.high * ctx.n_scale;
    if (!std::isfinite(n_std) || p_hi - p_lo > n_hi - n_lo) n_method = "profile";
    if (!std::isfinite(n_std)) {
      n_lo = p_lo;
      n_hi = p_hi;
    } else {
      n_lo = std::min(n_lo, p_lo);
      n_hi = std::max(n_hi, p_hi);
    }
    n_std = std::max(std::isfinite(n_std) ? n_std : 0.0, (n_hi - n_lo) / (2.0 * kZ95));
  }
  // EA of the sag term undecided by the data: the interval also covers the
  // nominal-EA estimate (the same interval shifted to its force).
  if (sag.comparable && std::abs(sag.other_force_n - n_hat) > 0.25 * (n_hi - n_lo)) {
    const double d = sag.other_force_n - n_hat;
    n_lo = std::min(n_lo, n_lo + d);
    n_hi = std::max(n_hi, n_hi + d);
    n_std = std::max(n_std, (n_hi - n_lo) / (2.0 * kZ95));
    n_method = "sag-stiffness";
    est.cautions.push_back(
        {"sag-stiffness-uncertain",
         "The sag of the member couples its vertical modes to its axial stiffness EA, which the record does "
         "not fix: EA from the fitted E gives " +
             FormatKn(n_hat) + ", EA from the nominal E (" + FormatNumber(sag.other_ea_share, 3) +
             " times that) gives " + FormatKn(sag.other_force_n) +
             "; the interval covers both. Knowing E or the section settles it."});
  }
  est.axial_force_n = {n_hat, n_std, n_lo, n_hi, false, !unidentified[0] && !profile_open};
  if (profile_open || !std::isfinite(n_std)) {
    est.cautions.push_back({"force-interval-open",
                            "The data do not bound the axial force on at least one side within the range "
                            "searched; the interval shown is only the searched range."});
  }

  // EI: log-normal Wald interval from the std of ln EI, and the profile
  // likelihood of ln EI (as for N; the Wald interval alone was 2-3 times too
  // narrow across repeated records of one member, issue 12): the wider one
  // is reported (fit.bending_stiffness_interval).
  std::string ei_method = "wald";
  {
    const double ei = ctx.EI(x.data());
    // Without a covariance the prior's std is an upper bound of the
    // posterior std of ln EI (data only add information to a Gaussian prior).
    const double s = have_cov ? std_of(1) : options.ei_prior_sigma_ln;
    double ln_lo = -kZ95 * s, ln_hi = kZ95 * s;  // ln(EI_bound / EI)
    if (options.profile_bending_stiffness) {
      ProfileInput pin;
      pin.unknown = 1;
      pin.cov = have_cov ? &cov : nullptr;
      pin.cov_scale = cov_scale;
      pin.fallback_step = options.ei_prior_sigma_ln;
      pin.min_step = 1e-3;
      const ProfileInterval prof = Profile(ctx, best, free_block, pin, options);
      const double p_lo = prof.low - x[1], p_hi = prof.high - x[1];
      if (p_hi - p_lo > ln_hi - ln_lo) ei_method = "profile";
      ln_lo = std::min(ln_lo, p_lo);
      ln_hi = std::max(ln_hi, p_hi);
    }
    const double s_reported = std::max(s, (ln_hi - ln_lo) / (2.0 * kZ95));
    est.bending_stiffness_nm2 = {ei,    ei * s_reported, ei * std::exp(ln_lo), ei * std::exp(ln_hi),
                                 false, !unidentified[1]};
    if (s > kPriorDominatedShare * options.ei_prior_sigma_ln) {
      est.cautions.push_back(
          {"stiffness-from-prior",
           "The bending stiffness is determined mainly by its prior (nominal " + FormatNumber(ei_nominal) +
               " N m^2 +- " + FormatNumber(100 * options.ei_prior_sigma_ln, 2) + " %), not by the record."});
    }
  }
  est.fit.profile_model_calls = ctx.calls - calls_before_profile;

  // Fixities.
  model::ModalResult final_modes;
  const bool final_ok = model_at(x, &final_modes, ctx.num_modes).ok();
  auto fixity = [&](int j, bool free_end, double resolved) {
    EstimatedQuantity q;
    if (!free_end) {
      q.value = resolved;
      q.fixed = true;
      return q;
    }
    q.value = std::clamp(x[j] - kFixityOffset, 0.0, 1.0);
    if (unidentified[j] || !have_cov) {
      q.std = kUniformUnitStd;
      q.ci95_low = 0.0;
      q.ci95_high = 1.0;
      q.identifiable = false;
      return q;
    }
    q.std = std_of(j);
    q.ci95_low = std::clamp(q.value - kZ95 * q.std, 0.0, 1.0);
    q.ci95_high = std::clamp(q.value + kZ95 * q.std, 0.0, 1.0);
    return q;
  };
  est.fixity_left = fixity(2, ctx.free_left, final_ok ? final_modes.fixity_left : 0.0);
  est.fixity_right = fixity(3, ctx.free_right, final_ok ? final_modes.fixity_right : 0.0);
  est.axial_support_ratio = fixity(kAxial, ctx.free_axial, rho_declared);
  est.axial_support_stiffness_n_per_m =
      SupportStiffness(est.axial_support_ratio.value, ctx.EaOverL(x.data()));

  // Modes with pairing and model values at the estimate.
  for (size_t i = 0; i < measured.size(); ++i) {
    EstimatedMode em;
    em.measured = measured[i];
    em.measured.order.reset();
    for (const PairData& p : ctx.pairs) {
      if (p.measured != static_cast<int>(i)) continue;
      em.paired = true;
      em.measured.order = p.order;
      if (final_ok) {
        const model::Mode& mode = final_modes.modes[p.order - 1];
        em.model_frequency_hz = mode.frequency_hz;
        std::vector<double> psi;
        for (int k : model_index) psi.push_back(mode.shape_at_sensors[k]);
        em.mac = model_index.size() >= 2 ? Mac(p.shape, psi) : 1.0;
      }
    }
    est.modes.push_back(em);
  }

  {
    const model::ModalParameters p = ctx.Params(x);
    double n_cr = 0.0;
    if (ctx.model->CriticalCompression(p, &n_cr).ok()) est.critical_compression_n = n_cr;
  }

  // --- Fit summary ---------------------------------------------------------------
  est.fit.converged = best.converged;
  est.fit.cost = best.cost;
  est.fit.reduced_chi2 = reduced_chi2;
  est.fit.degrees_of_freedom = dof;
  est.fit.iterations = best.iterations;
  est.fit.starts = static_cast<int>(starts.size());
  est.fit.starts_at_best = at_best;
  est.fit.elements = elements;
  est.fit.axial_force_interval = n_method;
  est.fit.bending_stiffness_interval = ei_method;
  est.fit.sag_ea_from_fitted_e = ctx.ea_from_fitted_e;

  est.fit.forward_model_calls = ctx.calls;
  MarkOtherPlaneModes(member, &est);
  ctx.calls = est.fit.forward_model_calls;
  AppendFitCautions(member, ctx.free_axial, &est);

  est.fit.forward_model_calls = ctx.calls;
  est.fit.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  *estimate = std::move(est);
  return Status::Ok();
}

}  // namespace fit

Status IdentifyFromModes(const model::Member& member, const ModalIdentification& ident,
                         const IdentifyOptions& options, Estimate* estimate) {
  Estimate est;
  OrderHypothesis search;
  if (Status s = fit::IdentifyWithPrior(member, ident, options, &est, nullptr, &search); !s.ok()) return s;
  fit::ResolvePriorConflict(member, ident, options, &est, &search);
  fit::CompareRivalNumbering(member, ident, options, search, &est);
  AppendRefusals(member, &est);
  est.verdict = MakeVerdict(est.cautions);
  *estimate = std::move(est);
  return Status::Ok();
}

}  // namespace taut::estimation
