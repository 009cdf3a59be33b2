// One row per member for the portfolio of a structure and the
// organisation-wide triage (docs/API.md "Portfolio" and "Triage"): the
// latest estimate, the force ratio N / N_design with its 95 % interval, the
// change over 30 days with its interval, open alerts by tier, the last
// record time.
//
// Force ratio: r = N / N_design on the latest usable estimate, interval
// [lo / N_design, hi / N_design] from the estimate's 95 % interval (a
// monotone map of the interval; bounds swapped for a negative design
// force). For a tie a LOW ratio is the danger (slack, slip, loss of
// pretension); the rules compare it with min_force_share_of_design.
//
// 30-day change: dN = N(latest usable) - N(earliest usable estimate in the
// 30 days before it), with the standard deviation of a difference of two
// independent estimates, sqrt(s1^2 + s2^2), and the interval dN +-
// z_0.975 sqrt(s1^2 + s2^2) (any statistics text, e.g. Montgomery and
// Runger, Applied Statistics and Probability for Engineers, 2014, section
// 5.4, recalled from memory). Not temperature-compensated: the drift chart
// of the member is the compensated view.
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "storage/repository.h"

namespace taut::server {

inline constexpr std::int64_t kChangeWindow_ms = 30LL * 86'400'000;

// The row of `member` (a live member of `organisation_id`): {"member_id",
// "external_id", "structure_id", "design_axial_force_n", "latest",
// "force_ratio", "change_30d", "last_record_at", "open_alerts",
// "open_alerts_by_tier": {"alert", "watch"}, "open_rules",
// "critical_compression" (of the newest usable estimate, see below)}.
storage::StorageStatus MemberRowJson(storage::Repository& repo, storage::Id organisation_id,
                                     const storage::Member& member, nlohmann::json* out);

// Worst first: more open alerts of tier "alert", then of tier "watch",
// then the lower top of the force-ratio interval (members without a ratio
// after those with one), then the external id.
void SortWorstFirst(std::vector<nlohmann::json>* rows);

// Critical compression N_cr of the member at an estimate (the Euler load
// with its end restraint, model::ModalModel::CriticalCompression) with an
// interval: N_cr rises monotonically with EI and with each end's rotational
// restraint (Timoshenko and Gere, Theory of Elastic Stability, 1961,
// chapter 2, bars with elastically restrained ends), so the interval is
// N_cr at the lower and at the upper ends of the parameters' intervals.
// Each free parameter (EI and each end fixity not held by the description)
// is taken at +- z std with z = Phi^-1(1 - 0.05 / (2 k)) for k free
// parameters (Bonferroni: all k inside together with probability >= 95 %,
// so N_cr is inside with at least that probability): z = 1.959964,
// 2.241403, 2.393980 for k = 1, 2, 3 (scipy.stats.norm.ppf). EI bounds are
// kept > 0 and fixities in [0, 1]. null when the result lacks the values
// or the model cannot be solved.
// {"value_n", "ci95_n": [lo, hi], "free_parameters": k, "estimate_id"}.
nlohmann::json CriticalCompressionJson(const std::string& description_json,
                                       const storage::Estimate& estimate);

// CSV columns of a row (portfolio and triage exports), units in the names.
std::vector<std::string> MemberRowCsvHeader();
std::vector<std::string> MemberRowCsv(const nlohmann::json& row, const std::string& structure_name);

}  // namespace taut::server
