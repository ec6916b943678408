// Quicklook maps for people: one field of an analyze, reproject or climatology output as a PNG with
// coastlines, borders, a labelled graticule, title and colour bar or class legend (no world file:
// GIS layers come from `reproject --format cog`).
#pragma once

#include <array>
#include <cstddef>
#include <optional>
#include <string>

namespace latentlift::maps {

struct QuicklookOptions {
  std::string field;                         // variable name, e.g. mu_cape
  std::size_t time_index = 0;                // index along the time dimension
  std::string group;                         // climatology group: label (Jan, DJF, 12UTC) or index; "" = first
  std::size_t level_index = 0;               // index along a pressure-level dimension (per-level fields)
  std::optional<std::array<double, 2>> range;  // colour bar from/to in field units (default: 2nd-98th percentile, rounded)
  bool overwrite = false;                    // replace an existing PNG, like --overwrite
};

struct QuicklookSummary {
  int width = 0, height = 0;                 // PNG size, pixels
  int map_x = 0, map_y = 0, map_width = 0, map_height = 0, pixels_per_cell = 1;
  bool classes = false;                      // categorical legend instead of a colour bar
  double low = 0, step = 1;                  // colour bins: [low + k step, low + (k+1) step)
  int bins = 0;
  bool below_range = false, above_range = false;  // values beyond the bins (pointed bar ends)
  std::string valid_time;                    // "2031-07-14 06:00 UTC", the raw time value, or the group
  std::string group;                         // climatology group label ("" for analyses)
  std::size_t missing_cells = 0, not_applicable_cells = 0;
  // Where the map lies in the grid's own coordinates: the outer edge of the top-left cell and the
  // cell size (CRS units: m or degrees); map pixel (x, y) = map_x + (X - west) / dx * pixels_per_cell, ...
  double west = 0, north = 0, dx = 1, dy = 1;
  std::string crs_definition;                // PROJ string of the map's CRS ("" for unprojected points)
  std::string shorelines;                    // e.g. "GSHHG 2.3.7 low resolution"
  double graticule_step_deg = 0;
};

/// Renders the field to png_path (written through a temporary file). Missing data are hatched grey,
/// "not applicable" cells (column analysed, field undefined there, e.g. no LFC) are sand coloured.
/// Non-regular grids (unstructured, curvilinear) are drawn on a lon/lat grid by nearest cell.
QuicklookSummary quicklook_file(const std::string& input, const std::string& png_path, const QuicklookOptions& options);

}  // namespace latentlift::maps
