// Internal hook for NetCDF writers: complete a copied grid_mapping variable with crs_wkt
// and the CF parameters PROJ derives (see complete_grid_mapping in latentlift/crs.hpp).
#pragma once

#include <string>

namespace latentlift::io::detail {

/// Reads the grid_mapping attributes of (ncid_in, varid_in) and adds to (ncid_out, varid_out), in define
/// mode, every attribute of the completed mapping it lacks (crs_wkt, earth figure, CF parameters).
/// InputError(file, variable, ...) when the mapping is unknown or inconsistent.
void complete_grid_mapping_variable(int ncid_in, int varid_in, int ncid_out, int varid_out,
                                    const std::string& file, const std::string& variable);

/// Ids of 2-D latitude/longitude variables defined by define_latlon_variables.
struct LatLonVariableIds {
  int latitude = -1, longitude = -1;
};

/// For a projected or rotated-pole grid without 2-D latitude/longitude: defines (define mode) double
/// variables lat_name/lon_name over (y_dim, x_dim) in ncid_out with CF standard_name and units.
LatLonVariableIds define_latlon_variables(int ncid_out, const std::string& y_dim, const std::string& x_dim,
                                          const std::string& file, const std::string& lat_name = "lat",
                                          const std::string& lon_name = "lon");

/// Fills them (data mode): latitude/longitude in degrees of every (y, x) cell centre, computed with PROJ
/// from the 1-D coordinate variables x_var/y_var (m or km, or degrees for rotated pole) and the
/// grid_mapping variable of ncid_in (see latlon_of_projected).
void write_latlon_variables(int ncid_in, const std::string& x_var, const std::string& y_var,
                            const std::string& grid_mapping_var, int ncid_out, const LatLonVariableIds& ids,
                            const std::string& file);

}  // namespace latentlift::io::detail
