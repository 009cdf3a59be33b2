// Faulty channels left out of the identification (issue 12, failure class
// 5): a dead, clipped or dropped-out channel is flagged by the record reader
// (record.h CheckRecordQuality) and, when the member keeps at least one good
// channel in the same plane, identified without it.
//
// The tests are the reader's (one rule, one place): a channel is dead when
// its variance is zero or below kDeadChannelVarianceRatio times the largest
// channel variance; clipped or dropped out when CheckRecordQuality, run on
// that channel alone, raises "clipped-channel" or "dropout" (a run of at
// least kMinClipRunSamples samples at an extreme value, kMinDropoutRunSamples
// exact zeros).
#pragma once

#include <string>
#include <vector>

#include "estimation/record.h"
#include "model/member.h"

namespace taut::estimation {

struct ChannelFault {
  std::string channel;
  std::string kind;  // "dead-channel", "clipped-channel" or "dropout"
};

// Faults of every channel of `record` (samples and sample_rate_hz set).
std::vector<ChannelFault> FindChannelFaults(const Record& record);

// `record` without its faulty channels, where each one left out still
// leaves a good channel of the member in its plane (a faulty channel that
// is the last of its plane stays, with the reader's caution). Adds one
// "channel-left-out" caution per channel left out to the returned record's
// cautions. Channels that are not sensors of `member` are never removed.
Record LeaveOutFaultyChannels(const model::Member& member, const Record& record);

}  // namespace taut::estimation
