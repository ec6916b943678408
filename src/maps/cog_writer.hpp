// Internal: Cloud-Optimized GeoTIFF layers through GDAL's COG driver (Debian libgdal-dev). RAII over
// GDAL datasets; GDAL's C API stays in cog_writer.cpp.
#pragma once

#include <string>
#include <vector>

namespace latentlift::maps::detail {

/// One field on a regular map grid, one band per time step.
struct CogLayer {
  int nx = 0, ny = 0;
  double west = 0, north = 0, resolution = 0;  // outer edges and cell size, CRS units
  std::string crs_wkt;                         // OGC WKT2
  bool classes = false;                        // byte band (classes/flags), else float32
  double nodata = -9999.0;                     // float32 no-data value; classes use 255
  std::string field, units, long_name, flag_values, flag_meanings, source;
  std::vector<std::string> band_times;         // ISO 8601 valid time per band ("" if none)
  std::vector<std::vector<double>> bands;      // per band, row-major, row 0 north; NaN = no data
};

/// Writes the layer to path as a COG (DEFLATE, internal overviews: average for float32, nearest
/// for classes; GDAL's own temporary files in memory, none on disk); Error naming `reported_as`
/// (default: path) with "No space left on device" on a full disk, else GDAL's message.
void write_cog(const std::string& path, const CogLayer& layer, const std::string& reported_as = "");

}  // namespace latentlift::maps::detail
