// Completing a grid_mapping variable in place in a NetCDF file being written.
#include "gis/netcdf_crs.hpp"

#include "gis/netcdf_file.hpp"
#include "latentlift/crs.hpp"

namespace latentlift::gis {

void complete_grid_mapping_variable(int ncid_in, int varid_in, int ncid_out, int varid_out,
                                    const std::string& file, const std::string& variable) {
  AttributeList present = detail::read_attributes(ncid_out, file, varid_out);
  AttributeList completed = complete_grid_mapping(detail::read_attributes(ncid_in, file, varid_in), file, variable);
  AttributeList missing;
  for (const auto& attribute : completed)
    if (!find_attribute(present, attribute.name)) missing.push_back(attribute);
  detail::write_attributes(ncid_out, file, varid_out, missing);
}

}  // namespace latentlift::gis
