// The data behind the dashboard's charts (docs/API.md "Dashboard"), computed
// from what storage holds: the spectrum of an estimate's record, the model
// mode shapes at the estimated parameters, the drift baseline and alert
// limits of a member, and the end-fixity history.
//
// Pure functions of loaded rows: the HTTP handlers (http_api.cpp) read the
// rows through the organisation-scoped repository, so scoping and 404s stay
// where every other route has them, and pass them here. Nothing here
// touches the database or the network.
//
// Units: SI with the unit in every key (docs/FORMATS.md); frequencies in Hz,
// spectra in (m/s^2)^2/Hz, axial force N > 0 in tension, EI in N m^2, times
// ISO 8601 UTC in the JSON.
#pragma once

#include <cstdint>
#include <functional>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "estimation/drift.h"
#include "model/member.h"
#include "model/status.h"
#include "storage/repository.h"

namespace taut::server {

// ---- spectrum (GET /v1/estimates/{id}/spectrum)

// Points of the first singular value sent to the browser: a 300 s record at
// 512 Hz has 4097 Welch lines, more than a chart a few hundred pixels wide
// can show; 800 keeps every feature of a 1000-pixel plot.
inline constexpr int kDefaultSpectrumPoints = 800;
inline constexpr int kMinSpectrumPoints = 16;
inline constexpr int kMaxSpectrumPoints = 4096;
// Identified peaks are marked at the largest s1 within this many lines of
// the identified frequency (the top of the peak the eye sees).
inline constexpr int kPeakMarkLines = 1;

// The first singular value s1(f) of the Welch cross-spectral density matrix
// of the record (the FDD spectrum of estimation/fdd.h, computed the way the
// identification does: linear trend removed, DefaultSegmentSamples, Hann,
// 50 % overlap), with the identified modes of the stored result marked on
// it. Lines from the first above 0 Hz to the Nyquist frequency (0 Hz is left
// out: every segment is de-meaned, so s1 there is noise on a log scale).
// When there are more lines than max_points, consecutive lines are grouped
// into buckets of k = ceil(lines / max_points) and each bucket is
// represented by its line of largest s1: a peak-preserving decimation that
// keeps real (frequency, s1) pairs, so no peak is lowered by averaging.
// Impact records are transformed whole (the identification uses the decay
// window only); the JSON says so.
// Preconditions: `record` is the estimate's record with its samples
// (storage::Repository::GetRecord), kMinSpectrumPoints <= max_points <=
// kMaxSpectrumPoints. Errors: kInvalidArgument for a record the Welch
// estimate cannot take (fewer than 16 samples).
Status EstimateSpectrumJson(const storage::Estimate& estimate, const storage::Record& record, int max_points,
                            nlohmann::json* out);

// ---- model shapes (GET /v1/estimates/{id}/model-shapes)

// Mesh of the shape curves: elements along the member (the modal model adds
// a node at every sensor). 60 elements give at least 20 nodes per half
// wave up to the third mode, a smooth curve at chart resolution.
inline constexpr int kShapeElements = 60;

// The model's mode shapes along the member at the estimate's parameters
// (N, EI, fixities of the stored result; the plane of the result) for
// orders 1..max order of the result's paired modes, and the measured shapes
// at the sensors of that plane. Scaling: the measured shape is the stored
// one (max |.| = 1); the model shape w(x) is multiplied by the least-squares
// factor a = sum(phi_i m_i) / sum(phi_i^2) over the sensors (phi the model
// at the sensors, m measured), so that the two sit on one axis and their
// difference is what the MAC measures (Allemang 2003).
// `member`: the description of the version the estimate was made with.
// Errors: kInvalidArgument when the stored result lacks the parameters;
// the model's errors (kBuckled, kNumerical) unchanged.
Status ModelShapesJson(const storage::Estimate& estimate, const model::Member& member, nlohmann::json* out);

// ---- drift baseline and limits (GET /v1/members/{id}/drift)

// The settings the drift rules run with for `member`: the stored per-member
// settings (JSON text from storage, nullptr = defaults) over the defaults,
// plus what the description gives (design force and the tension sense,
// nominal EI in `plane`). The same composition the job workers use.
Status EffectiveDriftSettings(const model::Member& member, const std::string* stored_json,
                              model::Direction plane, estimation::DriftSettings* settings);

// The series the drift rules take, from ForceHistory rows (time order).
std::vector<estimation::DriftPoint> DriftSeries(const std::vector<storage::Estimate>& history);

// Runs estimation::DetectDrift over the whole `history` (every estimate of
// the member, time order) and reports the baselines (temperature regression
// of force and EI), the absolute limits, and for every point with
// from_unix_ms <= measured_at < to_unix_ms its expected value at its
// temperature and the limits of the residual rule:
//   expected +- z_threshold sqrt(s_pred^2(T) + std^2)
// (the |z| = z_threshold boundary of estimation/drift.h item 3), so the
// chart shows where a point would count towards a "force-residual" alert.
// `settings_json`: the API form of the settings (DriftSettingsToJson) with
// "defaults" added by the caller. Errors: DetectDrift's.
Status MemberDriftJson(const model::Member& member, const estimation::DriftSettings& settings,
                       const nlohmann::json& settings_json, const std::vector<storage::Estimate>& history,
                       std::int64_t from_unix_ms, std::int64_t to_unix_ms, nlohmann::json* out);

// ---- end fixity history (GET /v1/members/{id}/fixity/history)

// {"estimate_id", "measured_at", "left": q, "right": q} with q the stored
// quantity ({"value", "std", "ci95"} or {"value", "fixed": true}) or null,
// from a Repository::FixityHistory row (SQLite picks end_fixity out of the
// stored result, so the long "modes" and "notice" are never read here).
nlohmann::json FixityPointJson(const storage::Repository::FixityRow& row);

}  // namespace taut::server
