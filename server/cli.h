// The `taut` command line: one executable, one subcommand per job.
//
// Each subcommand lives in its own cli_<name>.cpp and registers itself with
// Register<Name>Command. Output goes to `out` (results) and `err` (one line
// per error); the exit code is 0 on a result, 1 when the inputs are unusable
// (bad file, member at buckling, ...), 2 for a malformed command line.
#pragma once

#include <CLI/CLI.hpp>
#include <iosfwd>
#include <string>

#include "estimation/record.h"
#include "model/member.h"

namespace taut::server {

struct CliContext {
  std::ostream* out;  // not owned; must outlive the command run
  std::ostream* err;  // not owned
  int exit_code = 0;
};

void RegisterModesCommand(CLI::App& app, CliContext* ctx);
void RegisterSimulateCommand(CLI::App& app, CliContext* ctx);
void RegisterIdentifyCommand(CLI::App& app, CliContext* ctx);
void RegisterModalCommand(CLI::App& app, CliContext* ctx);
void RegisterServeCommand(CLI::App& app, CliContext* ctx);  // serve, token create
void RegisterDemoCommand(CLI::App& app, CliContext* ctx);
void RegisterFormatsCommand(CLI::App& app, CliContext* ctx);
void RegisterUploadCommand(CLI::App& app, CliContext* ctx);

// Sections 1 and 2 of docs/FORMATS.md (generated at build time).
const char* FormatsSummaryText();
void RegisterReportCommand(CLI::App& app, CliContext* ctx);  // cli_report.cpp

// SIGINT and SIGTERM for a long-running command: BlockStopSignals() before
// any thread starts (threads inherit the mask, so a stop request never
// interrupts one of them mid-write), then WaitForStopSignal() blocks until
// one arrives and returns its number.
void BlockStopSignals();
int WaitForStopSignal();

// The plane a command analyses: `flag` ("vertical" or "lateral") when
// given, else the plane of most of the member's sensors (vertical on a tie,
// and when there are none).
model::Direction ChooseDirection(const model::Member& member, const std::string& flag);

// Reads the record at `record_path` for `command` ("taut identify"): with
// the import profile at `profile_path` unless it is empty, and the reader's
// notes printed to `err` as "<command>: note: <path>: <note>" lines.
Status ReadRecordForCli(const std::string& record_path, const std::string& profile_path,
                        estimation::RecordReadOptions options, estimation::Record* record, std::ostream& err,
                        const std::string& command);

// Parses argv and runs the chosen subcommand; returns the exit code.
int Main(int argc, const char* const* argv, std::ostream& out, std::ostream& err);

}  // namespace taut::server
