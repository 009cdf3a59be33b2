// `taut simulate`: the nonlinear transient model writing a record CSV
// (docs/FORMATS.md section 2) of accelerations at the member's sensors, so that
// simulated and measured records go through the same tools.
#include <cmath>
#include <cstdio>
#include <fstream>
#include <iomanip>
#include <numbers>
#include <ostream>
#include <random>
#include <sstream>

#include "model/transient.h"
#include "server/cli.h"
#include "server/member_json.h"

namespace taut::server {

namespace {

// Integration steps per output sample. The midpoint rule lengthens a period
// by (omega h)^2 / 12 (Hughes, The Finite Element Method, 1987, sec. 9.3);
// 20 substeps keep that under 1e-4 for every mode up to a tenth of the
// sampling rate: (2 pi (rate/10) / (20 rate))^2 / 12 = 8e-5.
constexpr int kDefaultSubsteps = 20;

struct SimulateOptions {
  std::string member_path;
  double axial_force_n = 0.0;
  std::optional<double> bending_stiffness_nm2;
  std::optional<double> fixity_left, fixity_right;
  std::string direction;
  std::optional<int> initial_mode;
  std::optional<double> amplitude_m;
  std::string impact;  // "X:IMPULSE"
  std::optional<double> ambient_rms_n;
  unsigned seed = 1;
  double duration_s = 0.0;
  double rate_hz = 0.0;
  double damping = 0.0;
  int elements = 20;
  int substeps = kDefaultSubsteps;
  std::string output;  // "" = stdout
  std::string recorded_at = "2026-01-01T00:00:00Z";
  std::optional<double> temperature_c;
};

// Contact duration of the hammer blow when --impact gives none: 5 ms, a
// soft-tipped hammer on a steel bar (common practice; recalled, not from a
// standard). The blow is a half-sine force pulse of that duration, so it
// excites the modes below about 1 / duration rather than every mode of the
// mesh as an ideal impulse would.
constexpr double kDefaultContact_s = 0.005;
// Integration steps per contact duration, at least.
constexpr int kStepsPerContact = 10;

// Number of random force points for --ambient: at (i / (k + 1)) L,
// i = 1..k; several points so that every low mode is driven.
constexpr int kAmbientForcePoints = 5;

int RunSimulate(const SimulateOptions& o, std::ostream& out, std::ostream& err) {
  auto fail = [&](const std::string& m) {
    err << "taut simulate: " << m << "\n";
    return 1;
  };
  model::Member member;
  if (Status s = LoadMemberFile(o.member_path, &member); !s.ok()) return fail(s.message);
  const model::Direction direction = ChooseDirection(member, o.direction);
  if (member.SensorCount(direction) == 0) {
    return fail(std::string("the member has no sensors in the ") + model::ToString(direction) +
                " plane: nothing to record");
  }
  const int sources = (o.initial_mode ? 1 : 0) + (o.impact.empty() ? 0 : 1) + (o.ambient_rms_n ? 1 : 0);
  if (sources != 1)
    return fail("give exactly one of --initial-mode (with --amplitude), --impact or --ambient");
  if (o.initial_mode && !o.amplitude_m) return fail("--initial-mode needs --amplitude (m)");

  model::ModalParameters p;
  p.axial_force_n = o.axial_force_n;
  p.bending_stiffness_nm2 = o.bending_stiffness_nm2;
  p.fixity_left = o.fixity_left;
  p.fixity_right = o.fixity_right;
  model::TransientOptions to;
  to.target_elements = o.elements;
  to.output_rate_hz = o.rate_hz;
  to.duration_s = o.duration_s;
  to.substeps = o.substeps;
  to.damping_ratio = o.damping;
  model::TransientLoads loads;
  std::vector<double> noise;
  if (!o.impact.empty()) {
    double x = 0.0, j = 0.0, tau = kDefaultContact_s;
    std::vector<std::string> parts;
    std::istringstream fields(o.impact);
    for (std::string part; std::getline(fields, part, ':');) parts.push_back(part);
    try {
      if (parts.size() < 2 || parts.size() > 3) throw std::invalid_argument("parts");
      size_t used = 0;
      x = std::stod(parts[0], &used);
      if (used != parts[0].size()) throw std::invalid_argument("x");
      j = std::stod(parts[1], &used);
      if (used != parts[1].size()) throw std::invalid_argument("j");
      if (parts.size() == 3) tau = std::stod(parts[2]);
    } catch (const std::exception&) {
      return fail("--impact \"" + o.impact +
                  "\": expected POSITION_M:IMPULSE_NS[:CONTACT_S], e.g. 2.1:1.5:0.004");
    }
    if (!(x > 0.0 && x < member.length_m)) return fail("--impact position must lie strictly inside the span");
    if (!(tau > 0.0 && tau < o.duration_s)) return fail("--impact contact duration must be > 0 s");
    // Half-sine pulse of area j: F(t) = (pi j / (2 tau)) sin(pi t / tau).
    loads.forces.push_back(
        {x, [j, tau](double t) {
           return t < tau ? std::numbers::pi * j / (2.0 * tau) * std::sin(std::numbers::pi * t / tau) : 0.0;
         }});
    to.substeps = std::max(to.substeps, static_cast<int>(std::ceil(kStepsPerContact / (tau * o.rate_hz))));
  }
  if (o.ambient_rms_n) {
    // Random forces, independent at each point and seeded: Gaussian values
    // at a quarter of the sampling rate, linearly interpolated in time.
    // The interpolation's sinc^4 roll-off keeps the excitation (and so the
    // response) below the record's Nyquist frequency, as a real record's
    // anti-alias filter would; white forces at the integration rate would
    // drive every mode of the mesh and fold their response into the band.
    const double force_rate = 0.25 * o.rate_hz;
    const size_t knots = static_cast<size_t>(std::ceil(o.duration_s * force_rate)) + 2;
    std::mt19937_64 rng(o.seed);
    std::normal_distribution<double> gauss(0.0, *o.ambient_rms_n);
    auto series = std::make_shared<std::vector<std::vector<double>>>(kAmbientForcePoints);
    for (auto& s : *series) {
      s.resize(knots);
      for (double& v : s) v = gauss(rng);
    }
    for (int i = 0; i < kAmbientForcePoints; ++i) {
      loads.forces.push_back(
          {member.length_m * (i + 1) / (kAmbientForcePoints + 1), [series, i, force_rate](double t) {
             const auto& s = (*series)[i];
             const double u = std::max(0.0, t * force_rate);
             const size_t k = std::min(s.size() - 2, static_cast<size_t>(u));
             const double frac = std::min(1.0, u - static_cast<double>(k));
             return (1.0 - frac) * s[k] + frac * s[k + 1];
           }});
    }
  }
  const model::TransientModel sim(member, direction, p, to);
  if (!sim.status().ok()) return fail(sim.status().message);
  if (o.initial_mode) {
    loads.initial_displacement = sim.ModeShape(*o.initial_mode, *o.amplitude_m);
    if (loads.initial_displacement.size() == 0)
      return fail("cannot compute mode " + std::to_string(*o.initial_mode));
  }
  model::TransientResult r;
  if (Status s = sim.Run(loads, &r); !s.ok()) return fail(s.message);

  std::ofstream file;
  std::ostream* os = &out;
  if (!o.output.empty()) {
    file.open(o.output);
    if (!file) return fail("cannot write " + o.output);
    os = &file;
  }
  std::ostream& csv = *os;
  csv << "# recorded_at=" << o.recorded_at << "\n";
  if (o.temperature_c) csv << "# temperature_c=" << *o.temperature_c << "\n";
  csv << "# units=m/s2\n";
  csv << "# excitation=" << (o.ambient_rms_n ? "ambient" : "impact") << "\n";
  csv << "time_s";
  for (const auto& c : r.channels) csv << "," << c;
  csv << "\n";
  char buf[64];
  for (int k = 0; k < r.acceleration_m_s2.rows(); ++k) {
    std::snprintf(buf, sizeof buf, "%.6f", k / r.sample_rate_hz);
    csv << buf;
    for (int c = 0; c < r.acceleration_m_s2.cols(); ++c) {
      std::snprintf(buf, sizeof buf, ",%.8g", r.acceleration_m_s2(k, c));
      csv << buf;
    }
    csv << "\n";
  }
  if (!csv) return fail("write error on the output");
  return 0;
}

}  // namespace

void RegisterSimulateCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<SimulateOptions>();
  CLI::App* cmd = app.add_subcommand(
      "simulate", "Nonlinear transient response of a member: accelerations at its sensors as a record CSV");
  cmd->add_option("--member", o->member_path, "member description (JSON)")
      ->required()
      ->check(CLI::ExistingFile);
  cmd->add_option("--axial-force", o->axial_force_n, "axial force N of the static state [N], tension > 0")
      ->required();
  cmd->add_option("--bending-stiffness", o->bending_stiffness_nm2, "EI [N m^2] (default: nominal)")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--fixity-left", o->fixity_left, "fixity factor of the left end")
      ->check(CLI::Range(0.0, 1.0));
  cmd->add_option("--fixity-right", o->fixity_right, "fixity factor of the right end")
      ->check(CLI::Range(0.0, 1.0));
  cmd->add_option("--direction", o->direction, "plane of vibration")
      ->check(CLI::IsMember({"vertical", "lateral"}));
  cmd->add_option("--initial-mode", o->initial_mode, "release from rest in linear mode k")
      ->check(CLI::Range(1, 20));
  cmd->add_option("--amplitude", o->amplitude_m, "largest initial displacement [m] for --initial-mode");
  cmd->add_option("--impact", o->impact,
                  "hammer blow POSITION_M:IMPULSE_NS[:CONTACT_S] from t = 0 (half-sine pulse, default 5 ms)");
  cmd->add_option("--ambient", o->ambient_rms_n,
                  "random forces of this RMS [N] at 5 points (ambient excitation)")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--seed", o->seed, "random seed for --ambient (default 1)");
  cmd->add_option("--duration", o->duration_s, "record length [s]")->required()->check(CLI::PositiveNumber);
  cmd->add_option("--rate", o->rate_hz, "sampling rate [Hz]")->required()->check(CLI::PositiveNumber);
  cmd->add_option("--damping", o->damping, "Rayleigh damping ratio at modes 1 and 2 (default 0)")
      ->check(CLI::Range(0.0, 0.5));
  cmd->add_option("--elements", o->elements, "finite elements (default 20)")->check(CLI::Range(2, 400));
  cmd->add_option("--substeps", o->substeps, "integration steps per sample (default 20)")
      ->check(CLI::Range(1, 64));
  cmd->add_option("--output", o->output, "CSV file to write (default: standard output)");
  cmd->add_option("--recorded-at", o->recorded_at, "recorded_at metadata (ISO 8601 UTC)");
  cmd->add_option("--temperature", o->temperature_c, "temperature_c metadata [C]");
  cmd->callback([o, ctx] { ctx->exit_code = RunSimulate(*o, *ctx->out, *ctx->err); });
}

}  // namespace taut::server
