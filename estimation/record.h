// Acceleration records: the docs/FORMATS.md section 2 CSV reader and the record
// quality checks.
//
// A record is read in one streaming pass (a fixed-size read buffer, no copy
// of the file text), every rule of the format is checked while reading, and
// a failure returns Status::kInvalidArgument whose message names the line
// (1-based), the column where one applies (1-based, column 1 = time_s) and
// the broken rule, e.g.
//   line 1207, column 3 (a2): cell "nan" is not a finite number
// Quality problems that leave the record usable (clipping, dropouts, a dead
// channel, drift, a low sampling rate, a single channel) become cautions in
// Record::cautions, never errors.
//
// Units: samples are stored in m/s^2 whatever the file's `units` (g is
// converted with the standard gravity 9.80665 m/s^2, ISO 80000-3); times in
// s; temperature in degrees C.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <cstdint>
#include <iosfwd>
#include <optional>
#include <string>
#include <vector>

#include "estimation/cautions.h"
#include "model/member.h"
#include "model/status.h"

namespace taut::estimation {

enum class Excitation {
  kAmbient,  // wind, traffic, people: output-only stationary response
  kImpact,   // a free decay after a hammer blow
};

const char* ToString(Excitation e);

// ---- Limits of the format (docs/FORMATS.md section 2) ----
inline constexpr int kMaxChannels = 64;
// Data cells = samples x channels (the time column is not counted).
inline constexpr std::int64_t kMaxCells = 50'000'000;
inline constexpr double kMinRecordDuration_s = 10.0;
inline constexpr std::int64_t kMinSamples = 1000;
// A row whose spacing from the previous one departs from the record's step
// by more than this share of a step is an error.
inline constexpr double kMaxStepDeviation = 0.01;
inline constexpr std::size_t kMaxChannelNameLength = 32;
// A line longer than this is an error (64 channels of 30-character numbers
// need about 2 kB): it protects the reader from a file without line breaks.
inline constexpr std::size_t kMaxLineBytes = 1 << 16;
// Plausible temperatures of a member or the air around it.
inline constexpr double kMinTemperature_c = -80.0;
inline constexpr double kMaxTemperature_c = 100.0;
// Standard gravity [m/s^2] for `units=g` (ISO 80000-3, CGPM 1901).
inline constexpr double kStandardGravity_m_s2 = 9.80665;

// ---- Quality checks (cautions) ----
// Clipping: a run of at least this many consecutive samples sitting exactly
// at the channel's extreme value (an analogue front end or ADC at its rail
// repeats the same code; a continuous signal practically never does).
inline constexpr int kMinClipRunSamples = 4;
// Dropout: a run of at least this many consecutive exact zeros.
inline constexpr int kMinDropoutRunSamples = 8;
// Dead channel: variance below this share of the largest channel variance
// (60 dB below), or exactly zero.
inline constexpr double kDeadChannelVarianceRatio = 1e-6;
// Drift: the variance of the means over consecutive blocks of
// kDriftBlock_s (content below about 1 / (2 kDriftBlock_s) Hz) exceeds this
// share of the channel variance. Bending modes of the members taut serves
// lie well above 0.25 Hz, so such content is sensor drift or rigid motion.
inline constexpr double kDriftBlock_s = 2.0;
inline constexpr double kDriftVarianceShare = 0.5;
// Sampling rate below which the higher bending modes of a typical tie
// (fundamental 5..30 Hz, 3-5 modes wanted) cannot be resolved: common
// practice, not a published figure.
inline constexpr double kLowSampleRate_hz = 100.0;

struct Record {
  std::vector<std::string> channels;  // header order
  double sample_rate_hz = 0.0;        // from the time column: (n - 1) / (t_last - t_first)
  Eigen::MatrixXd samples;            // rows = samples, cols = channels (column-major), m/s^2
  double start_time_s = 0.0;          // time of the first row
  std::string recorded_at;            // ISO 8601 UTC ("2026-11-20T10:00:00Z") or ""
  std::optional<double> temperature_c;
  Excitation excitation = Excitation::kAmbient;
  std::string units = "m/s2";  // units of the file ("m/s2" or "g"); samples are always m/s^2
  Cautions cautions;           // record quality cautions

  double duration_s() const { return sample_rate_hz > 0 ? samples.rows() / sample_rate_hz : 0.0; }
};

struct RecordReadOptions {
  // Not owned; must outlive the read. When set, every channel must be one of
  // the member's sensors (a subset in any order is fine).
  const model::Member* member = nullptr;
  std::optional<std::string> units;      // override: "m/s2" or "g"
  std::optional<double> temperature_c;   // override
  std::optional<Excitation> excitation;  // override
  // Cell limit (samples x channels), at most kMaxCells; only tests lower it.
  std::int64_t max_cells = kMaxCells;
};

// Reads the CSV at `path`. Errors are prefixed with the path. On error the
// record is unspecified.
Status ReadRecordCsv(const std::string& path, const RecordReadOptions& options, Record* record);

// As ReadRecordCsv from a stream (the HTTP upload body, tests).
Status ParseRecordCsv(std::istream& in, const RecordReadOptions& options, Record* record);

// The quality checks of the reader (clipping, dropouts, dead channel, drift,
// low rate, single channel), exposed for records built in code. Appends to
// record->cautions. Precondition: samples and sample_rate_hz set.
void CheckRecordQuality(Record* record);

// Parses "ambient" / "impact"; false for anything else.
bool ParseExcitation(const std::string& text, Excitation* e);

}  // namespace taut::estimation
