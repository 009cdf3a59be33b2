// Acceleration records: the docs/FORMATS.md section 2 CSV reader, the
// logger dialects it detects, and the record quality checks.
//
// A record is read in one streaming pass (a fixed-size read buffer, no copy
// of the file text), every rule of the format is checked while reading, and
// a failure returns Status::kInvalidArgument whose message names the line
// (1-based), the column where one applies (1-based, column 1 = the first
// column of the file) and the broken rule, e.g.
//   line 1207, column 3 (a2): cell "nan" is not a finite number
// Quality problems that leave the record usable (clipping, dropouts, a dead
// channel, drift, a low sampling rate, a single channel, time stamp jitter)
// become cautions in Record::cautions, never errors; what the reader
// detected about the file (dialect, skipped logger lines, calibration
// applied) is listed in Record::notes.
//
// Dialects detected from the file itself (docs/FORMATS.md section 2.1):
// separator ',' ';' or tab (from the header line); decimal comma where the
// separator is not ','; time column `time_s` (seconds), `time_ms`
// (milliseconds), an ISO 8601 date-time column (`time`, `timestamp`,
// `datetime`, `date_time`, `time_utc`; with "Z" or an offset), or none with
// a `# sample_rate_hz=` line; free-text logger lines above the header
// (skipped, at most kMaxFreeTextLines); UTF-8 BOM; CRLF. An ImportProfile
// covers files the detection cannot read.
//
// Units: samples are stored in m/s^2 whatever the file's `units`: g and mg
// with the standard gravity 9.80665 m/s^2 (ISO 80000-3); V and mV with each
// channel's sensitivity_mv_per_g from the member's sensor entry; the
// sensor's polarity (-1) flips the sign whatever the units. Times in s;
// temperature in degrees C.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <cstdint>
#include <iosfwd>
#include <optional>
#include <string>
#include <string_view>
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
// Lines of free text (logger noise) allowed above the header line.
inline constexpr int kMaxFreeTextLines = 20;
// Time stamps may jitter around the record's step by up to
// max(kTimeJitterFloor_s, kMaxStepDeviation x step): loggers round time
// stamps to 1 ms (at 512 Hz the step then alternates 1.953 / 1.954 ms, and a
// time stamp rounded to whole ms is off by up to 0.5 ms).
inline constexpr double kTimeJitterFloor_s = 0.5e-3;
// recorded_at may lie at most this far in the future of the reader's clock
// (clock skew between a gateway and the server; NTP keeps clocks within
// seconds, so 15 min is generous: common practice, not a standard), and not
// before 1900-01-01.
inline constexpr std::int64_t kRecordedAtFutureMargin_ms = 15 * 60 * 1000;
inline constexpr int kMinRecordedAtYear = 1900;
// Samples are stored as IEEE 754 binary32 (storage/repository.h, "f32le"):
// a sample whose magnitude in m/s^2 exceeds the largest binary32 would be
// stored as infinity, so the reader refuses it (no accelerometer reads
// 1e38 m/s^2: such a cell is a broken logger, not a measurement).
inline constexpr double kMaxSampleMagnitude_m_s2 = 3.4028234663852886e38;  // FLT_MAX

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

// The kind of a record's time column.
enum class TimeColumn {
  kSeconds,       // `time_s`
  kMilliseconds,  // `time_ms`
  kIso8601,       // ISO 8601 date-times with "Z" or an offset
  kNone,          // no time column: `# sample_rate_hz=` gives the rate
};

const char* ToString(TimeColumn t);

// A declarative description of a file the detection cannot read (or reads
// otherwise than wanted): docs/FORMATS.md section 2.3, read from JSON by
// server/import_profile_json.h. Every field is optional; what is set
// replaces the detection.
struct ImportProfile {
  std::optional<char> delimiter;     // ',', ';' or '\t'
  std::optional<char> decimal_mark;  // '.' or ','; ',' needs a delimiter other than ','
  int skip_lines = 0;                // lines skipped before anything else is read
  std::optional<TimeColumn> time;    // kind of the time column
  std::string time_column;           // its header name; "" = the first column
  // Offset of ISO 8601 times written without a zone [minutes east of UTC].
  std::optional<int> utc_offset_minutes;
  std::optional<double> sample_rate_hz;  // with time = kNone
  std::optional<std::string> units;      // as RecordReadOptions::units
  struct Channel {
    std::string column;   // header name in the file
    std::string channel;  // the member's sensor channel it feeds
    double scale = 1.0;   // value = cell x scale + offset, in the record's units
    double offset = 0.0;
  };
  // Empty: every column but the time column is a channel named by its
  // header. Else only these columns are read; the others are ignored.
  std::vector<Channel> channels;
};

struct Record {
  std::vector<std::string> channels;  // header order
  double sample_rate_hz = 0.0;        // from the time column: (n - 1) / (t_last - t_first)
  Eigen::MatrixXd samples;            // rows = samples, cols = channels (column-major), m/s^2
  double start_time_s = 0.0;          // time of the first row
  std::string recorded_at;            // ISO 8601 UTC ("2026-11-20T10:00:00Z") or ""
  std::optional<double> temperature_c;
  Excitation excitation = Excitation::kAmbient;
  std::string units = "m/s2";  // units of the file (m/s2, g, mg, V, mV); samples are always m/s^2
  TimeColumn time_column = TimeColumn::kSeconds;
  Cautions cautions;               // record quality cautions
  std::vector<std::string> notes;  // what the reader detected and applied, one sentence each

  double duration_s() const { return sample_rate_hz > 0 ? samples.rows() / sample_rate_hz : 0.0; }
};

struct RecordReadOptions {
  // Not owned; must outlive the read. When set, every channel must be one of
  // the member's sensors (a subset in any order is fine).
  const model::Member* member = nullptr;
  // Override: "m/s2", "g", "mg", "V" or "mV" (V and mV need `member`, whose
  // sensors give sensitivity_mv_per_g).
  std::optional<std::string> units;
  std::optional<double> temperature_c;     // override
  std::optional<Excitation> excitation;    // override
  std::optional<std::string> recorded_at;  // override, ISO 8601 with a zone
  const ImportProfile* profile = nullptr;  // not owned; must outlive the read
  // The reader's clock for the recorded_at bound [ms since the epoch];
  // 0 = the system clock. Only tests set it.
  std::int64_t now_unix_ms = 0;
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

// recorded_at rules (docs/FORMATS.md section 2): an ISO 8601 date-time with
// a zone ("Z" or an offset), not before kMinRecordedAtYear, at most
// kRecordedAtFutureMargin_ms after `now_unix_ms` (0 = the system clock). On
// success *utc is the instant as "YYYY-MM-DDTHH:MM:SS[.mmm]Z". The message
// starts with `where`.
Status CheckRecordedAt(std::string_view text, const std::string& where, std::int64_t now_unix_ms,
                       std::string* utc);

// True for the units a file may declare: m/s2, g, mg, V, mV.
bool KnownUnits(const std::string& units);

// Parses "ambient" / "impact"; false for anything else.
bool ParseExcitation(const std::string& text, Excitation* e);

}  // namespace taut::estimation
