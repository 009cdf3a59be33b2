// Identification from modes an engineer already has (issue 17): a hammer
// test with a hand-held analyser, another analysis. The modes take the
// place of a record's modal identification; the model updating, the
// tolerance propagation and the result are those of a record
// (identify.h, tolerance_budget.h), so the result format and the cautions
// are the same, except that the record-quality cautions are replaced by
// one note (caution "modes-supplied", severity info) that the modes were
// supplied.
//
// Without shapes the modes carry no channel; the fit then uses their
// frequencies only, in the plane `SuppliedModes::plane` (default: the
// plane most of the member's sensors lie in), through one massless
// stand-in sensor at mid-span (kSuppliedChannel) that adds nothing to the
// model, and the result lists no channel and no shape.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "estimation/identify.h"
#include "estimation/modes.h"
#include "model/member.h"
#include "model/status.h"

namespace taut::estimation {

// Channel of the stand-in sensor of modes without shapes.
inline constexpr const char* kSuppliedChannel = "supplied_modes";

struct SuppliedModes {
  // Channels (sensors of the member) the shapes refer to; empty: no shapes.
  std::vector<std::string> channels;
  // Frequency [Hz] and its one-sigma std (both > 0), damping ratio
  // (optional, 0 when not given), shape: one value per channel (any scale
  // and sign) or empty when `channels` is.
  std::vector<IdentifiedMode> modes;
  // The plane the modes vibrate in, when no shapes say it.
  std::optional<model::Direction> plane;
  std::string source;  // where the modes come from, free text ("" = not given)
};

// As IdentifyRecord (identify_record.h) from supplied modes: kInvalidArgument
// naming the problem (a channel that is not a sensor of the member, shapes
// of the other plane than `plane`, no mode pairing with the model); a
// refusal (verdict "unusable") is kInvalidArgument with the verdict's
// summary and a filled `estimate`. The estimate carries the
// uncertainty budget and the simplified formulas like a record's.
Status IdentifySuppliedModes(const model::Member& member, const SuppliedModes& supplied,
                             const IdentifyOptions& options, Estimate* estimate);

}  // namespace taut::estimation
