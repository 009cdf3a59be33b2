// Cautions and the standing safety notice carried by every result.
//
// A caution is a machine code (kebab-case, stable: tests and outside tools
// match on it) plus one plain sentence for the engineer. docs/DESIGN.md
// "Cautions and the safety notice" lists the situations that raise one.
#pragma once

#include <string>
#include <vector>

namespace taut::estimation {

struct Caution {
  std::string code;     // e.g. "single-sensor", "compression-near-buckling"
  std::string message;  // one sentence, plain words, numbers with units
};

using Cautions = std::vector<Caution>;

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
