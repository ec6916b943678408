// Internal: the horizontal grid of a field in an analyze or reproject output, found from
// CF coordinate variables, the coordinates attribute and the grid_mapping.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "io/netcdf_file.hpp"
#include "latentlift/crs.hpp"

namespace latentlift::maps::detail {

struct SourceGrid {
  enum class Kind {
    rectilinear,  // 1-D x and y coordinate variables in the grid's CRS (projected, lat/lon or rotated pole)
    points        // lat/lon per cell: unstructured (one dimension) or curvilinear (two)
  };
  Kind kind = Kind::rectilinear;
  std::optional<geo::Crs> crs;      // rectilinear: the CRS of x/y; points: the geographic CRS of lon/lat
  std::string mapping_variable;  // empty when the file has no grid_mapping
  geo::AttributeList mapping;         // the input grid_mapping attributes
  std::vector<std::string> dims;       // horizontal dimensions, slowest first
  std::vector<std::size_t> shape;
  std::string x_name, y_name;          // rectilinear coordinate variables
  std::vector<double> x, y;            // rectilinear native coordinates (m or degrees)
  std::vector<double> lon, lat;        // points: per cell, degrees
  std::size_t size() const {
    std::size_t n = 1;
    for (auto s : shape) n *= s;
    return n;
  }
  /// Whether x/y are evenly spaced (a world file / GeoTransform describes them).
  bool regular() const;
};

/// The horizontal grid of field; InputError when it cannot be identified unambiguously.
SourceGrid grid_of(const io::detail::NcFile& file, const io::detail::VarInfo& field);

/// Whether var is a data field on this grid (its trailing dimensions are the grid's; not a coordinate).
bool is_field_on(const io::detail::NcFile& file, const io::detail::VarInfo& var, const SourceGrid& grid);

/// Whether a field holds classes or flags (byte type, flag_values or flag_masks): resampled by nearest cell.
bool is_class_field(const io::detail::NcFile& file, const io::detail::VarInfo& var);

/// One horizontal slice of field (leading indices given, e.g. {time}), unpacked; NaN where missing.
std::vector<double> read_slice(const io::detail::NcFile& file, const io::detail::VarInfo& field, const SourceGrid& grid,
                               const std::vector<std::size_t>& leading_index);

}  // namespace latentlift::maps::detail
