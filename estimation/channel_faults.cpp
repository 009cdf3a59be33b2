#include "estimation/channel_faults.h"

#include <algorithm>

namespace taut::estimation {

std::vector<ChannelFault> FindChannelFaults(const Record& record) {
  std::vector<ChannelFault> faults;
  const Eigen::Index n = record.samples.rows();
  if (n == 0) return faults;
  std::vector<double> var;
  for (Eigen::Index c = 0; c < record.samples.cols(); ++c) {
    const auto x = record.samples.col(c);
    var.push_back((x.array() - x.mean()).square().sum() / static_cast<double>(n));
  }
  const double max_var = *std::max_element(var.begin(), var.end());
  for (Eigen::Index c = 0; c < record.samples.cols(); ++c) {
    const std::string& name = record.channels[static_cast<size_t>(c)];
    if (var[c] == 0.0 || var[c] < kDeadChannelVarianceRatio * max_var) {
      faults.push_back({name, "dead-channel"});
      continue;
    }
    Record one;
    one.channels = {name};
    one.sample_rate_hz = record.sample_rate_hz;
    one.samples = record.samples.col(c);
    CheckRecordQuality(&one);
    for (const auto& k : one.cautions) {
      if (k.code == "clipped-channel" || k.code == "dropout") {
        faults.push_back({name, k.code});
        break;
      }
    }
  }
  return faults;
}

Record LeaveOutFaultyChannels(const model::Member& member, const Record& record) {
  const std::vector<ChannelFault> faults = FindChannelFaults(record);
  auto sensor = [&](const std::string& channel) -> const model::Sensor* {
    for (const auto& s : member.sensors) {
      if (s.channel == channel) return &s;
    }
    return nullptr;
  };
  auto faulty = [&](const std::string& channel) {
    return std::any_of(faults.begin(), faults.end(),
                       [&](const ChannelFault& f) { return f.channel == channel; });
  };
  std::vector<std::string> removed;
  Cautions left_out;
  for (const auto& f : faults) {
    const model::Sensor* s = sensor(f.channel);
    if (s == nullptr) continue;
    const bool good_in_plane =
        std::any_of(record.channels.begin(), record.channels.end(), [&](const auto& c) {
          const model::Sensor* o = sensor(c);
          return o != nullptr && o->direction == s->direction && !faulty(c);
        });
    if (!good_in_plane) continue;
    removed.push_back(f.channel);
    left_out.push_back({"channel-left-out", "Channel " + f.channel + " (" + f.kind +
                                                ") was left out; the modes were identified from the other "
                                                "channels."});
  }
  if (left_out.empty()) return record;
  Record out = record;
  std::vector<Eigen::Index> cols;
  out.channels.clear();
  for (size_t c = 0; c < record.channels.size(); ++c) {
    if (std::find(removed.begin(), removed.end(), record.channels[c]) != removed.end()) continue;
    out.channels.push_back(record.channels[c]);
    cols.push_back(static_cast<Eigen::Index>(c));
  }
  out.samples.resize(record.samples.rows(), static_cast<Eigen::Index>(cols.size()));
  for (size_t k = 0; k < cols.size(); ++k)
    out.samples.col(static_cast<Eigen::Index>(k)) = record.samples.col(cols[k]);
  for (auto& k : left_out) out.cautions.push_back(std::move(k));
  return out;
}

}  // namespace taut::estimation
