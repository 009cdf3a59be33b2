// Cautions, their severities, the verdict and the standing safety notice
// carried by every result.
//
// A caution is a machine code (kebab-case, stable: tests and outside tools
// match on it) plus one plain sentence for the engineer. docs/DESIGN.md
// "Cautions and the safety notice" lists the situations that raise one.
//
// Every code has one severity (the catalogue in cautions.cpp):
//   info                 something the engineer should know; the estimate
//                        is as good as the record allows,
//   reduced-confidence   the estimate stands, but its interval or the model
//                        behind it is weaker than on a good record,
//   unusable             the record cannot give an estimate of this member
//                        (a refusal: repeat the record or check the member).
// The verdict of a result is its worst severity ("info" -> "usable") with
// one line for the technician on site (SHARED-DECISIONS item 1):
//   "Usable.", "Usable with reduced confidence: <why>.",
//   "Repeat the record: <why>.".
#pragma once

#include <string>
#include <string_view>
#include <vector>

namespace taut::estimation {

struct Caution {
  std::string code;     // e.g. "single-sensor", "compression-near-buckling"
  std::string message;  // one sentence, plain words, numbers with units
};

using Cautions = std::vector<Caution>;

enum class Severity { kInfo = 0, kReducedConfidence = 1, kUnusable = 2 };

// "info", "reduced-confidence" or "unusable".
const char* ToString(Severity s);

// Severity of a caution code from the catalogue. A code missing from the
// catalogue is "reduced-confidence" (never silently "info"); the tests check
// that every code the estimation raises is catalogued.
Severity SeverityOf(std::string_view code);

// True when `code` is in the catalogue.
bool IsCataloguedCaution(std::string_view code);

// Every catalogued code (for the tests and the documentation).
std::vector<std::string> CataloguedCautionCodes();

struct Verdict {
  std::string code = "usable";  // "usable" | "reduced-confidence" | "unusable"
  std::string summary = "Usable.";
};

// The verdict of a list of cautions: the worst severity; the summary names
// the reasons of that severity (the short phrase of each code, at most
// three, in the order raised; for "unusable" the first refusal's message).
Verdict MakeVerdict(const Cautions& cautions);

// "wide-interval": a 95 % interval wider (upper - lower) than this share of
// the value (docs/DESIGN.md "Cautions": wider than 20 % of the value).
inline constexpr double kWideIntervalShare = 0.20;

// Numbers in caution messages: `significant_digits` significant digits in
// the shortest form (std::ostream default float format), e.g. 0.0123, 3.5e+04.
std::string FormatNumber(double v, int significant_digits = 4);
// A force [N] in kN with four significant digits and the unit: "12.03 kN".
std::string FormatKn(double force_n);

// The standing notice attached to every estimate (docs/FORMATS.md section 3
// `notice`).
const char* StandingNotice();

}  // namespace taut::estimation
