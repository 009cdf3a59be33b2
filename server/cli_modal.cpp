// `taut modal`: modes identified from an acceleration record.
//
//   taut modal --record R.csv [--member M.json] [--band LO:HI] [--json]
//              [--units m/s2|g|mg|V|mV] [--profile P.json] [--excitation ambient|impact] [--max-modes K]
//
// Prints the identified modes (frequency, its std, damping, shape at each
// channel, MAC between the FDD and SSI-COV shapes), the cautions and the
// standing notice; --json prints the `modes` array of docs/FORMATS.md section 3
// plus `cautions` and `notice`. With a member that declares
// design_axial_force_n, modes get their bending `order` from the beam model
// at that force when the pairing is unambiguous (see AssignOrders).
#include <algorithm>
#include <cmath>
#include <iomanip>
#include <limits>
#include <nlohmann/json.hpp>
#include <ostream>
#include <sstream>

#include "estimation/cautions.h"
#include "estimation/fdd.h"
#include "estimation/modal_id.h"
#include "estimation/record.h"
#include "model/modal.h"
#include "server/cli.h"
#include "server/estimate_json.h"
#include "server/member_json.h"

namespace taut::server {

namespace {

// Pairing of identified modes with the design-force model: a mode takes the
// order of the model mode nearest in log frequency when that one is at
// least kOrderMargin times nearer (in |log f ratio|) than any other model
// mode, the shape MAC against the model shape at the sensors is at least
// kOrderMinMac (two channels or more), and no two modes claim one order.
// The design force may be far from today's force, hence a ratio rule rather
// than a fixed tolerance.
constexpr double kOrderMargin = 2.0;
constexpr double kOrderMinMac = 0.8;
constexpr int kExtraModelModes = 4;

struct ModalCliOptions {
  std::string record_path;
  std::string member_path;
  std::string band;
  std::string units;
  std::string profile_path;
  std::string excitation;
  int max_modes = 8;
  bool json = false;
};

bool ParseBand(const std::string& s, std::optional<double>* lo, std::optional<double>* hi) {
  const auto colon = s.find(':');
  if (colon == std::string::npos) return false;
  auto num = [](const std::string& t, std::optional<double>* v) {
    if (t.empty()) return true;
    try {
      std::size_t used = 0;
      double x = std::stod(t, &used);
      if (used != t.size() || !std::isfinite(x)) return false;
      *v = x;
      return true;
    } catch (...) {
      return false;
    }
  };
  return num(s.substr(0, colon), lo) && num(s.substr(colon + 1), hi);
}

// Fills mode.order where the pairing rule above holds; cautions otherwise.
void AssignOrders(const model::Member& member, estimation::ModalIdentification* id) {
  if (!member.design_axial_force_n) {
    id->cautions.push_back({"order-unassigned",
                            "the member declares no design_axial_force_n, so the identified "
                            "modes are not numbered against the beam model."});
    return;
  }
  // The plane: all record channels must sense the same one.
  std::optional<model::Direction> dir;
  for (const auto& ch : id->channels) {
    for (const auto& s : member.sensors) {
      if (s.channel != ch) continue;
      if (dir && *dir != s.direction) {
        id->cautions.push_back({"order-unassigned",
                                "the record mixes vertical and lateral sensors; modes are "
                                "not numbered."});
        return;
      }
      dir = s.direction;
    }
  }
  if (!dir || id->modes.empty()) return;
  model::ModalParameters p;
  p.axial_force_n = *member.design_axial_force_n;
  model::ModalResult mr;
  const int n_model = static_cast<int>(id->modes.size()) + kExtraModelModes;
  if (Status s = model::ComputeModes(member, *dir, p, n_model, &mr); !s.ok()) {
    id->cautions.push_back({"order-unassigned", "the beam model at the design force failed (" + s.message +
                                                    "); modes are not numbered."});
    return;
  }
  std::vector<int> claimed;
  bool all = true;
  for (auto& m : id->modes) {
    std::vector<double> d;
    for (const auto& mm : mr.modes) d.push_back(std::abs(std::log(m.frequency_hz / mm.frequency_hz)));
    const auto best = std::min_element(d.begin(), d.end()) - d.begin();
    double second = std::numeric_limits<double>::infinity();
    for (std::size_t k = 0; k < d.size(); ++k)
      if (static_cast<long>(k) != best) second = std::min(second, d[k]);
    bool ok = second >= kOrderMargin * d[static_cast<std::size_t>(best)];
    if (ok && id->channels.size() >= 2) {
      Eigen::VectorXd a(static_cast<Eigen::Index>(id->channels.size())), b(a.size());
      for (std::size_t c = 0; c < id->channels.size(); ++c) {
        a[static_cast<Eigen::Index>(c)] = m.shape[c];
        const auto it = std::find(mr.channels.begin(), mr.channels.end(), id->channels[c]);
        b[static_cast<Eigen::Index>(c)] =
            it == mr.channels.end()
                ? 0.0
                : mr.modes[static_cast<std::size_t>(best)].shape_at_sensors[it - mr.channels.begin()];
      }
      ok = estimation::Mac(a, b) >= kOrderMinMac;
    }
    const int order = mr.modes[static_cast<std::size_t>(best)].order;
    if (ok && std::find(claimed.begin(), claimed.end(), order) != claimed.end()) ok = false;
    if (ok) {
      m.order = order;
      claimed.push_back(order);
    } else {
      all = false;
    }
  }
  if (!all)
    id->cautions.push_back({"order-ambiguous",
                            "some modes could not be numbered unambiguously against the beam "
                            "model at the design force; they carry no order."});
}

nlohmann::json ToJson(const estimation::ModalIdentification& id, const estimation::Record& rec) {
  nlohmann::json j;
  j["channels"] = id.channels;
  j["sample_rate_hz"] = id.sample_rate_hz;
  j["duration_s"] = id.duration_s;
  j["excitation"] = estimation::ToString(rec.excitation);
  if (!rec.recorded_at.empty()) j["recorded_at"] = rec.recorded_at;
  if (rec.temperature_c) j["temperature_c"] = *rec.temperature_c;
  j["uncertainty_method"] = id.uncertainty_method;
  j["modes"] = nlohmann::json::array();
  for (const auto& m : id.modes) {
    nlohmann::json jm;
    if (m.order) jm["order"] = *m.order;
    jm["frequency_hz"] = m.frequency_hz;
    jm["frequency_std_hz"] = m.frequency_std_hz;
    jm["damping_ratio"] = m.damping_ratio;
    jm["damping_std"] = m.damping_std;
    nlohmann::json shape = nlohmann::json::object();
    for (std::size_t c = 0; c < id.channels.size(); ++c) shape[id.channels[c]] = m.shape[c];
    jm["shape"] = shape;
    if (m.mac_fdd_ssi) jm["mac_fdd_ssi"] = *m.mac_fdd_ssi;
    j["modes"].push_back(jm);
  }
  if (id.impact) {
    const auto& d = *id.impact;
    nlohmann::json ji = {{"blow_time_s", d.blow_time_s},
                         {"decay_start_s", d.decay_start_s},
                         {"decay_end_s", d.decay_end_s},
                         {"channel", d.channel},
                         {"mode_frequency_hz", d.mode_frequency_hz},
                         {"backbone", nlohmann::json::array()}};
    for (const auto& p : d.backbone)
      ji["backbone"].push_back({{"time_s", p.time_s},
                                {"amplitude_m_s2", p.amplitude_m_s2},
                                {"displacement_m", p.displacement_m},
                                {"frequency_hz", p.frequency_hz}});
    j["impact"] = ji;
  }
  j["cautions"] = CautionsToJson(id.cautions);
  j["notice"] = estimation::StandingNotice();
  return j;
}

void PrintTable(const estimation::ModalIdentification& id, const estimation::Record& rec,
                const std::string& path, std::ostream& out) {
  out << "record " << path << ": " << id.channels.size() << " channel" << (id.channels.size() == 1 ? "" : "s")
      << ", " << std::setprecision(6) << id.sample_rate_hz << " Hz, " << std::fixed << std::setprecision(1)
      << id.duration_s << " s, " << estimation::ToString(rec.excitation) << "\n";
  out << "frequency std: " << id.uncertainty_method << "\n\n";
  out << std::right << std::setw(5) << "order" << std::setw(13) << "freq_hz" << std::setw(10) << "std_hz"
      << std::setw(11) << "damping_%" << std::setw(8) << "std_%" << std::setw(9) << "MAC_F/S";
  for (const auto& c : id.channels) out << std::setw(9) << c;
  out << "\n";
  for (const auto& m : id.modes) {
    out << std::setw(5) << (m.order ? std::to_string(*m.order) : "-") << std::setw(13) << std::setprecision(4)
        << m.frequency_hz << std::setw(10) << m.frequency_std_hz << std::setw(11) << std::setprecision(3)
        << 100 * m.damping_ratio << std::setw(8) << 100 * m.damping_std << std::setw(9);
    if (m.mac_fdd_ssi) {
      out << std::setprecision(3) << *m.mac_fdd_ssi;
    } else {
      out << "-";
    }
    for (double v : m.shape) out << std::setw(9) << std::setprecision(3) << v;
    out << "\n";
  }
  if (id.modes.empty()) out << "  (no mode identified)\n";
  out << "\nshapes: real-normalised, largest entry +1; MAC_F/S: FDD against SSI-COV shape\n";
  if (id.impact) {
    const auto& d = *id.impact;
    out << "\nfree decay: blow at " << std::setprecision(3) << d.blow_time_s << " s, decay "
        << d.decay_start_s << ".." << d.decay_end_s << " s; instantaneous frequency of the "
        << std::setprecision(4) << d.mode_frequency_hz << " Hz mode on " << d.channel << ":\n";
    out << std::setw(10) << "time_s" << std::setw(16) << "ampl_m_s2" << std::setw(12) << "freq_hz"
        << "\n";
    for (const auto& p : d.backbone)
      out << std::setw(10) << std::setprecision(2) << p.time_s << std::setw(16) << std::setprecision(5)
          << p.amplitude_m_s2 << std::setw(12) << std::setprecision(4) << p.frequency_hz << "\n";
  }
  out << "\ncautions:";
  if (id.cautions.empty()) out << " none";
  out << "\n";
  for (const auto& c : id.cautions) out << "  [" << c.code << "] " << c.message << "\n";
  out << "\n" << estimation::StandingNotice() << "\n";
}

int RunModal(const ModalCliOptions& o, std::ostream& out, std::ostream& err) {
  model::Member member;
  const bool have_member = !o.member_path.empty();
  if (have_member) {
    if (Status s = LoadMemberFile(o.member_path, &member); !s.ok()) {
      err << "taut modal: " << s.message << "\n";
      return 1;
    }
  }
  estimation::ModalIdOptions mo;
  if (!o.band.empty() && !ParseBand(o.band, &mo.band_lo_hz, &mo.band_hi_hz)) {
    err << "taut modal: --band \"" << o.band << "\" must be LO:HI in Hz, e.g. 2:60\n";
    return 1;
  }
  mo.max_modes = o.max_modes;
  estimation::RecordReadOptions ro;
  if (have_member) ro.member = &member;
  if (!o.units.empty()) ro.units = o.units;
  if (!o.excitation.empty()) {
    estimation::Excitation e;
    estimation::ParseExcitation(o.excitation, &e);  // CLI11 checked the value
    ro.excitation = e;
  }
  estimation::Record rec;
  if (Status s = ReadRecordForCli(o.record_path, o.profile_path, ro, &rec, err, "taut modal"); !s.ok()) {
    err << "taut modal: " << s.message << "\n";
    return 1;
  }
  estimation::ModalIdentification id;
  if (Status s = estimation::IdentifyModes(rec, mo, &id); !s.ok()) {
    err << "taut modal: " << s.message << "\n";
    return 1;
  }
  if (have_member) AssignOrders(member, &id);
  if (o.json) {
    out << ToJson(id, rec).dump(2) << "\n";
  } else {
    PrintTable(id, rec, o.record_path, out);
  }
  return 0;
}

}  // namespace

void RegisterModalCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<ModalCliOptions>();
  CLI::App* cmd = app.add_subcommand("modal", "Modes (frequency, damping, shape) identified from a record");
  cmd->add_option("--record", o->record_path, "acceleration record (CSV, docs/FORMATS.md section 2)")
      ->required();
  cmd->add_option("--member", o->member_path, "member description (JSON): channels checked, modes numbered");
  cmd->add_option("--band", o->band, "frequency band LO:HI [Hz] (either side may be empty)");
  cmd->add_option("--units", o->units, "override the record's units")
      ->check(CLI::IsMember({"m/s2", "g", "mg", "V", "mV"}));
  cmd->add_option("--profile", o->profile_path, "import profile (JSON, docs/FORMATS.md section 2.3)")
      ->check(CLI::ExistingFile);
  cmd->add_option("--excitation", o->excitation, "override the record's excitation")
      ->check(CLI::IsMember({"ambient", "impact"}));
  cmd->add_option("--max-modes", o->max_modes, "at most this many modes (default 8)")
      ->check(CLI::Range(1, 32));
  cmd->add_flag("--json", o->json, "print JSON instead of a table");
  cmd->callback([o, ctx] { ctx->exit_code = RunModal(*o, *ctx->out, *ctx->err); });
}

}  // namespace taut::server
