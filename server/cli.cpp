#include "server/cli.h"

#include <exception>
#include <ostream>

namespace taut::server {

model::Direction ChooseDirection(const model::Member& member, const std::string& flag) {
  if (flag == "vertical") return model::Direction::kVertical;
  if (flag == "lateral") return model::Direction::kLateral;
  return member.MajorityPlane();
}

int Main(int argc, const char* const* argv, std::ostream& out, std::ostream& err) {
  CLI::App app{"taut: axial force, bending stiffness and end restraint of slender members from vibration"};
  app.require_subcommand(1);
  app.set_version_flag("--version", "taut " TAUT_VERSION_STRING);
  // One configuration file for every subcommand: TOML/INI "key = value"
  // lines in a section named after the subcommand ([serve]); CLI11 reads it,
  // and a key no option knows is an error (a typo is never ignored).
  app.set_config("--config", "", "configuration file: [serve] section of key = value lines");
  app.allow_config_extras(CLI::config_extras_mode::error);
  CliContext ctx{&out, &err, 0};
  RegisterModesCommand(app, &ctx);
  RegisterSimulateCommand(app, &ctx);
  RegisterIdentifyCommand(app, &ctx);
  RegisterModalCommand(app, &ctx);
  RegisterServeCommand(app, &ctx);
  RegisterDemoCommand(app, &ctx);
  RegisterFormatsCommand(app, &ctx);
  RegisterUploadCommand(app, &ctx);
  RegisterReportCommand(app, &ctx);
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp&) {
    out << app.help();
    return 0;
  } catch (const CLI::CallForAllHelp&) {
    out << app.help("", CLI::AppFormatMode::All);
    return 0;
  } catch (const CLI::CallForVersion&) {
    out << app.version() << "\n";
    return 0;
  } catch (const CLI::ConfigError& e) {
    // CLI11 says "INI was not able to parse KEY" for a key no option knows.
    err << "taut: --config: " << e.what()
        << " (unknown key or value; keys go in a section named after the subcommand, e.g. [serve] "
           "db = \"/var/lib/taut/taut.db\")\n";
    return 2;
  } catch (const CLI::ParseError& e) {
    err << "taut: " << e.what() << " (see taut --help)\n";
    return 2;
  } catch (const std::exception& e) {
    // Subcommands report data errors through ctx; anything landing here is
    // unexpected, but the person still gets one line and a non-zero code.
    err << "taut: internal error: " << e.what() << "\n";
    return 1;
  }
  return ctx.exit_code;
}

}  // namespace taut::server
