// `taut identify`: member + record -> axial force, bending stiffness and end
// fixity with intervals (record reader -> estimation/identify_record.h: modal
// identification -> model updating -> for free decays and large amplitudes
// the nonlinear time-domain fit), as a short table or the docs/FORMATS.md
// section 3 JSON object. With --modes FILE instead of --record, modes an
// engineer already has (docs/FORMATS.md section 4, estimation/
// supplied_modes.h). The table ends with the uncertainty budget of the
// force and the two simplified formulas beside it (issue 17).
#include <cmath>
#include <iomanip>
#include <nlohmann/json.hpp>
#include <ostream>
#include <sstream>

#include "estimation/identify_record.h"
#include "estimation/record.h"
#include "estimation/supplied_modes.h"
#include "server/cli.h"
#include "server/estimate_json.h"
#include "server/member_json.h"
#include "server/modes_json.h"

namespace taut::server {

namespace {

struct IdentifyCliOptions {
  std::string member_path;
  std::string record_path;
  std::string modes_path;  // --modes: supplied modes instead of a record (issue 17)
  std::optional<std::string> units;
  std::string profile_path;
  std::optional<double> temperature_c;
  bool json = false;
};

std::string Fixed(double v, int decimals) {
  std::ostringstream os;
  os << std::fixed << std::setprecision(decimals) << v;
  return os.str();
}

std::string Sig(double v, int digits = 4) {
  std::ostringstream os;
  os << std::setprecision(digits) << v;
  return os.str();
}

void PrintQuantity(std::ostream& out, const std::string& name, const estimation::EstimatedQuantity& q,
                   double scale, int decimals, const std::string& unit, const std::string& fixed_text) {
  out << "  " << std::left << std::setw(19) << name << std::right;
  if (q.fixed) {
    out << fixed_text << "\n";
    return;
  }
  out << std::setw(10) << Fixed(q.value / scale, decimals) << " " << std::left << std::setw(6) << unit
      << std::right << " 95 % [" << Fixed(q.ci95_low / scale, decimals) << ", "
      << Fixed(q.ci95_high / scale, decimals) << "]  std " << Fixed(q.std / scale, decimals);
  if (!q.identifiable) out << "  (not determined by the data)";
  out << "\n";
}

std::string FixedEndText(const model::RotationEnd& end, double r) {
  switch (end.kind) {
    case model::RotationEnd::Kind::kPinned:
      return "pinned (declared, r = 0)";
    case model::RotationEnd::Kind::kClamped:
      return "clamped (declared, r = 1)";
    case model::RotationEnd::Kind::kSpring:
      return "known spring (declared, r = " + Fixed(r, 3) + ")";
    case model::RotationEnd::Kind::kElastic:
      break;
  }
  return "";
}

// Sources below this share of var(N) are summed into one line of the table.
constexpr double kBudgetTableMinShare = 0.005;

// The uncertainty budget of N as a short table (issue 17; docs/FORMATS.md
// section 3 uncertainty_budget).
void PrintBudget(std::ostream& out, const estimation::UncertaintyBudget& b) {
  out << "\n  uncertainty of the axial force: 95 % half-width / 1.96 = "
      << Fixed(b.axial_force_std_n / 1000.0, 3) << " kN (fit " << Fixed(b.fit_std_n / 1000.0, 3)
      << ", member tolerances " << Fixed(b.tolerance_std_n / 1000.0, 3) << ")\n";
  out << "  " << std::left << std::setw(44) << "source" << std::right << std::setw(10) << "std_kN"
      << std::setw(8) << "share"
      << "\n";
  int rest = 0;
  double rest_share = 0.0;
  for (const auto& x : b.sources) {
    if (x.share < kBudgetTableMinShare) {
      ++rest;
      rest_share += x.share;
      continue;
    }
    std::string name = x.label;
    if (x.tolerance)
      name += std::string(x.default_tolerance ? " (default " : " (declared ") + Sig(*x.tolerance, 3) + " " +
              x.tolerance_unit + ")";
    out << "  " << std::left << std::setw(44) << name << std::right << std::setw(10)
        << Fixed(x.std_n / 1000.0, 3) << std::setw(6) << Fixed(100.0 * x.share, 1) << " %\n";
  }
  if (rest > 0) {
    out << "  " << std::left << std::setw(44) << (std::to_string(rest) + " more, each below 0.5 %")
        << std::right << std::setw(10) << "" << std::setw(6) << Fixed(100.0 * rest_share, 1) << " %\n";
  }
}

// The simplified formulas beside the estimate, two lines (issue 17).
void PrintSimplified(std::ostream& out, const estimation::SimplifiedComparison& c) {
  out << "\n  simplified formulas (for comparison only):";
  out << " taut string from f1 "
      << (c.taut_string_force_n ? Fixed(*c.taut_string_force_n / 1000.0, 2) + " kN"
                                : std::string("n/a (no f1)"));
  out << "; pinned beam from " << c.modes_used << " mode(s) "
      << (c.pinned_beam_force_n ? Fixed(*c.pinned_beam_force_n / 1000.0, 2) + " kN"
                                : std::string("n/a (needs 2)"))
      << "\n";
  std::string why;
  for (const auto& r : c.reasons) why += (why.empty() ? "" : "; ") + r;
  out << "  why taut differs: "
      << (why.empty() ? std::string("no left-out effect above 1 % for this member") : why) << ".\n";
}

// The line that says what the estimate was made from.
std::string RecordLine(const estimation::Record& record) {
  std::string line =
      "record " + Fixed(record.duration_s(), 1) + " s at " + Sig(record.sample_rate_hz) + " Hz";
  if (!record.recorded_at.empty()) line += ", recorded " + record.recorded_at;
  if (record.temperature_c) line += ", " + Fixed(*record.temperature_c, 1) + " C";
  return line;
}

void PrintTable(std::ostream& out, const model::Member& member, const std::string& member_label,
                const std::string& source_line, const estimation::Estimate& e) {
  // The verdict first: the one line the technician on site needs.
  out << "verdict: " << e.verdict.summary << "\n\n";
  out << "member " << member_label << ", " << model::ToString(e.direction) << " plane, channels";
  for (const auto& c : e.channels) out << " " << c;
  out << "\n" << source_line << "\n\n";
  PrintQuantity(out, "axial force", e.axial_force_n, 1000.0, 2, "kN", "");
  out << "  " << std::setw(19) << ""
      << "(tension > 0; interval: " << e.fit.axial_force_interval << ")\n";
  PrintQuantity(out, "bending stiffness", e.bending_stiffness_nm2, 1.0, 0, "N m^2", "");
  PrintQuantity(out, "fixity left", e.fixity_left, 1.0, 3, "",
                FixedEndText(member.left, e.fixity_left.value));
  PrintQuantity(out, "fixity right", e.fixity_right, 1.0, 3, "",
                FixedEndText(member.right, e.fixity_right.value));
  if (!e.axial_support_ratio.fixed) {
    PrintQuantity(out, "axial support ratio", e.axial_support_ratio, 1.0, 3, "", "");
    out << "  " << std::setw(19) << ""
        << "(k_ax / (EA/L): 1 rigid, 0 free; support stiffness "
        << (std::isfinite(e.axial_support_stiffness_n_per_m) ? Sig(e.axial_support_stiffness_n_per_m) + " N/m"
                                                             : std::string("rigid"))
        << ")\n";
  }
  out << "\n  " << std::setw(6) << "order" << std::setw(14) << "measured_hz" << std::setw(10) << "std_hz"
      << std::setw(12) << "model_hz" << std::setw(8) << "MAC"
      << "\n";
  for (const auto& m : e.modes) {
    out << "  " << std::setw(6) << (m.paired && m.measured.order ? std::to_string(*m.measured.order) : "-")
        << std::setw(14) << Fixed(m.measured.frequency_hz, 4) << std::setw(10)
        << Fixed(m.measured.frequency_std_hz, 4);
    if (m.paired) {
      out << std::setw(12) << Fixed(m.model_frequency_hz, 4) << std::setw(8) << Fixed(m.mac, 3);
    } else {
      out << "    unpaired";
    }
    out << "\n";
  }
  out << "\n  fit: " << e.fit.model << " model, " << (e.fit.converged ? "converged" : "NOT converged")
      << ", reduced chi-square " << Sig(e.fit.reduced_chi2, 3) << ", " << e.fit.starts << " starts ("
      << e.fit.starts_at_best << " at the best), " << e.fit.forward_model_calls << " model solves, "
      << Fixed(e.fit.seconds, 3) << " s\n";
  if (e.transient) {
    out << "  time-domain fit of " << Fixed(e.transient->window_start_s, 2) << ".."
        << Fixed(e.transient->window_end_s, 2) << " s, " << e.transient->modes << " mode(s), "
        << e.transient->model_runs << " transient runs; the linear modal fit gave "
        << Fixed(e.transient->modal_axial_force_n / 1000.0, 2) << " kN\n";
  }
  out << "  " << e.identifiability << "\n";
  if (e.uncertainty_budget) PrintBudget(out, *e.uncertainty_budget);
  if (e.simplified) PrintSimplified(out, *e.simplified);
  if (!e.cautions.empty()) {
    out << "\ncautions:\n";
    for (const auto& c : e.cautions) {
      out << "  - " << c.code << " (" << estimation::ToString(estimation::SeverityOf(c.code))
          << "): " << c.message << "\n";
    }
  }
  out << "\n" << e.notice << "\n";
}

int RunIdentifyModes(const IdentifyCliOptions& o, const model::Member& member, std::ostream& out,
                     std::ostream& err);

int RunIdentify(const IdentifyCliOptions& o, std::ostream& out, std::ostream& err) {
  model::Member member;
  if (Status s = LoadMemberFile(o.member_path, &member); !s.ok()) {
    err << "taut identify: " << s.message << "\n";
    return 1;
  }
  if (!o.modes_path.empty()) return RunIdentifyModes(o, member, out, err);
  if (o.record_path.empty()) {
    err << "taut identify: give --record FILE (an acceleration record) or --modes FILE (supplied modes)\n";
    return 1;
  }
  estimation::RecordReadOptions ro;
  ro.member = &member;
  ro.units = o.units;
  ro.temperature_c = o.temperature_c;
  estimation::Record record;
  if (Status s = ReadRecordForCli(o.record_path, o.profile_path, ro, &record, err, "taut identify");
      !s.ok()) {
    err << "taut identify: " << s.message << "\n";
    return 1;
  }
  estimation::Estimate estimate;
  const Status st =
      estimation::IdentifyRecord(member, record, estimation::IdentifyRecordOptions{}, &estimate);
  // A refusal (verdict "unusable") still fills the estimate: it is printed
  // so that the engineer sees why, and the exit code is 1 with the reason.
  const bool refused = !st.ok() && estimate.verdict.code == "unusable";
  if (!st.ok() && !refused) {
    err << "taut identify: " << o.record_path << ": " << st.message << "\n";
    return 1;
  }
  const int exit_code = refused ? 1 : 0;
  if (refused) err << "taut identify: " << o.record_path << ": " << st.message << "\n";
  if (o.json) {
    nlohmann::json j = EstimateToJson(estimate);
    // Record context beside the contract keys (docs/FORMATS.md: "at least").
    j["member"] = member.id;
    j["record"] = {{"recorded_at", record.recorded_at},
                   {"temperature_c",
                    record.temperature_c ? nlohmann::json(*record.temperature_c) : nlohmann::json(nullptr)},
                   {"duration_s", record.duration_s()},
                   {"sample_rate_hz", record.sample_rate_hz}};
    out << j.dump(2) << "\n";
    return exit_code;
  }
  PrintTable(out, member, member.id.empty() ? o.member_path : member.id, RecordLine(record), estimate);
  return exit_code;
}

// `taut identify --modes FILE`: the modes an engineer already has
// (docs/FORMATS.md section 4) instead of a record; the same result.
int RunIdentifyModes(const IdentifyCliOptions& o, const model::Member& member, std::ostream& out,
                     std::ostream& err) {
  estimation::SuppliedModes supplied;
  if (Status s = LoadSuppliedModesFile(o.modes_path, member, &supplied); !s.ok()) {
    err << "taut identify: " << s.message << "\n";
    return 1;
  }
  estimation::Estimate estimate;
  const Status st = estimation::IdentifySuppliedModes(member, supplied, {}, &estimate);
  const bool refused = !st.ok() && estimate.verdict.code == "unusable";
  if (!st.ok()) {
    err << "taut identify: " << o.modes_path << ": " << st.message << "\n";
    if (!refused) return 1;
  }
  if (o.json) {
    nlohmann::json j = EstimateToJson(estimate);
    j["member"] = member.id;
    j["modes_supplied"] = {{"count", supplied.modes.size()}, {"source", supplied.source}};
    out << j.dump(2) << "\n";
  } else {
    PrintTable(out, member, member.id.empty() ? o.member_path : member.id,
               "modes supplied: " + std::to_string(supplied.modes.size()) + " from " +
                   (supplied.source.empty() ? o.modes_path : supplied.source),
               estimate);
  }
  return refused ? 1 : 0;
}

}  // namespace

void RegisterIdentifyCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<IdentifyCliOptions>();
  CLI::App* cmd = app.add_subcommand("identify",
                                     "Axial force, bending stiffness and end fixity of a member from an "
                                     "acceleration record (or supplied modes)");
  cmd->add_option("--member", o->member_path, "member description (JSON, docs/FORMATS.md section 1)")
      ->required()
      ->check(CLI::ExistingFile);
  CLI::Option* record =
      cmd->add_option("--record", o->record_path, "acceleration record (CSV, docs/FORMATS.md section 2)")
          ->check(CLI::ExistingFile);
  cmd->add_option("--modes", o->modes_path,
                  "modes measured elsewhere (JSON, docs/FORMATS.md section 4), instead of --record")
      ->check(CLI::ExistingFile)
      ->excludes(record);
  cmd->add_option("--units", o->units,
                  "units of the record samples, overriding the file (m/s2, g, mg, V, mV)")
      ->check(CLI::IsMember({"m/s2", "g", "mg", "V", "mV"}));
  cmd->add_option(
         "--profile", o->profile_path,
         "import profile (JSON, docs/FORMATS.md section 2.3) for a logger file the reader cannot detect")
      ->check(CLI::ExistingFile);
  cmd->add_option("--temperature", o->temperature_c, "member temperature [C], overriding the file");
  cmd->add_flag("--json", o->json, "print the JSON result (docs/FORMATS.md section 3) instead of a table");
  cmd->callback([o, ctx] { ctx->exit_code = RunIdentify(*o, *ctx->out, *ctx->err); });
}

}  // namespace taut::server
