// Status objects returned by the numerical modules (model/, estimation/).
//
// Numerical code does not throw across module boundaries: a function that can
// fail on data (a member at its buckling load, a record with no mode) returns
// a Status whose message names the value and the rule it broke, in the manner
// of ceres::Solver::Summary. Exceptions are caught only at the CLI and HTTP
// boundaries in server/.
#pragma once

#include <string>
#include <utility>

namespace taut {

struct Status {
  enum class Code {
    kOk,
    kInvalidArgument,  // a precondition on the inputs is violated
    kBuckled,          // the member is at or beyond its buckling load
    kNumerical,        // a solver did not converge or met a singular system
  };

  Code code = Code::kOk;
  std::string message;  // empty when ok; otherwise one line for a human

  bool ok() const { return code == Code::kOk; }

  static Status Ok() { return {}; }
  static Status InvalidArgument(std::string m) { return {Code::kInvalidArgument, std::move(m)}; }
  static Status Buckled(std::string m) { return {Code::kBuckled, std::move(m)}; }
  static Status Numerical(std::string m) { return {Code::kNumerical, std::move(m)}; }
};

}  // namespace taut
