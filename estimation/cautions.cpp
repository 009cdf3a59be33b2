#include "estimation/cautions.h"

#include <algorithm>
#include <array>
#include <sstream>

namespace taut::estimation {

namespace {

struct CatalogueEntry {
  const char* code;
  Severity severity;
  const char* reason;  // short phrase for the verdict line, lower case, no final stop
};

constexpr Severity kI = Severity::kInfo;
constexpr Severity kR = Severity::kReducedConfidence;
constexpr Severity kU = Severity::kUnusable;

// The catalogue: every caution code of the estimation chain (record
// reader, modal identification, model updating, time-domain fit, drift
// rules) with its severity. The choice follows one question: does the
// caution weaken the reported number or its interval (reduced-confidence),
// make it meaningless for this member (unusable), or only tell the engineer
// something about the member or the processing (info)?
constexpr std::array kCatalogue = {
    // Record quality (estimation/record.cpp).
    CatalogueEntry{"single-channel", kR, "the record has one channel only"},
    CatalogueEntry{"low-sample-rate", kI, "the sampling rate is low"},
    CatalogueEntry{"dead-channel", kR, "a channel carries almost no signal"},
    CatalogueEntry{"clipped-channel", kR, "a channel was clipped"},
    CatalogueEntry{"dropout", kR, "a channel lost samples"},
    CatalogueEntry{"channel-left-out", kR, "a faulty channel was left out"},
    CatalogueEntry{"drift", kR, "a channel drifts"},
    CatalogueEntry{"time-jitter", kI, "the time stamps jitter around a uniform step"},
    // Modes supplied by the engineer instead of a record (estimation/supplied_modes.cpp).
    CatalogueEntry{"modes-supplied", kI, "the modes were supplied, not identified from a record"},
    // Member tolerances (estimation/tolerance_budget.cpp).
    CatalogueEntry{"tolerances-not-propagated", kR, "the member's tolerances are not in the intervals"},
    // Modal identification (estimation/modal_id.cpp).
    CatalogueEntry{"rate-too-low", kI, "the band top was lowered below Nyquist"},
    CatalogueEntry{"no-mode", kU, "no mode was found in the record"},
    CatalogueEntry{"ssi-mode-unconfirmed", kI, "an unconfirmed pole cluster was dropped"},
    CatalogueEntry{"amplitude-dependent-frequency", kI, "a frequency moves with amplitude"},
    CatalogueEntry{"weak-uncertainty", kR, "the frequency uncertainty is weakly determined"},
    CatalogueEntry{"narrow-line-rejected", kI, "a machinery line was rejected"},
    CatalogueEntry{"fdd-peak-unconfirmed", kI, "a spectral peak was not confirmed"},
    CatalogueEntry{"record-too-short", kR, "the record is short for its lowest mode"},
    CatalogueEntry{"shape-disagreement", kR, "two identification methods disagree on a shape"},
    CatalogueEntry{"short-decay", kI, "the free decay is short"},
    CatalogueEntry{"order-unassigned", kR, "some modes carry no order"},
    CatalogueEntry{"order-ambiguous", kR, "some mode orders are ambiguous"},
    // Model updating (estimation/identify.cpp).
    CatalogueEntry{"large-amplitude", kR, "large amplitudes bias the linear model"},
    CatalogueEntry{"other-plane-channels-ignored", kI, "channels of the other plane were not used"},
    CatalogueEntry{"other-plane-modes", kI, "modes of the other plane were recognised and not used"},
    CatalogueEntry{"mesh-error", kR, "the model mesh is coarse for these modes"},
    CatalogueEntry{"not-identifiable", kR, "the modes cannot separate all unknowns"},
    CatalogueEntry{"force-interval-open", kR, "the force interval is open"},
    CatalogueEntry{"stiffness-from-prior", kI, "the bending stiffness comes mainly from its nominal value"},
    CatalogueEntry{"stiffness-off-nominal", kR, "the bending stiffness is far from its nominal value"},
    CatalogueEntry{"sag-stiffness-uncertain", kR, "the axial stiffness behind the sag effect is uncertain"},
    CatalogueEntry{"order-hypotheses-disagree", kR,
                   "two numberings of the modes fit and give different forces"},
    CatalogueEntry{"single-mode", kR, "only one mode pairs with the model"},
    CatalogueEntry{"single-sensor", kR, "only one sensor in the plane"},
    CatalogueEntry{"unpaired-mode", kI, "a mode pairs with no model mode"},
    CatalogueEntry{"fixity-at-bound", kI, "an end fixity sits at its bound"},
    CatalogueEntry{"axial-support-at-bound", kI, "the axial support stiffness sits at its bound"},
    CatalogueEntry{"wide-interval", kR, "the force interval is wide"},
    CatalogueEntry{"poor-fit", kR, "the model reproduces the modes poorly"},
    CatalogueEntry{"not-converged", kR, "the fit did not converge"},
    CatalogueEntry{"compression", kI, "the member is in compression"},
    CatalogueEntry{"compression-near-buckling", kI, "the member is close to buckling"},
    CatalogueEntry{"stocky-member", kR, "the member is too stocky for the beam model"},
    CatalogueEntry{"far-from-design-force", kI, "the force is far from the design force"},
    // Refusals (estimation/refusal.h).
    CatalogueEntry{"record-not-member", kU, "the record does not fit this member"},
    CatalogueEntry{"implausible-stress", kU, "the force implies an implausible stress"},
    CatalogueEntry{"too-few-modes", kU, "too few modes to number them"},
    // Time-domain path (estimation/identify_record.cpp, transient_fit.cpp).
    CatalogueEntry{"time-domain-fit", kI, "the nonlinear time-domain model was used"},
    CatalogueEntry{"time-domain-fit-failed", kR, "the time-domain fit failed"},
    CatalogueEntry{"fit-not-converged", kR, "the time-domain fit did not converge"},
    CatalogueEntry{"covariance-unavailable", kR, "the fit gives no intervals"},
    CatalogueEntry{"force-stiffness-correlated", kI, "force and bending stiffness are correlated"},
    CatalogueEntry{"parameter-at-bound", kR, "a fitted parameter sits on its bound"},
    CatalogueEntry{"bending-stiffness-held", kI, "the bending stiffness was held"},
    // Drift rules (estimation/drift.cpp): findings about a series, not a record.
    CatalogueEntry{"drift-baseline-forming", kI, "the drift baseline is still forming"},
    CatalogueEntry{"drift-cusum-short-baseline", kI, "the drift baseline is short"},
    CatalogueEntry{"drift-temperature-outside-baseline", kI, "temperatures lie outside the baseline"},
    CatalogueEntry{"drift-missing-temperature", kI, "some estimates carry no temperature"},
    CatalogueEntry{"force-below-design", kI, "the force is below the design limit"},
    CatalogueEntry{"ei-loss", kI, "the bending stiffness has dropped"},
    CatalogueEntry{"drift-baseline-restarted", kI, "a logbook entry restarted the drift baseline"},
    CatalogueEntry{"drift-unusable-excluded", kI, "estimates with an unusable verdict were left out"},
    CatalogueEntry{"stale-data", kI, "no usable record arrived for too long"},
};

const CatalogueEntry* Find(std::string_view code) {
  for (const auto& e : kCatalogue) {
    if (code == e.code) return &e;
  }
  return nullptr;
}

std::string WithoutFinalStop(std::string s) {
  while (!s.empty() && (s.back() == '.' || s.back() == ' ')) s.pop_back();
  return s;
}

}  // namespace

const char* ToString(Severity s) {
  switch (s) {
    case Severity::kInfo:
      return "info";
    case Severity::kReducedConfidence:
      return "reduced-confidence";
    case Severity::kUnusable:
      return "unusable";
  }
  return "reduced-confidence";
}

Severity SeverityOf(std::string_view code) {
  const CatalogueEntry* e = Find(code);
  return e != nullptr ? e->severity : Severity::kReducedConfidence;
}

bool IsCataloguedCaution(std::string_view code) { return Find(code) != nullptr; }

std::vector<std::string> CataloguedCautionCodes() {
  std::vector<std::string> out;
  for (const auto& e : kCatalogue) out.emplace_back(e.code);
  return out;
}

Verdict MakeVerdict(const Cautions& cautions) {
  Severity worst = Severity::kInfo;
  for (const auto& c : cautions) worst = std::max(worst, SeverityOf(c.code));
  Verdict v;
  if (worst == Severity::kInfo) return v;
  std::vector<std::string> reasons;
  for (const auto& c : cautions) {
    if (SeverityOf(c.code) != worst) continue;
    const CatalogueEntry* e = Find(c.code);
    std::string r = worst == Severity::kUnusable || e == nullptr ? WithoutFinalStop(c.message) : e->reason;
    if (std::find(reasons.begin(), reasons.end(), r) == reasons.end()) reasons.push_back(r);
    if (worst == Severity::kUnusable || reasons.size() == 3) break;
  }
  std::string why;
  for (const auto& r : reasons) why += (why.empty() ? "" : "; ") + r;
  if (worst == Severity::kUnusable) {
    v.code = "unusable";
    v.summary = "Repeat the record: " + why + ".";
  } else {
    v.code = "reduced-confidence";
    v.summary = "Usable with reduced confidence: " + why + ".";
  }
  return v;
}

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
