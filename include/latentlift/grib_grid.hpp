// GRIB grid definitions (section 2 of GRIB1, section 3 of GRIB2, as ecCodes keys) -> the
// CF grid mapping, 1-D coordinates and point order of the NetCDF path. Pure: PROJ, no I/O.
#pragma once

#include <cstddef>
#include <string>
#include <vector>

#include "latentlift/crs.hpp"

namespace latentlift::geo {

/// The numbers of a GRIB grid definition (ecCodes key names in comments; degrees, metres).
struct GribGridDefinition {
  std::string grid_type;          // gridType: regular_ll, regular_gg, rotated_ll, lambert, polar_stereographic, mercator
  long ni = 0, nj = 0;            // Ni/Nx, Nj/Ny: points along a row, rows
  double lat_first = 0, lon_first = 0, lat_last = 0, lon_last = 0;  // latitudeOfFirstGridPointInDegrees ...
  double dx_m = 0, dy_m = 0;      // DxInMetres/DyInMetres (DiInMetres/DjInMetres for mercator)
  double lov = 0, lad = 60;       // LoVInDegrees, LaDInDegrees (latitude where Dx/Dy hold)
  double latin1 = 0, latin2 = 0;  // Latin1InDegrees, Latin2InDegrees (lambert)
  bool south_pole = false;        // projectionCentreFlag bit 1: projection from the south pole
  double south_pole_lat = -90, south_pole_lon = 0, rotation_deg = 0;  // rotated_ll
  std::vector<double> row_latitudes;  // regular_gg: latitude of each row in scanning order
  bool i_negative = false, j_positive = false, j_consecutive = false, alternate_rows = false;  // scanning mode
  double earth_major_m = 6371229, earth_minor_m = 6371229;  // shapeOfTheEarth (sphere: equal)
};

/// A grid as the NetCDF path describes it: 1-D coordinates of rows (y) and columns (x) in the
/// order of GRIB scanning, and the CF grid mapping (earth figure and crs_wkt included).
struct GribGeometry {
  enum class Kind { latlon, rotated, projected } kind = Kind::latlon;
  std::string y_name, x_name;              // latitude/longitude, rlat/rlon, y/x
  std::string y_standard_name, x_standard_name, y_units, x_units;
  std::vector<double> y, x;                // per row j, per column i
  AttributeList grid_mapping;              // CF attributes of the grid_mapping variable
};

/// Geometry of a grid definition; InputError(file, "", ...) naming any grid type or parameter not handled.
GribGeometry grib_geometry(const GribGridDefinition& grid, const std::string& file);

/// Row-major index (row j * ni + column i) of the k-th value as ecCodes decodes it (alternating rows
/// already turned round by ecCodes) under the grid's scanning mode.
std::size_t grib_point_index(const GribGridDefinition& grid, std::size_t k);

/// Earth figure (semi-major, semi-minor axis, m) of GRIB2 code table 3.2 shapeOfTheEarth (0-9 but 3, 7 given
/// through major/minor); InputError naming the code otherwise.
void grib_earth_figure(long shape, double given_major_m, double given_minor_m, double given_radius_m,
                       double& major_m, double& minor_m, const std::string& file);

}  // namespace latentlift::geo
