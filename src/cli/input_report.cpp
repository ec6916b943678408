// What the input supplied, said the same way by every command: the variables used per
// quantity, the surface pressure and its source, the pressure levels analysed.
#include <cstdio>
#include <string>

#include "cli/commands.hpp"
#include "latentlift/netcdf_io.hpp"

namespace latentlift::cli {

namespace {

QuantitySource surface_source(const InputDataset& input) {
  for (const QuantitySource& s : input.sources())
    if (s.quantity == "surface_air_pressure" || s.quantity == "surface_altitude" ||
        s.quantity == "surface_geopotential")
      return s;
  return {};
}

}  // namespace

std::string surface_pressure_description(const InputDataset& input) {
  const QuantitySource s = surface_source(input);
  switch (input.surface_pressure_source()) {
    case SurfacePressureSource::input:
      return "input ('" + s.variable + "' in " + s.file + ")";
    case SurfacePressureSource::derived_from_surface_geopotential:
      return "derived from the surface height ('" + s.variable + "' in " + s.file +
             ") and the column's geopotential heights";
    case SurfacePressureSource::none:
      break;
  }
  return "none (no surface pressure nor surface geopotential/orography: levels below the ground are analysed as air)";
}

void warn_without_surface_pressure(const InputDataset& input, const char* command) {
  if (input.surface_pressure_source() != SurfacePressureSource::none) return;
  std::fprintf(stderr,
               "%s: warning: the input has no surface pressure and no surface geopotential or orography: levels "
               "below the ground (which model post-processing extrapolates) are analysed as air; give a file with "
               "either, or set input.require_surface_pressure = true to refuse such input\n",
               command);
}

void print_input_summary(const InputDataset& input) {
  for (const QuantitySource& s : input.sources())
    std::printf("  %s: '%s' (%s) in %s\n", s.quantity.c_str(), s.variable.c_str(), s.units.c_str(), s.file.c_str());
  std::printf("  surface pressure: %s\n", surface_pressure_description(input).c_str());
  if (!input.common_levels_note().empty()) std::printf("  pressure levels: %s\n", input.common_levels_note().c_str());
}

}  // namespace latentlift::cli
