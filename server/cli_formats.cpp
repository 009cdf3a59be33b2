// `taut formats`: prints the member description and the acceleration record
// formats (docs/FORMATS.md sections 1 and 2, embedded at build time by
// server/formats_text.cmake), so a technician on a gateway without the
// repository can read the contract of the files taut accepts.
#include <ostream>

#include "server/cli.h"

namespace taut::server {

void RegisterFormatsCommand(CLI::App& app, CliContext* ctx) {
  CLI::App* cmd = app.add_subcommand(
      "formats", "Print the member description (JSON) and acceleration record (CSV) formats");
  cmd->callback([ctx] {
    *ctx->out << "taut file formats (docs/FORMATS.md sections 1 and 2; section 3, the result, is in "
                 "the repository)\n\n"
              << FormatsSummaryText();
    ctx->exit_code = 0;
  });
}

}  // namespace taut::server
