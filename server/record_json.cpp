#include "server/record_json.h"

#include <algorithm>
#include <cmath>

#include "server/http_router.h"
#include "server/json_limits.h"
#include "server/safe_text.h"

namespace taut::server {

using nlohmann::json;

// Every channel must be a sensor of the member, each at most once (422).
// `path(c)` names channel c in a message.
void CheckChannels(const std::vector<std::string>& channels, const model::Member& member,
                   const std::function<std::string(std::size_t)>& path) {
  for (std::size_t c = 0; c < channels.size(); ++c) {
    const std::string& s = channels[c];
    const bool sensor = std::any_of(member.sensors.begin(), member.sensors.end(),
                                    [&](const model::Sensor& x) { return x.channel == s; });
    if (!sensor) {
      Fail(422, "unprocessable",
           path(c) + " = \"" + Excerpt(s) + "\": not a sensor channel of member " + member.id);
    }
    if (std::find(channels.begin(), channels.begin() + static_cast<std::ptrdiff_t>(c), s) !=
        channels.begin() + static_cast<std::ptrdiff_t>(c)) {
      Fail(422, "unprocessable", path(c) + " = \"" + Excerpt(s) + "\": channel listed twice");
    }
  }
}

// Builds the record from a JSON body (docs/API.md), checking the same rules
// as the CSV reader (FORMATS.md section 2) with JSON paths in the messages.
namespace {

// Samples read by the streaming parser: row-major values, the row count,
// and the first row whose width differs from the first row's (-1: none).
struct StreamedSamples {
  std::vector<double> values;
  std::int64_t rows = 0;
  std::int64_t width = -1;
  std::int64_t uneven_row = -1;
};

estimation::Record RecordFromParts(const json& j, const model::Member& member, StreamedSamples* streamed) {
  static const std::vector<std::string> kKeys = {"recorded_at",    "temperature_c", "units",  "excitation",
                                                 "sample_rate_hz", "channels",      "samples"};
  for (const auto& [key, value] : j.items()) {
    if (std::find(kKeys.begin(), kKeys.end(), key) == kKeys.end()) {
      Fail(422, "unprocessable",
           "$." + key +
               ": unknown key (known: recorded_at, temperature_c, units, "
               "excitation, sample_rate_hz, channels, samples)");
    }
  }
  estimation::Record r;
  if (!j.contains("sample_rate_hz") || !j["sample_rate_hz"].is_number() ||
      !(j["sample_rate_hz"].get<double>() > 0) || !std::isfinite(j["sample_rate_hz"].get<double>())) {
    Fail(422, "unprocessable", "$.sample_rate_hz: required, a number > 0");
  }
  r.sample_rate_hz = j["sample_rate_hz"].get<double>();
  if (!j.contains("channels") || !j["channels"].is_array() || j["channels"].empty()) {
    Fail(422, "unprocessable", "$.channels: required, a non-empty array of channel names");
  }
  for (std::size_t c = 0; c < j["channels"].size(); ++c) {
    const json& name = j["channels"][c];
    if (!name.is_string())
      Fail(422, "unprocessable", "$.channels[" + std::to_string(c) + "]: must be a string");
    r.channels.push_back(name.get<std::string>());
  }
  CheckChannels(r.channels, member, [](std::size_t c) { return "$.channels[" + std::to_string(c) + "]"; });
  if (static_cast<int>(r.channels.size()) > estimation::kMaxChannels) {
    Fail(422, "unprocessable",
         "$.channels: more than " + std::to_string(estimation::kMaxChannels) + " channels");
  }
  if (!j.contains("samples") || !j["samples"].is_array()) {
    Fail(422, "unprocessable", "$.samples: required, an array of rows (one value per channel)");
  }
  const std::int64_t nc = static_cast<std::int64_t>(r.channels.size());
  const std::int64_t n = streamed ? streamed->rows : static_cast<std::int64_t>(j["samples"].size());
  if (n * nc > estimation::kMaxCells) {
    Fail(422, "unprocessable", "$.samples: more than " + std::to_string(estimation::kMaxCells) + " cells");
  }
  const auto wrong_width = [&](std::int64_t i) {
    Fail(422, "unprocessable",
         "$.samples[" + std::to_string(i) + "]: must hold " + std::to_string(nc) +
             " numbers (one per channel)");
  };
  if (streamed) {
    if (n > 0 && streamed->width != nc) wrong_width(0);
    if (streamed->uneven_row >= 0) wrong_width(streamed->uneven_row);
    r.samples.resize(n, nc);
    for (std::int64_t i = 0; i < n; ++i) {
      for (std::int64_t c = 0; c < nc; ++c)
        r.samples(i, c) = streamed->values[static_cast<std::size_t>(i * nc + c)];
    }
    std::vector<double>().swap(streamed->values);  // the matrix holds them now
  } else {
    const json& rows = j["samples"];
    r.samples.resize(n, nc);
    for (std::int64_t i = 0; i < n; ++i) {
      const json& row = rows[i];
      if (!row.is_array() || static_cast<std::int64_t>(row.size()) != nc) wrong_width(i);
      for (std::int64_t c = 0; c < nc; ++c) {
        const json& v = row[c];
        if (!v.is_number() || !std::isfinite(v.get<double>())) {
          Fail(422, "unprocessable",
               "$.samples[" + std::to_string(i) + "][" + std::to_string(c) + "]: not a finite number");
        }
        r.samples(i, c) = v.get<double>();
      }
    }
  }
  if (n < estimation::kMinSamples || n / r.sample_rate_hz < estimation::kMinRecordDuration_s) {
    Fail(422, "unprocessable",
         "$.samples: " + std::to_string(n) + " samples at " + std::to_string(r.sample_rate_hz) +
             " Hz; a record needs at least " + std::to_string(estimation::kMinSamples) + " samples and " +
             std::to_string(static_cast<int>(estimation::kMinRecordDuration_s)) + " s");
  }
  if (j.contains("recorded_at")) {
    if (!j["recorded_at"].is_string())
      Fail(422, "unprocessable", "$.recorded_at: must be an ISO 8601 string");
    r.recorded_at = j["recorded_at"].get<std::string>();
  }
  if (j.contains("temperature_c") && !j["temperature_c"].is_null()) {
    if (!j["temperature_c"].is_number()) Fail(422, "unprocessable", "$.temperature_c: must be a number");
    r.temperature_c = j["temperature_c"].get<double>();
  }
  if (j.contains("units")) {
    const std::string u = j["units"].is_string() ? j["units"].get<std::string>() : "";
    if (u != "m/s2" && u != "g") Fail(422, "unprocessable", "$.units: must be \"m/s2\" or \"g\"");
    r.units = u;
    if (u == "g") r.samples *= estimation::kStandardGravity_m_s2;
  }
  if (j.contains("excitation")) {
    const std::string e = j["excitation"].is_string() ? j["excitation"].get<std::string>() : "";
    if (!estimation::ParseExcitation(e, &r.excitation)) {
      Fail(422, "unprocessable", "$.excitation: must be \"ambient\" or \"impact\"");
    }
  }
  return r;
}

// A SAX handler that builds the small keys of the record as a JSON object
// and streams "samples" straight into a flat vector: no DOM node per
// sample (a DOM costs about 30 times the body; issue 13 item 4). Nesting is
// bounded as everywhere (json_limits.h).
class RecordSax {
 public:
  explicit RecordSax(json* meta, StreamedSamples* samples) : meta_(meta), samples_(samples) {}

  bool null() { return Scalar(json(nullptr)); }
  bool boolean(bool v) { return Scalar(json(v)); }
  bool number_integer(json::number_integer_t v) { return Number(static_cast<double>(v), json(v)); }
  bool number_unsigned(json::number_unsigned_t v) { return Number(static_cast<double>(v), json(v)); }
  bool number_float(json::number_float_t v, const json::string_t&) { return Number(v, json(v)); }
  bool string(json::string_t& v) { return Scalar(json(v)); }
  bool binary(json::binary_t&) { return Scalar(json(nullptr)); }
  bool key(json::string_t& k) {
    if (depth_ == 1) key_ = k;
    return true;
  }
  bool start_object(std::size_t) {
    if (depth_ == 0) {
      ++depth_;
      return true;
    }
    if (InSamples()) return SampleError("not a finite number");
    if (depth_ == 1) (*meta_)[key_] = json::object();  // a wrong type, reported by the rules
    return Open();
  }
  bool end_object() { return Close(); }
  bool start_array(std::size_t) {
    if (depth_ == 0) return Fail400("the body must be a JSON object");
    if (depth_ == 1) {
      (*meta_)[key_] = json::array();
      if (key_ == "samples") in_samples_ = true;
      if (key_ == "channels") in_channels_ = true;
      return Open();
    }
    if (in_samples_ && depth_ == 2) {
      column_ = 0;
      return Open();
    }
    if (InSamples()) return SampleError("not a finite number");
    if (in_channels_ && depth_ == 2)
      (*meta_)["channels"].push_back(json::array());  // reported as not a string
    return Open();
  }
  bool end_array() {
    if (in_samples_ && depth_ == 3) {
      if (samples_->width < 0) samples_->width = column_;
      if (column_ != samples_->width && samples_->uneven_row < 0) samples_->uneven_row = samples_->rows;
      ++samples_->rows;
    }
    if (in_samples_ && depth_ == 2) in_samples_ = false;
    if (in_channels_ && depth_ == 2) in_channels_ = false;
    return Close();
  }
  bool parse_error(std::size_t position, const std::string&, const nlohmann::detail::exception& e) {
    std::string what = e.what();
    if (auto p = what.find("] "); p != std::string::npos) what = what.substr(p + 2);
    status_ = 400;
    std::string where = "$";
    if (InSamples()) {
      where = "$.samples[" + std::to_string(samples_->rows) + "][" + std::to_string(column_) + "]";
    } else if (depth_ >= 1 && !key_.empty()) {
      where = "$." + Excerpt(key_, 64);
    }
    error_ = where + ": not valid JSON at byte " + std::to_string(position) + " (" + Excerpt(what, 200) + ")";
    return false;
  }

  int status() const { return status_; }
  const std::string& error() const { return error_; }

 private:
  bool InSamples() const { return in_samples_ && depth_ >= 3; }
  bool Open() {
    if (++depth_ > kMaxJsonDepth)
      return Fail400("JSON nested deeper than " + std::to_string(kMaxJsonDepth) + " levels");
    return true;
  }
  bool Close() {
    --depth_;
    return true;
  }
  bool Fail400(const std::string& message) {
    status_ = 400;
    error_ = "the body: " + message;
    return false;
  }
  bool SampleError(const std::string& what) {
    status_ = 422;
    error_ = "$.samples[" + std::to_string(samples_->rows) + "][" + std::to_string(column_) + "]: " + what;
    return false;
  }
  bool Number(double v, json value) {
    if (in_samples_ && depth_ == 3) {
      if (!std::isfinite(v)) return SampleError("not a finite number");
      samples_->values.push_back(v);
      ++column_;
      return true;
    }
    return Scalar(std::move(value));
  }
  bool Scalar(json value) {
    if (depth_ == 0) return Fail400("the body must be a JSON object");
    if (in_samples_ && depth_ == 3) return SampleError("not a finite number");
    if (in_samples_ && depth_ == 2) {  // a row that is not an array
      samples_->uneven_row = samples_->uneven_row < 0 ? samples_->rows : samples_->uneven_row;
      ++samples_->rows;
      return true;
    }
    if (depth_ == 1) {
      (*meta_)[key_] = std::move(value);
    } else if (in_channels_ && depth_ == 2) {
      (*meta_)["channels"].push_back(std::move(value));
    }
    return true;
  }

  json* meta_;
  StreamedSamples* samples_;
  int depth_ = 0;
  std::string key_;
  bool in_samples_ = false;
  bool in_channels_ = false;  // directly inside the "channels" array
  std::int64_t column_ = 0;
  int status_ = 0;
  std::string error_;
};

}  // namespace

estimation::Record RecordFromJson(const json& j, const model::Member& member) {
  return RecordFromParts(j, member, nullptr);
}

estimation::Record ParseRecordJson(std::string_view body, const model::Member& member) {
  json meta = json::object();
  StreamedSamples samples;
  RecordSax sax(&meta, &samples);
  if (!json::sax_parse(body.begin(), body.end(), &sax)) {
    Fail(sax.status() == 0 ? 400 : sax.status(), sax.status() == 422 ? "unprocessable" : "bad-request",
         sax.error());
  }
  return RecordFromParts(meta, member, &samples);
}

}  // namespace taut::server
