// PLACEHOLDER: the 'quicklook' subcommand is written by its owner, who replaces this file.
#include "cli/commands.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::cli {

void add_quicklook_command(CLI::App& app, int& exit_code) {
  CLI::App* cmd = app.add_subcommand("quicklook", "(not built yet)");
  cmd->allow_extras();
  cmd->callback([&exit_code] {
    exit_code = 2;
    throw UsageError("quicklook: not built yet");
  });
}

}  // namespace latentlift::cli
