// latentlift quicklook OUT.nc --field NAME [--time INDEX] [--level INDEX] [--range MIN,MAX] -o MAP.png
#include <cstdio>
#include <memory>
#include <string>

#include "cli/commands.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/quicklook.hpp"

namespace latentlift::cli {

namespace {

struct QuicklookArgs {
  std::string input, output, field, range;
  std::size_t time_index = 0, level_index = 0;
  bool quiet = false;
};

int run_quicklook(const QuicklookArgs& args) {
  maps::QuicklookOptions options;
  options.field = args.field;
  options.time_index = args.time_index;
  options.level_index = args.level_index;
  if (!args.range.empty()) {
    double low = 0, high = 0;
    char tail = 0;
    if (std::sscanf(args.range.c_str(), "%lf,%lf%c", &low, &high, &tail) != 2 || !(high > low))
      throw UsageError("--range needs MIN,MAX with MIN < MAX, not '" + args.range + "'");
    options.range = std::array<double, 2>{low, high};
  }
  maps::QuicklookSummary s = maps::quicklook_file(args.input, args.output, options);
  if (!args.quiet) {
    std::printf("quicklook: wrote %s (%d x %d px), %s, valid %s\n", args.output.c_str(), s.width, s.height,
                args.field.c_str(), s.valid_time.c_str());
    std::printf("  map at (%d, %d), %d x %d px, %d px per cell\n", s.map_x, s.map_y, s.map_width, s.map_height,
                s.pixels_per_cell);
    if (!s.classes)
      std::printf("  colour steps: %d from %.10g to %.10g (step %.10g)\n", s.bins, s.low, s.low + s.bins * s.step, s.step);
    if (!s.world_file.empty())
      std::printf("  georeferenced by %s%s%s and %s\n", s.world_file.c_str(), s.prj_file.empty() ? "" : ", ",
                  s.prj_file.c_str(), s.aux_file.c_str());
    else
      std::printf("  no world file: the grid is not regular (reproject it first for a georeferenced image)\n");
  }
  return 0;
}

}  // namespace

void add_quicklook_command(CLI::App& app, int& exit_code) {
  auto args = std::make_shared<QuicklookArgs>();
  CLI::App* cmd = app.add_subcommand("quicklook", "Draw one field of an analyze or reproject output as a PNG map");
  cmd->add_option("input", args->input, "NetCDF output of latentlift analyze or reproject")
      ->required()
      ->check(CLI::ExistingFile);
  cmd->add_option("--field", args->field, "Field to draw, e.g. mu_cape or latent_class")->required();
  cmd->add_option("--time", args->time_index, "Time index (default 0)");
  cmd->add_option("--level", args->level_index, "Level index for per-level fields (default 0)");
  cmd->add_option("--range", args->range, "Colour bar MIN,MAX in field units (default: the data range)");
  cmd->add_option("-o,--output", args->output, "Output PNG; a .pgw world file and .prj are written beside it")
      ->required();
  cmd->add_flag("--quiet", args->quiet, "No summary");
  cmd->callback([args, &exit_code] { exit_code = run_quicklook(*args); });
}

}  // namespace latentlift::cli
