#include "server/import_profile_json.h"

#include <cmath>
#include <fstream>
#include <set>
#include <sstream>

#include "server/iso_time.h"

namespace taut::server {

namespace {

using nlohmann::json;

struct ProfileError {
  std::string message;
};

[[noreturn]] void Fail(const std::string& path, const std::string& rule) {
  throw ProfileError{path + ": " + rule};
}

void OnlyKeys(const json& j, const std::string& path, const std::set<std::string>& keys) {
  if (!j.is_object()) Fail(path, "must be an object");
  for (const auto& [k, v] : j.items()) {
    if (!keys.count(k)) {
      std::string known;
      for (const auto& x : keys) known += (known.empty() ? "" : ", ") + x;
      Fail(path + "." + k, "unknown key (known: " + known + ")");
    }
  }
}

std::string Str(const json& j, const std::string& path) {
  if (!j.is_string()) Fail(path, "must be a string");
  return j.get<std::string>();
}

double Num(const json& j, const std::string& path) {
  if (!j.is_number() || !std::isfinite(j.get<double>())) Fail(path, "must be a finite number");
  return j.get<double>();
}

// "Z", "UTC" or a fixed offset "+hh:mm" / "-hh:mm" (the one ISO 8601 parser
// reads it from a date-time carrying it).
int OffsetMinutes(const std::string& zone, const std::string& path) {
  if (zone == "Z" || zone == "UTC") return 0;
  IsoTime t;
  if (!ParseIsoTime("2000-01-01T00:00:00" + zone, &t) || !t.has_zone)
    Fail(path,
         "\"" + zone +
             "\" must be \"UTC\", \"Z\" or a fixed offset such as \"+01:00\" (named zones are not read)");
  return t.offset_minutes;
}

void FromJson(const json& j, estimation::ImportProfile* p) {
  OnlyKeys(j, "$",
           {"delimiter", "decimal_mark", "skip_lines", "time", "sample_rate_hz", "units", "channels"});
  if (auto it = j.find("delimiter"); it != j.end()) {
    const std::string d = Str(*it, "$.delimiter");
    if (d == "," || d == ";") {
      p->delimiter = d[0];
    } else if (d == "\t" || d == "tab") {
      p->delimiter = '\t';
    } else {
      Fail("$.delimiter", "\"" + d + "\" must be \",\", \";\" or \"tab\"");
    }
  }
  if (auto it = j.find("decimal_mark"); it != j.end()) {
    const std::string d = Str(*it, "$.decimal_mark");
    if (d != "." && d != ",") Fail("$.decimal_mark", "\"" + d + "\" must be \".\" or \",\"");
    p->decimal_mark = d[0];
  }
  if (auto it = j.find("skip_lines"); it != j.end()) {
    if (!it->is_number_integer() || it->get<long long>() < 0 || it->get<long long>() > 1000)
      Fail("$.skip_lines", "must be an integer in 0..1000");
    p->skip_lines = it->get<int>();
  }
  if (auto it = j.find("time"); it != j.end()) {
    OnlyKeys(*it, "$.time", {"column", "kind", "time_zone"});
    if (auto c = it->find("column"); c != it->end()) p->time_column = Str(*c, "$.time.column");
    if (auto k = it->find("kind"); k != it->end()) {
      const std::string kind = Str(*k, "$.time.kind");
      if (kind == "seconds") {
        p->time = estimation::TimeColumn::kSeconds;
      } else if (kind == "milliseconds") {
        p->time = estimation::TimeColumn::kMilliseconds;
      } else if (kind == "iso8601") {
        p->time = estimation::TimeColumn::kIso8601;
      } else if (kind == "none") {
        p->time = estimation::TimeColumn::kNone;
      } else {
        Fail("$.time.kind", "\"" + kind + "\" must be seconds, milliseconds, iso8601 or none");
      }
    }
    if (auto z = it->find("time_zone"); z != it->end())
      p->utc_offset_minutes = OffsetMinutes(Str(*z, "$.time.time_zone"), "$.time.time_zone");
  }
  if (auto it = j.find("sample_rate_hz"); it != j.end()) {
    const double f = Num(*it, "$.sample_rate_hz");
    if (!(f > 0.0 && f <= 1e6)) Fail("$.sample_rate_hz", "must lie in (0, 1e6] Hz");
    p->sample_rate_hz = f;
  }
  if (p->time == estimation::TimeColumn::kNone && !p->sample_rate_hz)
    Fail("$.time.kind", "\"none\" needs \"sample_rate_hz\"");
  if (auto it = j.find("units"); it != j.end()) {
    const std::string u = Str(*it, "$.units");
    if (!estimation::KnownUnits(u)) Fail("$.units", "\"" + u + "\" must be m/s2, g, mg, V or mV");
    p->units = u;
  }
  if (auto it = j.find("channels"); it != j.end()) {
    if (!it->is_array()) Fail("$.channels", "must be an array");
    for (std::size_t i = 0; i < it->size(); ++i) {
      const std::string path = "$.channels[" + std::to_string(i) + "]";
      const json& c = (*it)[i];
      OnlyKeys(c, path, {"column", "channel", "scale", "offset"});
      estimation::ImportProfile::Channel ch;
      if (!c.contains("column")) Fail(path + ".column", "required");
      if (!c.contains("channel")) Fail(path + ".channel", "required");
      ch.column = Str(c["column"], path + ".column");
      ch.channel = Str(c["channel"], path + ".channel");
      if (c.contains("scale")) {
        ch.scale = Num(c["scale"], path + ".scale");
        if (ch.scale == 0.0) Fail(path + ".scale", "must not be 0");
      }
      if (c.contains("offset")) ch.offset = Num(c["offset"], path + ".offset");
      p->channels.push_back(ch);
    }
  }
}

}  // namespace

Status ParseImportProfile(const std::string& text, estimation::ImportProfile* profile) {
  *profile = estimation::ImportProfile{};
  json j;
  try {
    j = json::parse(text);
  } catch (const json::parse_error& e) {
    return Status::InvalidArgument(std::string("import profile: not JSON: ") + e.what());
  }
  try {
    FromJson(j, profile);
  } catch (const ProfileError& e) {
    return Status::InvalidArgument("import profile " + e.message);
  } catch (const json::exception& e) {
    return Status::InvalidArgument(std::string("import profile: ") + e.what());
  }
  return Status::Ok();
}

Status LoadImportProfileFile(const std::string& path, estimation::ImportProfile* profile) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::InvalidArgument(path + ": cannot open the import profile");
  std::ostringstream text;
  text << in.rdbuf();
  Status s = ParseImportProfile(text.str(), profile);
  if (!s.ok()) s.message = path + ": " + s.message;
  return s;
}

}  // namespace taut::server
