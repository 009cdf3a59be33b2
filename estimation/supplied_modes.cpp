#include "estimation/supplied_modes.h"

#include <algorithm>
#include <chrono>
#include <cmath>

#include "estimation/tolerance_budget.h"

namespace taut::estimation {

Status IdentifySuppliedModes(const model::Member& member, const SuppliedModes& supplied,
                             const IdentifyOptions& options, Estimate* estimate) {
  const auto t0 = std::chrono::steady_clock::now();
  if (Status s = model::ValidateMember(member); !s.ok()) return s;
  if (supplied.modes.empty()) return Status::InvalidArgument("no mode was supplied");
  ModalIdentification ident;
  ident.uncertainty_method = "supplied with the modes";
  ident.modes = supplied.modes;
  model::Member fit_member = member;
  const bool shapes = !supplied.channels.empty();
  if (shapes) {
    for (const std::string& c : supplied.channels) {
      const auto it = std::find_if(member.sensors.begin(), member.sensors.end(),
                                   [&](const model::Sensor& s) { return s.channel == c; });
      if (it == member.sensors.end()) {
        return Status::InvalidArgument("shape channel '" + c + "' is not a sensor of the member");
      }
      if (supplied.plane && it->direction != *supplied.plane) {
        return Status::InvalidArgument(
            "shape channel '" + c + "' senses the " + model::ToString(it->direction) +
            " plane, and the modes are given in the " + model::ToString(*supplied.plane) + " plane");
      }
    }
    ident.channels = supplied.channels;
    for (auto& m : ident.modes) {  // modes.h: the largest entry is +1
      double peak = 0.0;
      for (double v : m.shape) peak = std::abs(v) > std::abs(peak) ? v : peak;
      if (peak != 0.0) {
        for (double& v : m.shape) v /= peak;
      }
    }
  } else {
    // The massless stand-in sensor (supplied_modes.h): it fixes the plane
    // and changes no model quantity.
    model::Sensor stand_in;
    stand_in.channel = kSuppliedChannel;
    stand_in.position_m = 0.5 * member.length_m;
    stand_in.mass_kg = 0.0;
    stand_in.direction = supplied.plane.value_or(member.MajorityPlane());
    stand_in.position_tolerance_m = 0.0;
    fit_member.sensors.push_back(stand_in);
    ident.channels = {kSuppliedChannel};
    for (auto& m : ident.modes) m.shape = {1.0};
  }
  Estimate e;
  if (Status s = IdentifyFromModes(fit_member, ident, options, &e); !s.ok()) return s;
  const std::string from = supplied.source.empty() ? "" : " (" + supplied.source + ")";
  e.cautions.insert(
      e.cautions.begin(),
      {"modes-supplied", "The " + std::to_string(supplied.modes.size()) + " mode(s) were supplied" + from +
                             ", not identified from a record by taut: their frequencies, stds" +
                             (shapes ? " and shapes" : "") +
                             " are taken as given, and no record-quality check was made."});
  if (!shapes) {
    for (auto& c : e.cautions) {
      if (c.code == "single-sensor") {
        c.message = "No mode shapes were supplied: shapes cannot confirm the mode orders.";
      }
    }
  }
  e.verdict = MakeVerdict(e.cautions);
  if (e.verdict.code != "unusable") {
    ApplyToleranceTerms(fit_member, ComputeToleranceTerms(fit_member, options, e), &e);
    e.verdict = MakeVerdict(e.cautions);
  }
  if (!shapes) {
    // The stand-in is no sensor of the member: no channel, no shape, no budget line.
    e.channels.clear();
    e.shape_channels.clear();
    for (auto& m : e.modes) m.measured.shape.clear();
    if (e.uncertainty_budget) {
      const std::string key = "sensors[" + std::to_string(member.sensors.size()) + "].position_tolerance_m";
      auto& src = e.uncertainty_budget->sources;
      src.erase(
          std::remove_if(src.begin(), src.end(), [&](const BudgetSource& b) { return b.source == key; }),
          src.end());
    }
  }
  e.fit.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  const bool refused = e.verdict.code == "unusable";
  const std::string summary = e.verdict.summary;
  *estimate = std::move(e);
  return refused ? Status::InvalidArgument(summary) : Status::Ok();
}

}  // namespace taut::estimation
