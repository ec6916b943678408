// Resampling latentlift outputs onto regular map grids in any CRS PROJ knows.
#pragma once

#include <array>
#include <cstddef>
#include <optional>
#include <string>
#include <vector>

namespace latentlift::maps {

/// automatic: bilinear for continuous fields, nearest cell for classes/flags (and for unstructured grids).
enum class ResampleMethod { automatic, nearest, bilinear };
/// "nearest" / "bilinear"; UsageError otherwise.
ResampleMethod parse_resample_method(const std::string& text);

/// netcdf: CF-1.8 NetCDF-4 with every field (or those named); cog: a Cloud-Optimized GeoTIFF of one field.
enum class MapFormat { netcdf, cog };
/// "netcdf" / "cog"; UsageError otherwise.
MapFormat parse_map_format(const std::string& text);

struct ReprojectOptions {
  std::string crs = "EPSG:4326";  // EPSG code, PROJ string or WKT
  double resolution = 0.0;        // cell size in target CRS units (degrees or m), > 0
  std::optional<std::array<double, 4>> bbox;  // west, south, east, north cell edges, target CRS units
  ResampleMethod method = ResampleMethod::automatic;
  MapFormat format = MapFormat::netcdf;
  std::vector<std::string> fields;         // only these fields (cog: exactly one); empty: every field (netcdf)
  std::optional<std::size_t> time_index;   // cog: only this time step (default: every step, one band each)
  bool overwrite = false;
};

struct ReprojectSummary {
  std::size_t nx = 0, ny = 0, fields = 0;
  std::array<double, 4> bbox{};  // west, south, east, north as written
  std::string crs_name;
};

/// Reads the CF NetCDF `input`, writes `output` (CF-1.8 NetCDF-4, or a COG: float32 with no-data -9999,
/// byte with no-data 255 for classes, one band per time step with its valid time, units and long name in the
/// metadata; through a temporary file renamed into place). Without bbox the extent covers the input
/// once: all longitudes for grids round the globe, Mercator maps limited to +-85.0511 degrees.
/// Missing where a target cell lies outside the source grid or a needed source neighbour is missing.
ReprojectSummary reproject_file(const std::string& input, const std::string& output, const ReprojectOptions& options);

}  // namespace latentlift::maps
