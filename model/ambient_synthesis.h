// Ambient acceleration records of a member with known parameters, by modal
// superposition of the linear (tangent) model: the record an ideal
// accelerometer would give under broadband ambient forcing. Used by
// `taut demo` (a gateway's uploads) and by the tests (records whose truth
// is known).
//
// Each of the lowest `modes` bending modes of the plane is a single-degree-
// of-freedom oscillator in its modal coordinate,
//   q'' + 2 zeta omega q' + omega^2 q = u(t),
// u white noise held over each sample (zero-order hold), discretised exactly
// with the matrix exponential of [A B; 0 0] dt (C. Van Loan, Computing
// integrals involving the matrix exponential, IEEE Trans. Autom. Control
// 23, 1978), so the record's modes are exactly the model's. Each modal
// acceleration is scaled to unit RMS, multiplied by the mode shape at the
// sensors (max |.| = 1) and by `rms_m_s2`, and summed; white measurement
// noise of noise_share times each channel's RMS is added.
//
// This is the linear model: no large-amplitude stretching (model/transient.h
// simulates that, at a much higher cost per record).
#pragma once

#include <Eigen/Core>
#include <string>
#include <vector>

#include "model/member.h"
#include "model/parameters.h"
#include "model/status.h"

namespace taut::model {

struct AmbientSpec {
  double duration_s = 120.0;      // > 0
  double sample_rate_hz = 256.0;  // > 0; modes above Nyquist are dropped
  int modes = 5;                  // lowest bending modes of the plane, >= 1
  double damping_ratio = 0.01;    // of every mode, in (0, 1)
  double noise_share = 0.02;      // measurement noise RMS / channel RMS, >= 0
  double rms_m_s2 = 1.0;          // RMS of each modal acceleration [m/s^2], > 0
  unsigned seed = 1;              // the same seed gives the same record
  int elements = 160;             // mesh of the modal analysis
};

// Fills `channels` (the member's sensors in `direction`, in member order)
// and `accelerations_m_s2` (rows = samples at t = i / rate, cols = channels).
// Errors: a spec value out of range (kInvalidArgument, naming it), no
// sensor in the plane, or the modal analysis's own error (e.g. kBuckled).
Status SynthesizeAmbient(const Member& member, Direction direction, const ModalParameters& params,
                         const AmbientSpec& spec, std::vector<std::string>* channels,
                         Eigen::MatrixXd* accelerations_m_s2);

}  // namespace taut::model
