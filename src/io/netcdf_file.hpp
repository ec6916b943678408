// Internal: variable descriptions, attributes, hyperslabs and CF unpacking over netCDF-C,
// for reading analyze/climatology outputs and writing map grids (maps, stats). No physics.
#pragma once

#include <netcdf.h>

#include <cmath>
#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "io/netcdf_util.hpp"
#include "latentlift/crs.hpp"

namespace latentlift::io::detail {

using geo::Attribute;
using geo::AttributeList;

/// Throws latentlift::Error naming the file, variable and action when status is not NC_NOERR.
void check(int status, const std::string& file, const std::string& variable, const std::string& action);

struct VarInfo {
  int id = -1;
  std::string name;
  nc_type type = NC_NAT;
  std::vector<int> dim_ids;
  std::vector<std::string> dim_names;
  std::vector<std::size_t> shape;
};

VarInfo var_info(const NcFile& file, int varid);
std::vector<VarInfo> all_variables(const NcFile& file);
/// The variable called name, or nullopt.
std::optional<VarInfo> find_variable(const NcFile& file, const std::string& name);

/// Attributes of a variable (NC_GLOBAL for the file): text as text, numbers as doubles.
AttributeList read_attributes(const NcFile& file, int varid);
AttributeList read_attributes(int ncid, const std::string& path, int varid);
std::optional<std::string> text_attribute(const NcFile& file, int varid, const std::string& name);
std::optional<std::vector<double>> number_attribute(const NcFile& file, int varid, const std::string& name);
/// Writes text attributes as NC_CHAR and numbers as NC_DOUBLE.
void write_attributes(NcFile& file, int varid, const AttributeList& attributes);
void write_attributes(int ncid, const std::string& path, int varid, const AttributeList& attributes);
void write_text(NcFile& file, int varid, const std::string& name, const std::string& value);

/// The whole variable as doubles (netCDF converts the type; no unpacking).
std::vector<double> read_doubles(const NcFile& file, const VarInfo& var);
/// A hyperslab as doubles.
void read_slab(const NcFile& file, const VarInfo& var, const std::vector<std::size_t>& start,
               const std::vector<std::size_t>& count, double* out);

/// How to turn stored numbers into values: packing and missing-value markers (CF 1.8 sec. 2.5, 8.1).
struct Unpacking {
  double scale = 1.0, offset = 0.0;
  std::vector<double> missing;  // stored values that mean missing (_FillValue, missing_value, default fill)
  double valid_min = -HUGE_VAL, valid_max = HUGE_VAL;
  /// The physical value, or NaN when missing.
  double operator()(double stored) const;
};
Unpacking unpacking_of(const NcFile& file, const VarInfo& var);

}  // namespace latentlift::io::detail
