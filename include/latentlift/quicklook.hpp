// Quicklook maps: one field of an analyze or reproject output as a PNG with colour bar and title.
#pragma once

#include <array>
#include <cstddef>
#include <optional>
#include <string>

namespace latentlift::maps {

struct QuicklookOptions {
  std::string field;                         // variable name, e.g. mu_cape
  std::size_t time_index = 0;                // index along the time dimension
  std::size_t level_index = 0;               // index along any other leading dimension (level fields)
  std::optional<std::array<double, 2>> range;  // colour bar from/to in field units (default: data range)
  bool overwrite = true;
};

struct QuicklookSummary {
  int width = 0, height = 0;                 // PNG size, pixels
  int map_x = 0, map_y = 0, map_width = 0, map_height = 0, pixels_per_cell = 1;
  bool classes = false;                      // categorical legend instead of a colour bar
  double low = 0, step = 1;                  // colour bins: [low + k step, low + (k+1) step)
  int bins = 0;
  std::string valid_time;                    // "2031-07-14 06:00 UTC" or the raw time value
  std::string world_file, prj_file, aux_file;  // beside the PNG when the grid is regular; else empty
};

/// Renders the field (missing cells hatched grey) to png_path; when the grid is regular, a .pgw world
/// file, a .prj (ESRI WKT, where ESRI WKT can express the CRS) and GDAL's .png.aux.xml (WKT2) beside it.
/// Non-regular grids (unstructured,
/// curvilinear) are drawn on a lon/lat grid by nearest cell.
QuicklookSummary quicklook_file(const std::string& input, const std::string& png_path, const QuicklookOptions& options);

}  // namespace latentlift::maps
