// Identified modes: the hand-over from modal identification (a record ->
// modes) to model updating (modes -> N, EI, fixities).
//
// Units: Hz for frequencies, damping as a ratio of critical (0.01 = 1 %).
// Shapes are real, one value per channel in ModalIdentification::channels
// order, scaled so that the entry of largest magnitude is +1 (shapes from
// acceleration records carry no absolute scale).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "estimation/cautions.h"

namespace taut::estimation {

struct IdentifiedMode {
  // Bending order in the member's plane (1 = fundamental) once paired with
  // a model; unset from identification without a member.
  std::optional<int> order;
  double frequency_hz = 0.0;
  double frequency_std_hz = 0.0;  // one standard deviation, > 0
  double damping_ratio = 0.0;
  double damping_std = 0.0;   // one standard deviation of damping_ratio
  std::vector<double> shape;  // per channel, max |.| = 1
  // Modal assurance criterion between the FDD and SSI-COV shapes of this
  // mode (Allemang 2003), in [0, 1]; unset when only one method found it.
  std::optional<double> mac_fdd_ssi;
};

// Free decay after a blow (excitation = impact): the instantaneous
// frequency of the dominant mode against its amplitude, the backbone that
// the nonlinear (large-amplitude) model is fitted to. Filled by
// IdentifyModes (estimation/modal_id.h) for impact records only.
struct BackbonePoint {
  double time_s = 0.0;          // window centre, from the start of the record
  double amplitude_m_s2 = 0.0;  // mean acceleration envelope of the mode over the window
  double displacement_m = 0.0;  // amplitude_m_s2 / (2 pi f)^2, the modal displacement amplitude
  double frequency_hz = 0.0;    // mean instantaneous frequency over the window
};

struct ImpactDecay {
  double blow_time_s = 0.0;    // time of the largest acceleration, from the start of the record
  double decay_start_s = 0.0;  // identification window, from the start of the record
  double decay_end_s = 0.0;
  std::string channel;                  // channel the backbone was measured on
  double mode_frequency_hz = 0.0;       // dominant mode (SSI-COV over the decay)
  std::vector<BackbonePoint> backbone;  // descending amplitude (ascending time)
};

struct ModalIdentification {
  std::vector<std::string> channels;  // record channels the shapes refer to
  std::vector<IdentifiedMode> modes;  // ascending frequency
  // How frequency_std_hz was obtained, e.g. "scatter over 6 record
  // segments" or "scatter over the stable pole cluster".
  std::string uncertainty_method;
  double sample_rate_hz = 0.0;
  double duration_s = 0.0;
  Cautions cautions;                  // record quality and identification cautions
  std::optional<ImpactDecay> impact;  // set for impact records
};

}  // namespace taut::estimation
