// Caution severities and the verdict (SHARED-DECISIONS item 1: the verdict
// is the worst severity, "info" -> "usable"; summaries "Usable.",
// "Usable with reduced confidence: <why>.", "Repeat the record: <why>.").
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <regex>
#include <set>
#include <sstream>
#include <string>

#include "estimation/cautions.h"

namespace taut::estimation {
namespace {

TEST(Cautions, VerdictIsTheWorstSeverity) {
  EXPECT_EQ(MakeVerdict({}).code, "usable");
  EXPECT_EQ(MakeVerdict({}).summary, "Usable.");
  // Information only: still usable.
  const Verdict info = MakeVerdict({{"unpaired-mode", "m"}, {"time-domain-fit", "m"}});
  EXPECT_EQ(info.code, "usable");
  EXPECT_EQ(info.summary, "Usable.");
  // Reduced confidence names its reasons (short phrases, at most three).
  const Verdict reduced = MakeVerdict({{"unpaired-mode", "m"},
                                       {"single-mode", "m"},
                                       {"wide-interval", "m"},
                                       {"poor-fit", "m"},
                                       {"not-converged", "m"}});
  EXPECT_EQ(reduced.code, "reduced-confidence");
  EXPECT_EQ(reduced.summary,
            "Usable with reduced confidence: only one mode pairs with the model; the force interval is wide; "
            "the model reproduces the modes poorly.");
  // A refusal wins and quotes its message.
  const Verdict refused =
      MakeVerdict({{"single-mode", "m"}, {"record-not-member", "The record does not fit member T1."}});
  EXPECT_EQ(refused.code, "unusable");
  EXPECT_EQ(refused.summary, "Repeat the record: The record does not fit member T1.");
  // An uncatalogued code is never silently "info".
  EXPECT_EQ(SeverityOf("some-new-code"), Severity::kReducedConfidence);
  EXPECT_STREQ(ToString(Severity::kUnusable), "unusable");
}

// Every caution code raised anywhere in estimation/ and server/ (the
// literal `{"code-with-dashes",` of a Caution) is in the catalogue, so each
// one has a deliberate severity.
TEST(Cautions, EveryRaisedCodeIsCatalogued) {
  const std::filesystem::path root = TAUT_SOURCE_ROOT_DIR;
  const std::regex literal(R"re(\{\s*"([a-z0-9]+(?:-[a-z0-9]+)+)",)re");
  // Keys of other kebab-case literals that are not cautions.
  const std::set<std::string> not_cautions = {};
  std::set<std::string> seen;
  for (const char* dir : {"estimation", "server"}) {
    for (const auto& entry : std::filesystem::directory_iterator(root / dir)) {
      if (entry.path().extension() != ".cpp") continue;
      std::ifstream in(entry.path());
      std::stringstream ss;
      ss << in.rdbuf();
      const std::string text = ss.str();
      if (text.find("cautions") == std::string::npos && text.find("Caution") == std::string::npos) continue;
      for (std::sregex_iterator it(text.begin(), text.end(), literal), end; it != end; ++it) {
        const std::string code = (*it)[1];
        // Literals inside the catalogue itself and JSON keys are skipped.
        if (entry.path().filename() == "cautions.cpp" || not_cautions.count(code)) continue;
        seen.insert(code);
      }
    }
  }
  ASSERT_GT(seen.size(), 20u) << "the scan found too few caution literals; did the sources move?";
  for (const auto& code : seen) EXPECT_TRUE(IsCataloguedCaution(code)) << code << " (" << root << ")";
}

}  // namespace
}  // namespace taut::estimation
