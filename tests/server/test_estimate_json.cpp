// The identification result JSON against the docs/FORMATS.md section 3 contract
// (the project's published format: key names, units in the names,
// {"value", "std", "ci95"} or {"value", "fixed": true}, modes with order,
// frequency_hz, frequency_std_hz, damping_ratio, shape keyed by channel,
// model_frequency_hz and mac; fit with model "modal"; cautions; notice).
#include <gtest/gtest.h>

#include "server/estimate_json.h"

namespace taut::server {
namespace {

estimation::Estimate Example() {
  estimation::Estimate e;
  e.direction = model::Direction::kVertical;
  e.shape_channels = {"a1", "a2", "a3"};
  e.channels = e.shape_channels;
  e.axial_force_n = {30125.0, 210.0, 29713.0, 30537.0, false, true};
  e.bending_stiffness_nm2 = {7950.0, 120.0, 7715.0, 8185.0, false, true};
  e.fixity_left = {0.0, 0.0, 0.0, 0.0, true, true};  // declared pinned
  e.fixity_right = {0.38, 0.05, 0.28, 0.48, false, true};
  estimation::EstimatedMode paired;
  paired.paired = true;
  paired.measured.order = 1;
  paired.measured.frequency_hz = 6.812;
  paired.measured.frequency_std_hz = 0.004;
  paired.measured.damping_ratio = 0.004;
  paired.measured.shape = {0.71, 1.0, 0.70};
  paired.model_frequency_hz = 6.809;
  paired.mac = 0.999;
  estimation::EstimatedMode stranger;
  stranger.measured.frequency_hz = 9.5;
  stranger.measured.frequency_std_hz = 0.01;
  stranger.measured.shape = {1.0, 0.2, -0.3};
  e.modes = {paired, stranger};
  e.fit.converged = true;
  e.fit.cost = 3.1;
  e.fit.reduced_chi2 = 0.9;
  e.fit.iterations = 14;
  e.fit.starts = 3;
  e.fit.seconds = 0.04;
  e.cautions = {{"unpaired-mode", "The mode at 9.5 Hz pairs with no bending mode."}};
  e.notice = estimation::StandingNotice();
  return e;
}

TEST(EstimateJson, BudgetAndSimplifiedFormulasFollowSection36) {
  // docs/FORMATS.md 3.6: the budget's keys, a tolerance source with its
  // tolerance and default flag, a fit source without; absent budget, no key.
  EXPECT_FALSE(EstimateToJson(Example()).contains("uncertainty_budget"));
  estimation::Estimate e = Example();
  estimation::UncertaintyBudget b;
  b.axial_force_std_n = 250.0;
  b.fit_std_n = 210.0;
  b.tolerance_std_n = 135.6;
  b.sources = {{"frequencies", "measured frequencies", 210.0, 0.7056, std::nullopt, false, ""},
               {"length_tolerance_m", "member length", 135.6, 0.2944, 0.012, true, "m"}};
  e.uncertainty_budget = b;
  estimation::SimplifiedComparison c;
  c.taut_string_force_n = 31000.0;
  c.modes_used = 1;
  c.reasons = {"bending stiffness: ..."};
  e.simplified = c;
  const nlohmann::json j = EstimateToJson(e);
  EXPECT_EQ(j["uncertainty_budget"]["axial_force_std_n"], 250.0);
  EXPECT_EQ(j["uncertainty_budget"]["method"], "linearised");
  EXPECT_EQ(j["uncertainty_budget"]["sources"][0]["source"], "frequencies");
  EXPECT_FALSE(j["uncertainty_budget"]["sources"][0].contains("tolerance"));
  EXPECT_EQ(j["uncertainty_budget"]["sources"][1]["tolerance"], 0.012);
  EXPECT_EQ(j["uncertainty_budget"]["sources"][1]["default"], true);
  EXPECT_EQ(j["uncertainty_budget"]["sources"][1]["tolerance_unit"], "m");
  EXPECT_EQ(j["simplified_formulas"]["taut_string_force_n"], 31000.0);
  EXPECT_TRUE(j["simplified_formulas"]["pinned_beam_force_n"].is_null());
  EXPECT_NE(j["simplified_formulas"]["label"].get<std::string>().find("simplified"), std::string::npos);
}

TEST(EstimateJson, FollowsFormatsSection3) {
  const nlohmann::json j = EstimateToJson(Example());
  // Identified quantity: value, std, ci95 = [low, high].
  EXPECT_EQ(j["axial_force_n"]["value"], 30125.0);
  EXPECT_EQ(j["axial_force_n"]["std"], 210.0);
  ASSERT_TRUE(j["axial_force_n"]["ci95"].is_array());
  EXPECT_EQ(j["axial_force_n"]["ci95"], nlohmann::json::array({29713.0, 30537.0}));
  EXPECT_EQ(j["bending_stiffness_nm2"]["ci95"][1], 8185.0);
  // Fixed quantity: "fixed": true and no interval.
  EXPECT_EQ(j["end_fixity"]["left"], nlohmann::json({{"value", 0.0}, {"fixed", true}}));
  EXPECT_FALSE(j["end_fixity"]["left"].contains("ci95"));
  EXPECT_EQ(j["end_fixity"]["right"]["ci95"], nlohmann::json::array({0.28, 0.48}));
  // Modes: only paired ones, keys of the contract, shape keyed by channel.
  ASSERT_EQ(j["modes"].size(), 1u);
  const auto& m = j["modes"][0];
  for (const char* key :
       {"order", "frequency_hz", "frequency_std_hz", "damping_ratio", "shape", "model_frequency_hz", "mac"}) {
    EXPECT_TRUE(m.contains(key)) << key;
  }
  EXPECT_EQ(m["order"], 1);
  EXPECT_EQ(m["shape"], nlohmann::json({{"a1", 0.71}, {"a2", 1.0}, {"a3", 0.70}}));
  ASSERT_EQ(j["unpaired_modes"].size(), 1u);
  EXPECT_FALSE(j["unpaired_modes"][0].contains("order"));
  // Which plane each mode belongs to (issue 12, FORMATS.md 3.2).
  EXPECT_EQ(m["plane"], "declared");
  EXPECT_EQ(j["unpaired_modes"][0]["plane"], "unexplained");
  // Fit.
  EXPECT_EQ(j["fit"]["model"], "modal");
  EXPECT_EQ(j["fit"]["converged"], true);
  for (const char* key : {"cost", "reduced_chi2", "iterations", "starts", "seconds"}) {
    EXPECT_TRUE(j["fit"].contains(key)) << key;
  }
  // How the intervals of N and EI were formed (issue 12, FORMATS.md 3.3).
  EXPECT_EQ(j["fit"]["axial_force_interval"], "wald");
  EXPECT_EQ(j["fit"]["bending_stiffness_interval"], "wald");
  // Axial support beside the contract keys: declared (fixed) here, rigid
  // supports have no finite stiffness (null).
  EXPECT_EQ(j["axial_support"]["ratio"], nlohmann::json({{"value", 1.0}, {"fixed", true}}));
  EXPECT_TRUE(j["axial_support"]["stiffness_n_per_m"].is_null());
  // Cautions and the standing notice.
  ASSERT_EQ(j["cautions"].size(), 1u);
  EXPECT_EQ(j["cautions"][0]["code"], "unpaired-mode");
  // Every caution carries its severity, every result a verdict
  // (SHARED-DECISIONS item 1); an unpaired mode is information only.
  EXPECT_EQ(j["cautions"][0]["severity"], "info");
  EXPECT_EQ(j["verdict"]["code"], "usable");
  EXPECT_EQ(j["verdict"]["summary"], "Usable.");
  EXPECT_EQ(j["notice"], estimation::StandingNotice());
}

// A refused estimate: verdict "unusable", summary "Repeat the record: <why>.",
// the refusal's caution marked "unusable".
TEST(EstimateJson, RefusalCarriesTheUnusableVerdict) {
  estimation::Estimate e = Example();
  e.cautions.push_back({"record-not-member", "7 of 9 strong modes pair with no mode of this member."});
  e.verdict = estimation::MakeVerdict(e.cautions);
  const nlohmann::json j = EstimateToJson(e);
  EXPECT_EQ(j["verdict"]["code"], "unusable");
  EXPECT_EQ(j["verdict"]["summary"],
            "Repeat the record: 7 of 9 strong modes pair with no mode of this member.");
  EXPECT_EQ(j["cautions"][1]["severity"], "unusable");
}

// A time-domain estimate keeps every key of the contract and says which
// model it comes from (docs/FORMATS.md section 3 `fit.model`: "modal" or
// "transient"), with the fitted window beside the contract keys.
TEST(EstimateJson, TransientEstimateKeepsTheContractKeys) {
  estimation::Estimate e = Example();
  e.fit.model = estimation::kFitModelTransient;
  estimation::TransientSummary t;
  t.window_start_s = 0.31;
  t.window_end_s = 5.9;
  t.modes = 3;
  t.model_runs = 400;
  t.modal_displacement_m = {0.012, -0.001, 0.0004};
  t.modal_axial_force_n = 31000.0;
  e.transient = t;
  e.amplitude.order = 1;
  e.amplitude.frequency_shift_hz = 0.1;
  e.amplitude.exceeds_std = true;
  const nlohmann::json j = EstimateToJson(e);
  for (const char* key :
       {"axial_force_n", "bending_stiffness_nm2", "end_fixity", "modes", "fit", "cautions", "notice"}) {
    EXPECT_TRUE(j.contains(key)) << key;
  }
  for (const char* key : {"value", "std", "ci95"}) EXPECT_TRUE(j["axial_force_n"].contains(key)) << key;
  EXPECT_EQ(j["fit"]["model"], "transient");
  for (const char* key : {"converged", "cost", "reduced_chi2", "iterations", "starts", "seconds"}) {
    EXPECT_TRUE(j["fit"].contains(key)) << key;
  }
  EXPECT_EQ(j["fit"]["transient"]["window_s"], nlohmann::json::array({0.31, 5.9}));
  EXPECT_EQ(j["fit"]["transient"]["modes"], 3);
  EXPECT_EQ(j["fit"]["transient"]["modal_axial_force_n"], 31000.0);
  EXPECT_EQ(j["amplitude_check"]["exceeds_std"], true);
  // The modal example carries no transient block.
  EXPECT_FALSE(EstimateToJson(Example())["fit"].contains("transient"));
}

}  // namespace
}  // namespace taut::server
