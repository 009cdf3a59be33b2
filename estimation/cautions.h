// Cautions and the standing safety notice carried by every result.
//
// A caution is a machine code (kebab-case, stable: tests and outside tools
// match on it) plus one plain sentence for the engineer. DESIGN.md
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

// The standing notice attached to every estimate (FORMATS.md section 3
// `notice`).
const char* StandingNotice();

}  // namespace taut::estimation
