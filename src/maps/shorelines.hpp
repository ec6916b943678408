// Internal: coastlines and national borders from GSHHG (Wessel and Smith 1996, version 2.3.7;
// Debian gmt-gshhg-low/-high) read through GMT's C API (Debian libgmt-dev), as lon/lat polylines.
#pragma once

#include <array>
#include <string>
#include <vector>

namespace latentlift::maps::detail {

using LonLatLine = std::vector<std::array<double, 2>>;  // degrees east, degrees north (WGS 84)

struct Shorelines {
  std::vector<LonLatLine> coast, borders;
  char resolution = 'l';  // GSHHG resolution: c crude, l low, i intermediate, h high
  std::string description() const;  // e.g. "GSHHG 2.3.7 low resolution"
};

/// The GSHHG resolution for a map of km_per_pixel: the coarsest whose detail (crude 25 km, low 5 km,
/// intermediate 1 km, high 0.2 km; GSHHG documentation) is at most a quarter of a pixel.
char shoreline_resolution(double km_per_pixel);

/// Coastlines (all shore levels) and national borders within the lon/lat box (west < east, at most
/// 360 degrees; south < north), omitting features smaller than min_area_km2. Error when GMT or the
/// GSHHG files are missing. Serialised on a process-wide lock (GMT sessions are not thread-safe).
Shorelines read_shorelines(double west, double east, double south, double north, char resolution,
                           double min_area_km2);

}  // namespace latentlift::maps::detail
