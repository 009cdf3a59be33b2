// Runs the `taut` command line in process for the CLI tests.
#pragma once

#include <sstream>
#include <string>
#include <vector>

#include "server/cli.h"

namespace taut::server::testing {

struct CliRun {
  int code;
  std::string out, err;
};

// Main() with argv = {"taut", args...}; captures standard output and error.
inline CliRun Taut(std::vector<std::string> args) {
  args.insert(args.begin(), "taut");
  std::vector<const char*> argv;
  for (const auto& a : args) argv.push_back(a.c_str());
  std::ostringstream out, err;
  const int code = Main(static_cast<int>(argv.size()), argv.data(), out, err);
  return {code, out.str(), err.str()};
}

}  // namespace taut::server::testing
