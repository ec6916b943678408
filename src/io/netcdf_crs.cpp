// Completing a grid_mapping variable in place in a NetCDF file being written.
#include "io/netcdf_crs.hpp"

#include "io/netcdf_file.hpp"
#include "latentlift/crs.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

void complete_grid_mapping_variable(int ncid_in, int varid_in, int ncid_out, int varid_out,
                                    const std::string& file, const std::string& variable) {
  AttributeList present = read_attributes(ncid_out, file, varid_out);
  AttributeList completed = geo::complete_grid_mapping(read_attributes(ncid_in, file, varid_in), file, variable);
  AttributeList missing;
  for (const auto& attribute : completed)
    if (!geo::find_attribute(present, attribute.name)) missing.push_back(attribute);
  write_attributes(ncid_out, file, varid_out, missing);
}

LatLonVariableIds define_latlon_variables(int ncid_out, const std::string& y_dim, const std::string& x_dim,
                                          const std::string& file, const std::string& lat_name,
                                          const std::string& lon_name) {
  int dims[2];
  check(nc_inq_dimid(ncid_out, y_dim.c_str(), &dims[0]), file, y_dim, "no such dimension");
  check(nc_inq_dimid(ncid_out, x_dim.c_str(), &dims[1]), file, x_dim, "no such dimension");
  LatLonVariableIds ids;
  check(nc_def_var(ncid_out, lat_name.c_str(), NC_DOUBLE, 2, dims, &ids.latitude), file, lat_name, "define");
  check(nc_def_var(ncid_out, lon_name.c_str(), NC_DOUBLE, 2, dims, &ids.longitude), file, lon_name, "define");
  write_attributes(ncid_out, file, ids.latitude,
                           {{"standard_name", std::string("latitude")}, {"long_name", std::string("latitude")},
                            {"units", std::string("degrees_north")}});
  write_attributes(ncid_out, file, ids.longitude,
                           {{"standard_name", std::string("longitude")}, {"long_name", std::string("longitude")},
                            {"units", std::string("degrees_east")}});
  return ids;
}

namespace {
std::vector<double> coordinate_in_native_units(int ncid, const std::string& name, const std::string& file) {
  int varid = -1, ndims = 0, dimid = -1;
  check(nc_inq_varid(ncid, name.c_str(), &varid), file, name, "no such variable");
  check(nc_inq_varndims(ncid, varid, &ndims), file, name, "dimensions");
  if (ndims != 1) throw InputError(file, name, "a 1-D coordinate variable");
  check(nc_inq_vardimid(ncid, varid, &dimid), file, name, "dimensions");
  std::size_t length = 0;
  check(nc_inq_dimlen(ncid, dimid, &length), file, name, "dimension length");
  std::vector<double> values(length);
  check(nc_get_var_double(ncid, varid, values.data()), file, name, "read");
  AttributeList attributes = read_attributes(ncid, file, varid);
  const Attribute* units = geo::find_attribute(attributes, "units");
  std::string text = units ? std::get_if<std::string>(&units->value) ? std::get<std::string>(units->value) : "" : "";
  if (text == "km" || text == "kilometre" || text == "kilometres" || text == "kilometer" || text == "kilometers")
    for (double& v : values) v *= 1000.0;
  return values;
}
}  // namespace

void write_latlon_variables(int ncid_in, const std::string& x_var, const std::string& y_var,
                            const std::string& grid_mapping_var, int ncid_out, const LatLonVariableIds& ids,
                            const std::string& file) {
  int mapping = -1;
  check(nc_inq_varid(ncid_in, grid_mapping_var.c_str(), &mapping), file, grid_mapping_var, "no such variable");
  geo::LatLonGrid grid = geo::latlon_of_projected(read_attributes(ncid_in, file, mapping),
                                        coordinate_in_native_units(ncid_in, x_var, file),
                                        coordinate_in_native_units(ncid_in, y_var, file), file, grid_mapping_var);
  check(nc_put_var_double(ncid_out, ids.latitude, grid.latitude_deg.data()), file, "lat", "write");
  check(nc_put_var_double(ncid_out, ids.longitude, grid.longitude_deg.data()), file, "lon", "write");
}

}  // namespace latentlift::io::detail
