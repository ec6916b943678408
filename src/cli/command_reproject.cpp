// latentlift reproject OUT.nc -o MAP.nc --crs CRS --resolution RES [--bbox W,S,E,N]
//                      [--method nearest|bilinear] [--format netcdf|cog] [--field NAME]... [--time INDEX]
//                      [--overwrite] [--quiet]
#include <cstdio>
#include <memory>
#include <sstream>
#include <cctype>
#include <optional>
#include <string>
#include <vector>

#include "cli/commands.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/reproject.hpp"

namespace latentlift::cli {

namespace {

struct ReprojectArgs {
  std::string input, output, crs = "EPSG:4326", bbox, method, format;
  std::vector<std::string> fields;
  std::optional<std::size_t> time_index;
  double resolution = 0.0;
  bool overwrite = false, quiet = false;
};

std::array<double, 4> parse_bbox(const std::string& text) {
  std::array<double, 4> out{};
  std::istringstream in(text);
  std::string item;
  std::size_t n = 0;
  while (std::getline(in, item, ',')) {
    if (n == 4) throw UsageError("--bbox needs four numbers W,S,E,N, not '" + text + "'");
    try {
      std::size_t used = 0;
      out[n] = std::stod(item, &used);
      if (used != item.size()) throw std::invalid_argument(item);
    } catch (const std::exception&) {
      throw UsageError("--bbox needs four numbers W,S,E,N, not '" + text + "'");
    }
    ++n;
  }
  if (n != 4) throw UsageError("--bbox needs four numbers W,S,E,N, not '" + text + "'");
  return out;
}

int run_reproject(const ReprojectArgs& args) {
  maps::ReprojectOptions options;
  options.crs = args.crs;
  options.resolution = args.resolution;
  if (!args.bbox.empty()) options.bbox = parse_bbox(args.bbox);
  if (!args.method.empty()) options.method = maps::parse_resample_method(args.method);
  options.overwrite = args.overwrite;
  options.fields = args.fields;
  options.time_index = args.time_index;
  if (!args.format.empty()) {
    options.format = maps::parse_map_format(args.format);
  } else {  // from the output's name: .tif / .tiff is a COG
    std::string lower = args.output;
    for (char& c : lower) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    auto ends = [&](const std::string& e) { return lower.size() >= e.size() && lower.compare(lower.size() - e.size(), e.size(), e) == 0; };
    if (ends(".tif") || ends(".tiff")) options.format = maps::MapFormat::cog;
  }
  maps::ReprojectSummary summary = maps::reproject_file(args.input, args.output, options);
  if (!args.quiet)
    std::printf("reproject: wrote %s: %zu fields on %zu x %zu cells in %s, extent W %.10g S %.10g E %.10g N %.10g\n",
                args.output.c_str(), summary.fields, summary.nx, summary.ny, summary.crs_name.c_str(), summary.bbox[0],
                summary.bbox[1], summary.bbox[2], summary.bbox[3]);
  return 0;
}

}  // namespace

void add_reproject_command(CLI::App& app, int& exit_code) {
  auto args = std::make_shared<ReprojectArgs>();
  CLI::App* cmd = app.add_subcommand(
      "reproject", "Resample the fields of an analyze output onto a regular map grid (CF NetCDF for GIS)");
  cmd->add_option("input", args->input, "NetCDF output of latentlift analyze")->required()->check(CLI::ExistingFile);
  cmd->add_option("-o,--output", args->output, "Output map grid: NetCDF, or a Cloud-Optimized GeoTIFF (.tif)")->required();
  cmd->add_option("--crs", args->crs, "Target CRS: EPSG code, PROJ string or WKT (default EPSG:4326)");
  cmd->add_option("--resolution", args->resolution, "Cell size in target CRS units (degrees or metres)")->required();
  cmd->add_option("--bbox", args->bbox, "Extent W,S,E,N in target CRS units (default: the whole input grid)");
  cmd->add_option("--method", args->method,
                  "nearest or bilinear for continuous fields (default bilinear; classes always nearest)");
  cmd->add_option("--format", args->format, "netcdf (every field) or cog (one field; default for .tif outputs)");
  cmd->add_option("--field", args->fields, "Field to reproject (repeatable; cog: exactly one)");
  cmd->add_option("--time", args->time_index, "cog: only this time index (default: every time step, one band each)");
  cmd->add_flag("--overwrite", args->overwrite, "Replace an existing output file");
  cmd->add_flag("--quiet", args->quiet, "No summary line");
  cmd->callback([args, &exit_code] { exit_code = run_reproject(*args); });
}

}  // namespace latentlift::cli
