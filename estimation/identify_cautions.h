// The cautions of a modal fit (docs/DESIGN.md "Cautions"; codes and
// severities catalogued in cautions.h/.cpp). Internal to estimation/;
// AppendForceCautions is public (identify.h).
#pragma once

#include "estimation/identify.h"

namespace taut::estimation::fit {

// Appends the cautions that follow from a finished fit, in this order:
// single-mode, single-sensor, unpaired-mode (one per unpaired measured
// mode), fixity-at-bound, axial-support-at-bound (when `axial_support_free`),
// wide-interval (kWideIntervalShare of |N|), poor-fit (kPoorFitReducedChi2),
// not-converged, then AppendForceCautions. Reads est->modes, est->channels
// (the in-plane channels), the fixities, est->axial_force_n and est->fit
// (reduced_chi2, converged), est->critical_compression_n.
void AppendFitCautions(const model::Member& member, bool axial_support_free, Estimate* est);

}  // namespace taut::estimation::fit
