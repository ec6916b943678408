// latentlift climatology INPUT.nc... -o STATS.nc [--group all|month|season|hour] [--update]
//                       [--config FILE] [--set KEY=VALUE]... [--threads N] [--quiet]
// Under mpirun (built with MPI) the ranks share the time steps; rank 0 writes.
#include <chrono>
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "cli/commands.hpp"
#include "io/netcdf_util.hpp"
#include "latentlift/climatology.hpp"
#include "latentlift/comm.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/parallel.hpp"

namespace latentlift::cli {

namespace {

struct ClimatologyArgs {
  std::vector<std::string> inputs;
  std::string output, group, config;
  std::vector<std::string> sets;
  int threads = 0;
  bool update = false, quiet = false, level_fields = false;
};

int run(const ClimatologyArgs& args) {
  climatology::ClimatologyOptions options;
  options.inputs = args.inputs;
  options.output = args.output;
  options.group_given = !args.group.empty();
  if (options.group_given) options.group_by = climatology::parse_group_by(args.group);
  options.update = args.update;
  options.threads = args.threads;
  options.quiet = args.quiet;
  options.config_path = args.config;
  options.overrides = args.sets;
  options.level_fields = args.level_fields;
  std::string words = io::detail::utc_timestamp() + " latentlift climatology";
  for (const auto& in : args.inputs) words += " " + in;
  words += " -o " + args.output;
  if (!args.group.empty()) words += " --group " + args.group;
  if (args.update) words += " --update";
  if (args.level_fields) words += " --level-fields";
  if (!args.config.empty()) words += " --config " + args.config;
  for (const auto& s : args.sets) words += " --set " + s;
  options.command_line = words;
  try {
    const auto summary = climatology::run_climatology(options);
    if (!args.quiet && comm::world().rank() == 0)
      std::printf("climatology: wrote %s\n  time steps added %ld, total %ld; %d rank(s) x %d thread(s), %.2f s "
                  "(%.1f time steps/s)\n",
                  args.output.c_str(), summary.time_steps_added, summary.time_steps_total, summary.ranks,
                  parallel::max_threads(), summary.seconds,
                  summary.seconds > 0 ? summary.time_steps_added / summary.seconds : 0.0);
  } catch (const comm::RankFailed& e) {
    return e.exit_code();  // the failing rank printed the reason
  }
  return 0;
}

}  // namespace

void add_climatology_command(CLI::App& app, int& exit_code) {
  auto args = std::make_shared<ClimatologyArgs>();
  CLI::App* cmd = app.add_subcommand(
      "climatology", "Per-grid-point instability statistics over many time steps (mergeable; MPI under mpirun)");
  cmd->add_option("inputs", args->inputs,
                  "latentlift analyze outputs, pressure-level model inputs (analysed here) or climatology files (merged)")
      ->required()
      ->check(CLI::ExistingFile);
  cmd->add_option("-o,--output", args->output, "Statistics file (STATS.nc)")->required();
  cmd->add_option("--group", args->group, "Group the valid times: all (default), month, season or hour")
      ->check(CLI::IsMember({"all", "month", "season", "hour"}));
  cmd->add_flag("--update", args->update, "Add the inputs to the existing STATS.nc (time steps already counted are refused)");
  cmd->add_option("--config", args->config, "Configuration file (TOML), for model inputs")->check(CLI::ExistingFile);
  cmd->add_option("--set", args->sets, "Override a configuration key: section.key=value (repeatable)")
      ->allow_extra_args(false)
      ->take_all();
  cmd->add_option("--threads", args->threads, "Threads over columns per process (0 or not given: all cores)")
      ->check(CLI::NonNegativeNumber);
  cmd->add_flag("--quiet", args->quiet, "No run summary");
  cmd->add_flag("--level-fields", args->level_fields,
                "Model inputs: also count the static stability classes of every layer (slower)");
  cmd->callback([args, &exit_code] { exit_code = run(*args); });
}

}  // namespace latentlift::cli
