// The command line: subcommands analyze, column, climatology, reproject, quicklook.
#pragma once

namespace latentlift::cli {

/// Parse argv and run the subcommand; returns the exit code (0 ok, 1 runtime failure, 2 bad usage or input).
int run(int argc, char** argv);

}  // namespace latentlift::cli
