// Internal hook for NetCDF writers: complete a copied grid_mapping variable with crs_wkt
// and the CF parameters PROJ derives (see complete_grid_mapping in latentlift/crs.hpp).
#pragma once

#include <string>

namespace latentlift::gis {

/// Reads the grid_mapping attributes of (ncid_in, varid_in) and adds to (ncid_out, varid_out), in define
/// mode, every attribute of the completed mapping it lacks (crs_wkt, earth figure, CF parameters).
/// InputError(file, variable, ...) when the mapping is unknown or inconsistent.
void complete_grid_mapping_variable(int ncid_in, int varid_in, int ncid_out, int varid_out,
                                    const std::string& file, const std::string& variable);

}  // namespace latentlift::gis
