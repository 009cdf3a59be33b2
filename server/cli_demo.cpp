// `taut demo`: the whole job on an invented portfolio, end to end through
// the service, as a monitoring team would run it.
//
// 1. A temporary SQLite file (or --db), an organisation and two tokens
//    (admin, and upload for the "gateway").
// 2. `taut serve` in this process on a loopback port, with its workers,
//    and a webhook receiver on another loopback port.
// 3. Over HTTP: two invented structures (a covered market hall with six
//    tie-rods and a footbridge with four hangers) and their members.
// 4. `days` of records per member, two a day, simulated with the member
//    model (model/ambient_synthesis.h) at a force that follows the
//    temperature; one hanger slowly loses force from day 18. Uploaded over
//    HTTP like a gateway (CSV body, Idempotency-Key).
// 5. Waits for the jobs, then prints each structure's portfolio (the
//    /v1/structures/{id}/portfolio answer, with the simulated truth beside
//    the estimate), the alerts and the webhook deliveries.
//
// Every site, member and reading here is invented.
#include <stdlib.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <iomanip>
#include <iostream>
#include <mutex>
#include <nlohmann/json.hpp>
#include <numbers>
#include <optional>
#include <ostream>
#include <sstream>
#include <thread>

#include "estimation/cautions.h"
#include "model/ambient_synthesis.h"
#include "server/auth.h"
#include "server/cli.h"
#include "server/http_api.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "server/record_csv.h"
#include "server/worker.h"
#include "storage/migrations.h"
#include "storage/repository.h"

// After Eigen: glibc's <resolv.h>, pulled in by httplib, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;

// ---------------------------------------------------------------- scenario

// One invented member and its simulated behaviour: N(t) = N_ref * (1 -
// loss(t)) - k_T (T(t) - T_ref), fixities constant.
struct DemoMember {
  std::string structure;  // key into the structures below
  json description;       // docs/FORMATS.md section 1
  model::Direction plane;
  double force_ref_n;
  double force_per_kelvin_n;  // k_T: thermal force change of a partly restrained member
  double fixity_left, fixity_right;
  std::optional<double> loss_start_day;  // slow loss from this day on
  double loss_per_day_share = 0;         // of force_ref_n per day
};

struct DemoStructure {
  std::string key, name, description;
  double mean_temperature_c, daily_swing_c;  // T = mean + swing sin(2 pi t / 1 day) + weather
};

const std::vector<DemoStructure>& Structures() {
  static const std::vector<DemoStructure> s = {
      {"hall", "Vennaby covered market hall",
       "Invented: a 1890s cast-iron market hall; six wrought-steel tie-rods hold the thrust of the roof "
       "arches.",
       9.0, 3.5},
      {"bridge", "Oskerton Lane footbridge",
       "Invented: a tied-arch footbridge over a railway cutting; four steel hangers carry the deck.", 6.0,
       8.0},
  };
  return s;
}

json Sensor(const std::string& channel, double x_m, const char* direction) {
  return {{"channel", channel}, {"position_m", x_m}, {"mass_kg", 0.04}, {"direction", direction}};
}

std::vector<DemoMember> Members() {
  std::vector<DemoMember> out;
  // Tie-rods: 10.4 m between the arch springings, 34 mm, three vertical
  // accelerometers near the quarter points.
  const double tie_force[6] = {41e3, 44e3, 39e3, 46e3, 42e3, 37e3};
  const double tie_fix[6][2] = {{0.30, 0.45}, {0.55, 0.40}, {0.25, 0.35},
                                {0.50, 0.60}, {0.40, 0.30}, {0.35, 0.50}};
  for (int i = 0; i < 6; ++i) {
    const std::string id = "hall-tie-" + std::to_string(i + 1);
    json d = {
        {"id", id},
        {"length_m", 10.4},
        {"inclination_deg", 0.0},
        {"section", {{"shape", "circle"}, {"diameter_m", 0.034}}},
        {"material", {{"elastic_modulus_pa", 1.95e11}, {"density_kg_m3", 7750}}},
        {"ends",
         {{"left", {{"rotation", "elastic"}}}, {"right", {{"rotation", "elastic"}}}, {"axial", "fixed"}}},
        {"sensors", json::array({Sensor("v1", 2.5, "vertical"), Sensor("v2", 4.9, "vertical"),
                                 Sensor("v3", 7.6, "vertical")})},
        {"design_axial_force_n", 45000}};
    out.push_back({"hall", d, model::Direction::kVertical, tie_force[i], 260, tie_fix[i][0], tie_fix[i][1],
                   std::nullopt, 0.0});
  }
  // Hangers: vertical 36 mm bars, three lateral accelerometers.
  const double hanger_length[4] = {6.2, 7.4, 7.4, 6.2};
  const double hanger_force[4] = {84e3, 90e3, 88e3, 83e3};
  for (int i = 0; i < 4; ++i) {
    const std::string id = "bridge-hanger-" + std::to_string(i + 1);
    const double L = hanger_length[i];
    json d = {
        {"id", id},
        {"length_m", L},
        {"inclination_deg", 90.0},
        {"section", {{"shape", "circle"}, {"diameter_m", 0.036}}},
        {"material", {{"elastic_modulus_pa", 2.05e11}, {"density_kg_m3", 7850}}},
        {"ends",
         {{"left", {{"rotation", "elastic"}}}, {"right", {{"rotation", "elastic"}}}, {"axial", "fixed"}}},
        {"sensors", json::array({Sensor("h1", 0.22 * L, "lateral"), Sensor("h2", 0.45 * L, "lateral"),
                                 Sensor("h3", 0.75 * L, "lateral")})},
        {"design_axial_force_n", 95000}};
    DemoMember m{"bridge",     d,  model::Direction::kLateral, hanger_force[i], 650, 0.35, 0.55,
                 std::nullopt, 0.0};
    if (i == 2) {  // the hanger that slowly loses force: 1.2 % a day from day 18
      m.loss_start_day = 18;
      m.loss_per_day_share = 0.012;
    }
    out.push_back(m);
  }
  return out;
}

double Temperature(const DemoStructure& s, double t_days) {
  // Daily cycle (warmest mid-afternoon) and a slower weather swing.
  return s.mean_temperature_c + s.daily_swing_c * std::sin(2 * std::numbers::pi * (t_days - 0.375)) +
         3.0 * std::sin(2 * std::numbers::pi * t_days / 9.0);
}

double TrueForce(const DemoMember& m, double t_days, double temperature_c, double mean_temperature_c) {
  double loss = 0;
  if (m.loss_start_day && t_days > *m.loss_start_day)
    loss = m.loss_per_day_share * (t_days - *m.loss_start_day);
  return m.force_ref_n * (1 - loss) - m.force_per_kelvin_n * (temperature_c - mean_temperature_c);
}

// -------------------------------------------------------------- the run

struct DemoOptions {
  int days = 30;
  int per_day = 2;
  double record_s = 60;
  std::string db_path;  // "" = temporary, removed at the end
  bool serve = false;   // keep serving after the demo
  std::string listen_host = "127.0.0.1";
  int workers = 2;
};

std::string Fixed(double v, int decimals) {
  std::ostringstream os;
  os << std::fixed << std::setprecision(decimals) << v;
  return os.str();
}

// Reads a JSON answer; a failed call ends the demo with its message.
json Answer(const httplib::Result& r, int expected, const std::string& what) {
  if (!r) throw std::runtime_error(what + ": " + httplib::to_string(r.error()));
  if (r->status != expected) {
    throw std::runtime_error(what + ": HTTP " + std::to_string(r->status) + " " + r->body);
  }
  return r->body.empty() ? json::object() : json::parse(r->body);
}

void PrintPortfolio(std::ostream& out, const json& p, const std::map<std::string, double>& truth) {
  out << "\n" << p["structure"]["name"].get<std::string>() << "\n";
  out << "  " << std::left << std::setw(17) << "member" << std::right << std::setw(9) << "force kN"
      << std::setw(19) << "95 % interval kN" << std::setw(10) << "true kN" << std::setw(8) << "N/Nd"
      << std::setw(10) << "EI N m2" << std::setw(22) << "last record" << std::setw(8) << "alerts"
      << "\n";
  for (const auto& m : p["members"]) {
    const std::string id = m["external_id"];
    out << "  " << std::left << std::setw(17) << id << std::right;
    if (m["latest"].is_null()) {
      out << std::setw(9) << "-"
          << "  (no estimate yet)\n";
      continue;
    }
    const json& l = m["latest"];
    const std::string interval = "[" + Fixed(l["ci95_n"][0].get<double>() / 1e3, 1) + ", " +
                                 Fixed(l["ci95_n"][1].get<double>() / 1e3, 1) + "]";
    out << std::setw(9) << Fixed(l["axial_force_n"].get<double>() / 1e3, 1) << std::setw(19) << interval
        << std::setw(10) << (truth.count(id) ? Fixed(truth.at(id) / 1e3, 1) : "-") << std::setw(8)
        << (m["force_ratio"].is_null() ? "-" : Fixed(m["force_ratio"]["value"].get<double>(), 2))
        << std::setw(10)
        << (l["bending_stiffness_nm2"].is_null() ? "-" : Fixed(l["bending_stiffness_nm2"].get<double>(), 0))
        << std::setw(22) << m["last_record_at"].get<std::string>() << std::setw(8)
        << m["open_alerts"].get<int>() << "\n";
  }
}

int RunDemo(const DemoOptions& o, std::ostream& out, std::ostream& err) {
  namespace fs = std::filesystem;
  std::string dir;
  std::string db_path = o.db_path;
  if (db_path.empty()) {
    std::string tmpl = (fs::temp_directory_path() / "taut-demo-XXXXXX").string();
    if (!mkdtemp(tmpl.data())) {
      err << "taut demo: cannot create a temporary directory in " << fs::temp_directory_path() << "\n";
      return 1;
    }
    dir = tmpl;
    db_path = dir + "/taut.db";
  } else if (fs::exists(db_path)) {
    err << "taut demo: " << db_path << " exists; give a new file (the demo fills an empty database)\n";
    return 1;
  }
  struct Cleanup {
    std::string dir;
    ~Cleanup() {
      if (!dir.empty()) fs::remove_all(dir);
    }
  } cleanup{dir};

  // 1. Organisation and tokens (what `taut token create` does).
  std::string admin, gateway, viewer;
  {
    storage::Database db;
    if (storage::StorageStatus s = storage::OpenAndMigrate(db, db_path); !s.ok()) {
      err << "taut demo: " << db_path << ": " << s.message << "\n";
      return 1;
    }
    storage::Repository repo(db);
    storage::Id org = 0;
    const std::int64_t now = NowUnixMs();
    if (!repo.CreateOrganisation("Vennaby Borough Estates (invented)", now, &org).ok() ||
        !IssueToken(repo, org, storage::Role::kAdmin, "demo admin", now, &admin).ok() ||
        !IssueToken(repo, org, storage::Role::kUpload, "demo gateway", now, &gateway).ok() ||
        !IssueToken(repo, org, storage::Role::kRead, "demo viewer", now, &viewer).ok()) {
      err << "taut demo: cannot set up the organisation in " << db_path << "\n";
      return 1;
    }
  }

  // 2. The service and a webhook receiver, both on loopback.
  Metrics metrics;
  WorkerOptions wo;
  wo.db_path = db_path;
  wo.workers = o.workers;
  wo.poll_interval = std::chrono::milliseconds(200);
  // The demo's own webhook receiver listens on loopback, which the service
  // refuses for webhooks unless allowed (webhook_policy.h).
  Cidr loopback;
  ParseCidr("127.0.0.0/8", &loopback);
  wo.webhook_policy.allow.push_back(loopback);
  WorkerPool workers(wo, &metrics);
  ServeOptions so;
  so.db_path = db_path;
  so.host = o.listen_host;
  so.metrics = &metrics;
  so.on_job_queued = [&workers] { workers.Notify(); };
  so.webhook_policy = wo.webhook_policy;
  ApiServer api(so);
  if (Status s = api.Start(); !s.ok()) {
    err << "taut demo: " << s.message << "\n";
    return 1;
  }
  if (Status s = workers.Start(); !s.ok()) {
    err << "taut demo: " << s.message << "\n";
    return 1;
  }
  httplib::Server receiver;
  std::mutex hook_mu;
  std::vector<json> deliveries;
  receiver.Post("/alerts", [&](const httplib::Request& req, httplib::Response& res) {
    std::lock_guard<std::mutex> lock(hook_mu);
    deliveries.push_back(json::parse(req.body, nullptr, false));
    res.status = 204;
  });
  const int hook_port = receiver.bind_to_any_port("127.0.0.1");
  std::thread hook_thread([&] { receiver.listen_after_bind(); });
  struct StopReceiver {
    httplib::Server& s;
    std::thread& t;
    ~StopReceiver() {
      s.stop();
      if (t.joinable()) t.join();
    }
  } stop_receiver{receiver, hook_thread};

  const std::string base = "http://" + o.listen_host + ":" + std::to_string(api.port());
  out << "taut demo: an invented portfolio, " << o.days
      << " days of simulated records, through the HTTP API\n"
      << "  database  " << db_path << (dir.empty() ? "" : " (temporary)") << "\n"
      << "  service   " << base << "/v1 (" << o.workers << " workers)\n";
  try {
    httplib::Client as_admin(o.listen_host, api.port());
    as_admin.set_default_headers({{"Authorization", "Bearer " + admin}});
    httplib::Client as_gateway(o.listen_host, api.port());
    as_gateway.set_default_headers({{"Authorization", "Bearer " + gateway}});
    as_gateway.set_read_timeout(60, 0);

    // 3. Structures, members, the webhook.
    std::map<std::string, std::int64_t> structure_id;
    for (const auto& s : Structures()) {
      structure_id[s.key] = Answer(
          as_admin.Post("/v1/structures", json{{"name", s.name}, {"description", s.description}}.dump(),
                        "application/json"),
          201, "create structure " + s.name)["id"];
    }
    const std::vector<DemoMember> members = Members();
    std::vector<std::int64_t> member_id;
    std::vector<model::Member> parsed;
    for (const auto& m : members) {
      member_id.push_back(
          Answer(as_admin.Post("/v1/structures/" + std::to_string(structure_id[m.structure]) + "/members",
                               m.description.dump(), "application/json"),
                 201, "create member " + m.description["id"].get<std::string>())["id"]);
      model::Member pm;
      if (Status s = MemberFromJson(m.description, &pm, MemberReadOptions{.require_id = true}); !s.ok()) {
        throw std::runtime_error(s.message);
      }
      parsed.push_back(pm);
      // Per-member drift settings: a baseline of the first 10 days (the
      // default of 10 estimates would be 5 days here; a longer baseline
      // estimates the scatter better and raises fewer false alarms).
      Answer(as_admin.Put("/v1/members/" + std::to_string(member_id.back()) + "/drift-settings",
                          json{{"baseline_count", 10 * o.per_day}}.dump(), "application/json"),
             200, "drift settings of " + pm.id);
    }
    Answer(as_admin.Post("/v1/webhooks",
                         json{{"url", "http://127.0.0.1:" + std::to_string(hook_port) + "/alerts"}}.dump(),
                         "application/json"),
           201, "create webhook");
    out << "  portfolio " << Structures().size() << " structures, " << members.size()
        << " members; webhook receiver on 127.0.0.1:" << hook_port << "\n";

    // 4. Records: `per_day` a day per member over `days`, ending now.
    const auto t_start = std::chrono::steady_clock::now();
    const std::int64_t day_ms = 86400000;
    const std::int64_t end_ms = NowUnixMs() / day_ms * day_ms;  // today 00:00 UTC
    const std::int64_t start_ms = end_ms - o.days * day_ms;
    const int total = o.days * o.per_day * static_cast<int>(members.size());
    std::vector<std::int64_t> jobs;
    std::map<std::string, double> last_truth;
    int sent = 0;
    out << "  simulating and uploading " << total << " records of " << Fixed(o.record_s, 0) << " s ..."
        << std::flush;
    for (int d = 0; d < o.days; ++d) {
      for (int k = 0; k < o.per_day; ++k) {
        // Records at 05:40 UTC and then every 24 / per_day hours, so that
        // the daily temperature cycle is sampled at different phases.
        const double t_days = d + (5.0 + 2.0 / 3.0 + k * 24.0 / o.per_day) / 24.0;
        const std::int64_t at_ms = start_ms + static_cast<std::int64_t>(std::llround(t_days * day_ms));
        for (std::size_t i = 0; i < members.size(); ++i) {
          const DemoMember& m = members[i];
          const DemoStructure& s =
              *std::find_if(Structures().begin(), Structures().end(),
                            [&](const DemoStructure& x) { return x.key == m.structure; });
          const double temp = Temperature(s, t_days);
          model::ModalParameters truth;
          truth.axial_force_n = TrueForce(m, t_days, temp, s.mean_temperature_c);
          truth.fixity_left = m.fixity_left;
          truth.fixity_right = m.fixity_right;
          model::AmbientSpec spec;
          spec.duration_s = o.record_s;
          spec.sample_rate_hz = 256;
          spec.modes = 5;
          spec.damping_ratio = 0.008;
          spec.rms_m_s2 = 0.01;
          spec.seed = static_cast<unsigned>(1000 * i + 10 * d + k + 1);
          std::vector<std::string> channels;
          Eigen::MatrixXd a;
          if (Status st = model::SynthesizeAmbient(parsed[i], m.plane, truth, spec, &channels, &a);
              !st.ok()) {
            throw std::runtime_error("simulating " + parsed[i].id + ": " + st.message);
          }
          RecordCsvHeader header;
          header.recorded_at = FormatIsoUtc(at_ms);
          header.temperature_c = std::round(temp * 10) / 10;  // a gateway's 0.1 C sensor
          const std::string csv = FormatRecordCsv(
              header, channels, spec.sample_rate_hz, a.rows(),
              [&](std::int64_t r, std::size_t c) { return a(r, static_cast<Eigen::Index>(c)); });
          const std::string key = parsed[i].id + "@" + header.recorded_at;
          const json ans = Answer(as_gateway.Post("/v1/members/" + std::to_string(member_id[i]) + "/records",
                                                  {{"Idempotency-Key", key}}, csv, "text/csv"),
                                  202, "upload " + key);
          jobs.push_back(ans["job_id"]);
          last_truth[parsed[i].id] = truth.axial_force_n;
          if (++sent % std::max(1, total / 10) == 0) out << " " << sent << std::flush;
        }
      }
    }
    out << "\n";

    // 5. Wait for the identifications.
    int done = 0, failed = 0;
    std::size_t next = 0;
    out << "  identifying ..." << std::flush;
    int reported = 0;
    while (next < jobs.size()) {
      const json j = Answer(as_admin.Get("/v1/jobs/" + std::to_string(jobs[next])), 200, "job");
      const std::string st = j["state"];
      if (st == "done" || st == "failed") {
        (st == "done" ? done : failed) += 1;
        ++next;
        if ((done + failed) / std::max(1, total / 10) > reported) {
          reported = (done + failed) / std::max(1, total / 10);
          out << " " << done + failed << std::flush;
        }
        continue;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(100));
    }
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count();
    out << "\n  " << done << " estimates, " << failed << " failed jobs, " << Fixed(seconds, 1) << " s\n";

    // Drift checks and webhook deliveries follow each estimate; give the
    // last ones a moment (bounded).
    for (int k = 0; k < 50; ++k) {
      const json pending = Answer(as_admin.Get("/v1/alerts?state=open"), 200, "alerts")["alerts"];
      std::size_t got = 0;
      {
        std::lock_guard<std::mutex> lock(hook_mu);
        got = deliveries.size();
      }
      if (got >= pending.size()) break;
      std::this_thread::sleep_for(std::chrono::milliseconds(100));
    }

    // 6. The engineer's view.
    for (const auto& s : Structures()) {
      PrintPortfolio(
          out,
          Answer(as_admin.Get("/v1/structures/" + std::to_string(structure_id[s.key]) + "/portfolio"), 200,
                 "portfolio"),
          last_truth);
    }
    out << "  (true kN: the force the records were simulated with; N/Nd: force ratio, force / design force; "
           "low is the danger for a tie)\n";
    const json alerts = Answer(as_admin.Get("/v1/alerts"), 200, "alerts")["alerts"];
    out << "\nAlerts (" << alerts.size() << ")\n";
    std::map<std::int64_t, std::string> names;
    for (std::size_t i = 0; i < members.size(); ++i) names[member_id[i]] = parsed[i].id;
    for (const auto& a : alerts) {
      out << "  #" << a["id"].get<std::int64_t>() << " " << a["state"].get<std::string>() << "  "
          << names[a["member_id"].get<std::int64_t>()] << "  " << a["rule"].get<std::string>() << "  raised "
          << a["raised_at"].get<std::string>() << "\n     " << a["message"].get<std::string>() << "\n";
      if (a["evidence"].contains("points") && !a["evidence"]["points"].empty()) {
        const json& p = a["evidence"]["points"].back();
        out << "     evidence: estimate at " << p["measured_at"].get<std::string>();
        if (p.contains("z")) out << ", z = " << Fixed(p["z"].get<double>(), 2);
        out << "\n";
      }
    }
    {
      std::lock_guard<std::mutex> lock(hook_mu);
      out << "Webhook deliveries received: " << deliveries.size() << "\n";
    }
    out << "\n" << estimation::StandingNotice() << "\n";
    if (o.serve) {
      out << "\nServing " << base << "/v1 and the dashboard at " << base
          << "/ui/ until Ctrl-C. Tokens (shown once):\n  admin   " << admin << "\n  gateway " << gateway
          << "\n  viewer  " << viewer << std::endl;
      WaitForStopSignal();
    }
  } catch (const std::exception& e) {
    err << "taut demo: " << e.what() << "\n";
    api.Stop();
    workers.Stop();
    return 1;
  }
  api.Stop();
  workers.Stop();
  return 0;
}

}  // namespace

void RegisterDemoCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<DemoOptions>();
  CLI::App* cmd = app.add_subcommand(
      "demo", "Run the whole job on an invented portfolio: service, simulated uploads, estimates, alerts");
  cmd->add_option("--days", o->days, "days of records to simulate")
      ->check(CLI::Range(1, 365))
      ->capture_default_str();
  cmd->add_option("--per-day", o->per_day, "records per member and day")
      ->check(CLI::Range(1, 24))
      ->capture_default_str();
  cmd->add_option("--record-length", o->record_s, "length of each record [s]")
      ->check(CLI::Range(30.0, 600.0))
      ->capture_default_str();
  cmd->add_option("--db", o->db_path,
                  "keep the database in this new file (default: a temporary file, removed)");
  cmd->add_option("--workers", o->workers, "identification worker threads")
      ->check(CLI::Range(1, 64))
      ->capture_default_str();
  cmd->add_flag("--serve", o->serve, "keep serving the API after the demo (prints the tokens; Ctrl-C stops)");
  cmd->callback([o, ctx] {
    // Stop signals are taken by WaitForStopSignal; block them before any
    // thread starts so that every thread inherits the mask.
    if (o->serve) BlockStopSignals();
    ctx->exit_code = RunDemo(*o, *ctx->out, *ctx->err);
  });
}

}  // namespace taut::server
