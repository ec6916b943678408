// latentlift quicklook OUT.nc|STATS.nc --field NAME [--time INDEX] [--group NAME|INDEX] [--level INDEX]
//                      [--range MIN,MAX] -o MAP.png [--overwrite]
#include <cstdio>
#include <memory>
#include <string>

#include "cli/commands.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/quicklook.hpp"

namespace latentlift::cli {

namespace {

struct QuicklookArgs {
  std::string input, output, field, range, group;
  std::size_t time_index = 0, level_index = 0;
  bool quiet = false, overwrite = false;
};

int run_quicklook(const QuicklookArgs& args) {
  maps::QuicklookOptions options;
  options.field = args.field;
  options.time_index = args.time_index;
  options.level_index = args.level_index;
  options.group = args.group;
  options.overwrite = args.overwrite;
  if (!args.range.empty()) {
    double low = 0, high = 0;
    char tail = 0;
    if (std::sscanf(args.range.c_str(), "%lf,%lf%c", &low, &high, &tail) != 2 || !(high > low))
      throw UsageError("--range needs MIN,MAX with MIN < MAX, not '" + args.range + "'");
    options.range = std::array<double, 2>{low, high};
  }
  maps::QuicklookSummary s = maps::quicklook_file(args.input, args.output, options);
  if (!args.quiet) {
    std::printf("quicklook: wrote %s (%d x %d px), %s, %s%s\n", args.output.c_str(), s.width, s.height,
                args.field.c_str(), s.group.empty() ? "valid " : "", s.valid_time.c_str());
    std::printf("  map at (%d, %d), %d x %d px, %d px per cell\n", s.map_x, s.map_y, s.map_width, s.map_height,
                s.pixels_per_cell);
    std::printf("  map edges in the grid's CRS: west %.12g north %.12g, cell %.12g x %.12g\n", s.west, s.north, s.dx, s.dy);
    if (!s.classes)
      std::printf("  colour steps: %d from %.10g to %.10g (step %.10g)%s%s\n", s.bins, s.low, s.low + s.bins * s.step,
                  s.step, s.below_range ? ", values below (pointed end)" : "", s.above_range ? ", values above (pointed end)" : "");
    std::printf("  missing cells %zu, not applicable cells %zu\n", s.missing_cells, s.not_applicable_cells);
    std::printf("  %s, graticule every %g degrees; a picture for people: for GIS use reproject --format cog\n",
                s.shorelines.c_str(), s.graticule_step_deg);
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
  cmd->add_option("--group", args->group,
                  "Climatology group: its label (Jan, DJF, 12UTC, all) or index (default: the first)");
  cmd->add_option("--level", args->level_index, "Pressure-level index for per-level fields (default 0)");
  cmd->add_option("--range", args->range,
                  "Colour bar MIN,MAX in field units (default: 2nd to 98th percentile, rounded)");
  cmd->add_option("-o,--output", args->output, "Output PNG (a picture for people, no world file)")->required();
  cmd->add_flag("--overwrite", args->overwrite, "Replace an existing PNG");
  cmd->add_flag("--quiet", args->quiet, "No summary");
  cmd->callback([args, &exit_code] { exit_code = run_quicklook(*args); });
}

}  // namespace latentlift::cli
