// `taut modes`: the forward model from the command line.
#include <iomanip>
#include <nlohmann/json.hpp>
#include <ostream>
#include <sstream>

#include "model/modal.h"
#include "server/cli.h"
#include "server/member_json.h"

namespace taut::server {

namespace {

struct ModesOptions {
  std::string member_path;
  double axial_force_n = 0.0;
  std::optional<double> bending_stiffness_nm2;
  std::optional<double> fixity_left;
  std::optional<double> fixity_right;
  std::string direction;  // "", "vertical" or "lateral"
  int modes = 6;
  int elements = 40;
  bool json = false;
};

int RunModes(const ModesOptions& o, std::ostream& out, std::ostream& err) {
  model::Member member;
  if (Status s = LoadMemberFile(o.member_path, &member); !s.ok()) {
    err << "taut modes: " << s.message << "\n";
    return 1;
  }
  const model::Direction direction = ChooseDirection(member, o.direction);

  model::ModalParameters p;
  p.axial_force_n = o.axial_force_n;
  p.bending_stiffness_nm2 = o.bending_stiffness_nm2;
  p.fixity_left = o.fixity_left;
  p.fixity_right = o.fixity_right;
  model::ModalOptions mo;
  mo.target_elements = o.elements;
  model::ModalResult r;
  if (Status s = model::ComputeModes(member, direction, p, o.modes, &r, mo); !s.ok()) {
    err << "taut modes: " << s.message << "\n";
    return 1;
  }

  if (o.json) {
    nlohmann::json j;
    j["member"] = member.id;
    j["direction"] = model::ToString(direction);
    j["axial_force_n"] = p.axial_force_n;
    j["bending_stiffness_nm2"] = r.bending_stiffness_nm2;
    j["end_fixity"] = {{"left", r.fixity_left}, {"right", r.fixity_right}};
    j["sag_midspan_m"] = r.sag_midspan_m;
    j["shape_normalisation"] = "mass (phi^T M phi = 1), 1/sqrt(kg)";
    j["modes"] = nlohmann::json::array();
    for (const auto& m : r.modes) {
      nlohmann::json shape = nlohmann::json::object();
      for (size_t i = 0; i < r.channels.size(); ++i) shape[r.channels[i]] = m.shape_at_sensors[i];
      j["modes"].push_back({{"order", m.order}, {"frequency_hz", m.frequency_hz}, {"shape", shape}});
    }
    out << j.dump(2) << "\n";
    return 0;
  }

  out << "member " << (member.id.empty() ? o.member_path : member.id) << ", " << model::ToString(direction)
      << " plane, " << (r.node_x_m.size() - 1) << " elements\n";
  out << std::setprecision(4) << "  N = " << p.axial_force_n / 1000.0
      << " kN (tension > 0), EI = " << r.bending_stiffness_nm2 << " N m^2, fixity left " << r.fixity_left
      << ", right " << r.fixity_right;
  if (r.sag_midspan_m != 0.0) out << ", static sag " << r.sag_midspan_m * 1000.0 << " mm";
  out << "\n\n";
  out << std::right << std::setw(6) << "order" << std::setw(14) << "frequency_hz";
  for (const auto& c : r.channels) out << std::setw(12) << c;
  out << "\n";
  for (const auto& m : r.modes) {
    out << std::setw(6) << m.order << std::setw(14) << std::fixed << std::setprecision(4) << m.frequency_hz;
    for (double v : m.shape_at_sensors) out << std::setw(12) << std::setprecision(5) << v;
    out << "\n";
  }
  if (!r.channels.empty())
    out << "\nshapes at the sensors are mass-normalised (phi^T M phi = 1), in 1/sqrt(kg)\n";
  return 0;
}

}  // namespace

void RegisterModesCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<ModesOptions>();
  CLI::App* cmd = app.add_subcommand("modes", "Frequencies and mode shapes of a member for given parameters");
  cmd->add_option("--member", o->member_path, "member description (JSON, docs/FORMATS.md section 1)")
      ->required()
      ->check(CLI::ExistingFile);
  cmd->add_option("--axial-force", o->axial_force_n, "axial force N [N], tension > 0")->required();
  cmd->add_option("--bending-stiffness", o->bending_stiffness_nm2, "EI [N m^2] (default: nominal E I)")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--fixity-left", o->fixity_left, "fixity factor r of the left end in [0, 1]")
      ->check(CLI::Range(0.0, 1.0));
  cmd->add_option("--fixity-right", o->fixity_right, "fixity factor r of the right end in [0, 1]")
      ->check(CLI::Range(0.0, 1.0));
  cmd->add_option("--direction", o->direction, "plane of vibration (default: that of most sensors)")
      ->check(CLI::IsMember({"vertical", "lateral"}));
  cmd->add_option("--modes", o->modes, "number of modes (default 6)")->check(CLI::Range(1, 50));
  cmd->add_option("--elements", o->elements, "target number of finite elements (default 40)")
      ->check(CLI::Range(1, 2000));
  cmd->add_flag("--json", o->json, "print JSON instead of a table");
  cmd->callback([o, ctx] { ctx->exit_code = RunModes(*o, *ctx->out, *ctx->err); });
}

}  // namespace taut::server
