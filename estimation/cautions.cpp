#include "estimation/cautions.h"

namespace taut::estimation {

const char* StandingNotice() {
  return "Estimates support inspection planning; they are derived from vibration records through a "
         "beam model whose assumptions may not hold for this member, and they do not replace "
         "assessment by a licensed structural engineer under the local codes.";
}

}  // namespace taut::estimation
