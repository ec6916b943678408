// Internal: each subcommand lives in its own file src/cli/command_<name>.cpp and
// registers itself here. The callback of a chosen subcommand runs the command and
// stores its exit code; errors are thrown (latentlift::InputError, UsageError, Error)
// and turned into one line and an exit code by cli::run (src/cli/cli.cpp).
#pragma once

#include <CLI/CLI.hpp>
#include <string>

namespace latentlift::cli {

void add_analyze_command(CLI::App& app, int& exit_code);      // command_analyze.cpp
void add_column_command(CLI::App& app, int& exit_code);       // command_column.cpp
void add_climatology_command(CLI::App& app, int& exit_code);  // command_climatology.cpp
void add_reproject_command(CLI::App& app, int& exit_code);    // command_reproject.cpp
void add_quicklook_command(CLI::App& app, int& exit_code);    // command_quicklook.cpp

}  // namespace latentlift::cli

namespace latentlift {
class InputDataset;
}

namespace latentlift::cli {

/// Without surface pressure and surface height: one warning line on stderr (below-ground levels analysed).
void warn_without_surface_pressure(const InputDataset& input, const char* command);  // input_report.cpp
/// Run-summary lines: the variables used per quantity, the surface pressure and its source, the levels.
void print_input_summary(const InputDataset& input);                                  // input_report.cpp
/// "none (...)", "input (variable)" or "derived from surface geopotential (variable)".
std::string surface_pressure_description(const InputDataset& input);                 // input_report.cpp

}  // namespace latentlift::cli
