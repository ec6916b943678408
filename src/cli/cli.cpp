// The command line: builds the CLI11 app, registers the subcommands, maps errors to
// one line on stderr and an exit code (2 bad usage or input, 1 runtime failure).
#include "latentlift/cli.hpp"

#include <cstdio>
#include <exception>
#include <new>
#include <string>

#include "cli/commands.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::cli {

namespace {

/// A message as one line of reasonable length (a safety net: values are cut short where they are quoted).
std::string one_line(const std::string& message) {
  constexpr std::size_t kMaxChars = 1000;
  std::string line;
  for (char c : message) line += (c == '\n' || c == '\r') ? ' ' : c;
  if (line.size() > kMaxChars) line = line.substr(0, kMaxChars) + "...";
  return line;
}

}  // namespace

int run(int argc, char** argv) {
  CLI::App app{"latentlift: Normand's latent instability for every column of NWP pressure-level output",
               "latentlift"};
  app.set_version_flag("--version", std::string("latentlift ") + LATENTLIFT_VERSION);
  app.require_subcommand(1);
  int exit_code = 0;
  add_analyze_command(app, exit_code);
  add_column_command(app, exit_code);
  add_climatology_command(app, exit_code);
  add_reproject_command(app, exit_code);
  add_quicklook_command(app, exit_code);
  if (argc <= 1) {  // bare `latentlift`: the usage, not only "a subcommand is required"
    std::fputs(app.help().c_str(), stderr);
    return 2;
  }
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    std::fprintf(stderr, "latentlift: %s\n", e.what());
    return 2;
  } catch (const InputError& e) {
    std::fprintf(stderr, "latentlift: %s\n", one_line(e.what()).c_str());
    return 2;
  } catch (const UsageError& e) {
    std::fprintf(stderr, "latentlift: %s\n", one_line(e.what()).c_str());
    return 2;
  } catch (const std::bad_alloc&) {
    std::fprintf(stderr, "latentlift: out of memory (try a smaller run.block_columns)\n");
    return 1;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "latentlift: %s\n", one_line(e.what()).c_str());
    return 1;
  }
  return exit_code;
}

}  // namespace latentlift::cli
