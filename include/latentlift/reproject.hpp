// Resampling latentlift outputs onto regular map grids in any CRS PROJ knows.
#pragma once

#include <array>
#include <cstddef>
#include <optional>
#include <string>

namespace latentlift::maps {

/// automatic: bilinear for continuous fields, nearest cell for classes/flags (and for unstructured grids).
enum class ResampleMethod { automatic, nearest, bilinear };
/// "nearest" / "bilinear"; UsageError otherwise.
ResampleMethod parse_resample_method(const std::string& text);

struct ReprojectOptions {
  std::string crs = "EPSG:4326";  // EPSG code, PROJ string or WKT
  double resolution = 0.0;        // cell size in target CRS units (degrees or m), > 0
  std::optional<std::array<double, 4>> bbox;  // west, south, east, north cell edges, target CRS units
  ResampleMethod method = ResampleMethod::automatic;
  bool overwrite = false;
};

struct ReprojectSummary {
  std::size_t nx = 0, ny = 0, fields = 0;
  std::array<double, 4> bbox{};  // west, south, east, north as written
  std::string crs_name;
};

/// Reads the CF NetCDF `input`, writes `output` (CF-1.8 NetCDF-4, temp file renamed into place).
/// Missing where a target cell lies outside the source grid or a needed source neighbour is missing.
ReprojectSummary reproject_file(const std::string& input, const std::string& output, const ReprojectOptions& options);

}  // namespace latentlift::maps
