#include "estimation/cautions.h"

#include <sstream>

namespace taut::estimation {

std::string FormatNumber(double v, int significant_digits) {
  std::ostringstream os;
  os.precision(significant_digits);
  os << v;
  return os.str();
}

std::string FormatKn(double force_n) { return FormatNumber(force_n / 1000.0, 4) + " kN"; }

const char* StandingNotice() {
  return "Estimates support inspection planning; they are derived from vibration records through a "
         "beam model whose assumptions may not hold for this member, and they do not replace "
         "assessment by a licensed structural engineer under the local codes.";
}

}  // namespace taut::estimation
