// The NetCDF reader: finds the quantities, classifies dimensions, converts to SI, reads blocks.
#include <netcdf.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>
#include <map>
#include <set>
#include <sstream>

#include "io/dataset_impl.hpp"
#include "io/first_failure.hpp"
#include "io/plausibility.hpp"
#include "latentlift/crs.hpp"
#include "latentlift/errors.hpp"

namespace latentlift {

using io::detail::DimRole;
using io::detail::NcFile;
using io::detail::Segment;
using io::detail::VarRef;
using io::detail::VarShape;
namespace d = io::detail;

namespace {

constexpr double kStandardGravity = 9.80665;  // m s-2 (CGPM 1901): geopotential height = geopotential / g

const double kNaN = std::numeric_limits<double>::quiet_NaN();

bool is_one_of(const std::string& text, std::initializer_list<const char*> options) {
  for (const char* option : options)
    if (text == option) return true;
  return false;
}

bool is_latitude(int ncid, int varid) {
  std::string sn = d::text_attribute(ncid, varid, "standard_name");
  std::string units = d::text_attribute(ncid, varid, "units");
  return sn == "latitude" ||
         is_one_of(units, {"degrees_north", "degree_north", "degree_N", "degrees_N", "degreeN", "degreesN"});
}

bool is_longitude(int ncid, int varid) {
  std::string sn = d::text_attribute(ncid, varid, "standard_name");
  std::string units = d::text_attribute(ncid, varid, "units");
  return sn == "longitude" ||
         is_one_of(units, {"degrees_east", "degree_east", "degree_E", "degrees_E", "degreeE", "degreesE"});
}

bool is_pressure_coordinate(int ncid, int varid) {
  std::string units = d::text_attribute(ncid, varid, "units");
  if (units.empty() || units.find(" since ") != std::string::npos) return false;
  return d::convertible(units, "Pa");
}

bool is_time_coordinate(int ncid, int varid) {
  std::string units = d::text_attribute(ncid, varid, "units");
  return units.find(" since ") != std::string::npos || d::text_attribute(ncid, varid, "axis") == "T" ||
         d::text_attribute(ncid, varid, "standard_name") == "time";
}

bool is_horizontal_coordinate(int ncid, int varid) {
  std::string sn = d::text_attribute(ncid, varid, "standard_name");
  std::string axis = d::text_attribute(ncid, varid, "axis");
  return is_latitude(ncid, varid) || is_longitude(ncid, varid) || axis == "X" || axis == "Y" ||
         is_one_of(sn, {"projection_x_coordinate", "projection_y_coordinate", "grid_latitude",
                        "grid_longitude", "projection_x_angular_coordinate",
                        "projection_y_angular_coordinate"});
}

std::vector<std::string> split_words(const std::string& text) {
  std::istringstream in(text);
  std::vector<std::string> words;
  for (std::string word; in >> word;) words.push_back(word);
  return words;
}

/// Latitude/longitude auxiliary variables of a data variable: its `coordinates` attribute,
/// else any non-coordinate variable of the file with latitude/longitude units over its dims.
void find_lat_lon_aux(int ncid, int varid, const VarShape& shape, std::string& lat, std::string& lon) {
  std::vector<std::string> names = split_words(d::text_attribute(ncid, varid, "coordinates"));
  const int nvars = d::variable_count(ncid);
  if (names.empty())
    for (int v = 0; v < nvars; ++v) names.push_back(d::var_name(ncid, v));
  for (const std::string& name : names) {
    int id = d::find_var(ncid, name);
    if (id < 0) continue;
    VarShape s = d::var_shape(ncid, id);
    if (s.names.empty() || (s.names.size() == 1 && s.names[0] == name)) continue;  // a coordinate variable
    bool inside = std::all_of(s.names.begin(), s.names.end(), [&](const std::string& n) {
      return std::find(shape.names.begin(), shape.names.end(), n) != shape.names.end();
    });
    if (!inside) continue;
    if (lat.empty() && is_latitude(ncid, id)) lat = name;
    if (lon.empty() && is_longitude(ncid, id)) lon = name;
  }
}

/// Roles of the dimensions of a variable. vertical_dims counts the pressure dimensions.
std::vector<DimRole> classify(int ncid, int varid, const VarShape& shape, int& vertical_dims) {
  std::vector<DimRole> roles(shape.names.size(), DimRole::outer);
  std::string lat, lon;
  find_lat_lon_aux(ncid, varid, shape, lat, lon);
  std::set<std::string> aux_dims;
  for (const std::string& name : {lat, lon})
    if (!name.empty())
      for (const std::string& dim : d::var_shape(ncid, d::find_var(ncid, name)).names) aux_dims.insert(dim);
  vertical_dims = 0;
  for (std::size_t i = 0; i < shape.names.size(); ++i) {
    const std::string& dim = shape.names[i];
    int coord = d::coordinate_var(ncid, dim);
    if (coord >= 0 && is_pressure_coordinate(ncid, coord)) {
      roles[i] = DimRole::vertical;
      ++vertical_dims;
    } else if (coord >= 0 && is_time_coordinate(ncid, coord)) {
      roles[i] = DimRole::outer;
    } else if ((coord >= 0 && is_horizontal_coordinate(ncid, coord)) || aux_dims.count(dim)) {
      roles[i] = DimRole::horizontal;
    } else if (is_one_of(dim, {"x", "y", "cell", "cells", "ncells", "nCells", "ncol", "node",
                                            "nod2", "west_east", "south_north", "rlat", "rlon", "lat",
                                            "lon", "latitude", "longitude", "xc", "yc"})) {
      roles[i] = DimRole::horizontal;
    }
  }
  return roles;
}

bool is_time_dim(int ncid, const std::string& dim) {
  int coord = d::coordinate_var(ncid, dim);
  if (coord >= 0) return is_time_coordinate(ncid, coord);
  return dim == "time";
}

/// A quantity the reader looks for: standard names (in preference order) with their SI target units.
struct Wanted {
  const char* standard_name;
  const char* si_units;
  HumidityKind kind;
};

struct Candidate {
  int varid = -1;
  std::string standard_name;
};

/// Find a variable of one of `wanted` in a file: CF standard_name first, then aliases.
/// need_vertical: 3-D fields need a pressure dimension (a 2-D field sharing the standard_name,
/// e.g. orography tagged geopotential_height, is never taken); surface fields must lack one.
/// Two variables with the same standard_name are an InputError listing both, unless the user
/// named one of them in the aliases of that quantity (`chosen`).
Candidate find_quantity(int ncid, const std::vector<Wanted>& wanted, const InputAliases& aliases,
                        bool need_vertical, const std::string& path = "",
                        const std::vector<std::string>& chosen = {}) {
  auto fits = [&](int varid) {
    VarShape shape = d::var_shape(ncid, varid);
    int vertical = 0;
    classify(ncid, varid, shape, vertical);
    return need_vertical ? vertical == 1 : vertical == 0 && !shape.names.empty();
  };
  const int nvars = d::variable_count(ncid);
  for (const Wanted& w : wanted) {
    std::vector<int> candidates;
    for (int v = 0; v < nvars; ++v)
      if (d::text_attribute(ncid, v, "standard_name") == w.standard_name && fits(v)) candidates.push_back(v);
    if (candidates.empty()) continue;
    if (candidates.size() == 1 || path.empty()) return {candidates[0], w.standard_name};
    auto it = aliases.find(w.standard_name);
    if (it != aliases.end() && std::find(chosen.begin(), chosen.end(), w.standard_name) != chosen.end())
      for (const std::string& name : it->second)
        for (int v : candidates)
          if (d::var_name(ncid, v) == name) return {v, w.standard_name};
    std::string names;
    for (int v : candidates) names += (names.empty() ? "'" : ", '") + d::var_name(ncid, v) + "'";
    throw InputError(path, "", std::string("one variable with standard_name '") + w.standard_name + "', found " +
                                   std::to_string(candidates.size()) + ": " + names + " (name the one to use with --set input." +
                                   w.standard_name + "=NAME)");
  }
  for (const Wanted& w : wanted) {
    auto it = aliases.find(w.standard_name);
    if (it == aliases.end()) continue;
    for (const std::string& name : it->second) {
      int v = d::find_var(ncid, name);
      if (v >= 0 && fits(v)) return {v, w.standard_name};
    }
  }
  return {};
}

std::string looked_for(const std::vector<Wanted>& wanted, const InputAliases& aliases, bool need_vertical) {
  std::string text = "standard_name ";
  for (std::size_t i = 0; i < wanted.size(); ++i) text += (i ? " or '" : "'") + std::string(wanted[i].standard_name) + "'";
  std::string names;
  for (const Wanted& w : wanted) {
    auto it = aliases.find(w.standard_name);
    if (it == aliases.end()) continue;
    for (const std::string& name : it->second) names += (names.empty() ? "" : ", ") + name;
  }
  if (!names.empty()) text += ", or a variable named " + names;
  text += need_vertical ? ", on a pressure dimension" : ", without a pressure dimension";
  return text;
}

const std::vector<Wanted> kTemperature = {{"air_temperature", "K", HumidityKind::specific_humidity}};
const std::vector<Wanted> kHumidity = {
    {"specific_humidity", "1", HumidityKind::specific_humidity},
    {"humidity_mixing_ratio", "1", HumidityKind::mixing_ratio},
    {"dew_point_temperature", "K", HumidityKind::dew_point},
    {"relative_humidity", "1", HumidityKind::relative_humidity}};
const std::vector<Wanted> kHeight = {{"geopotential_height", "m", HumidityKind::specific_humidity},
                                     {"geopotential", "m2 s-2", HumidityKind::specific_humidity}};
const std::vector<Wanted> kSurfacePressure = {{"surface_air_pressure", "Pa", HumidityKind::specific_humidity}};
// Surface height: orography or surface geopotential; a field without a pressure dimension that
// is tagged geopotential(_height) is taken too (grib_to_netcdf tags NCEP orography so).
const std::vector<Wanted> kSurfaceHeight = {{"surface_altitude", "m", HumidityKind::specific_humidity},
                                            {"surface_geopotential", "m2 s-2", HumidityKind::specific_humidity},
                                            {"geopotential_height", "m", HumidityKind::specific_humidity},
                                            {"geopotential", "m2 s-2", HumidityKind::specific_humidity}};

/// Build the VarRef of a found variable: packing, fill values, unit conversion to SI.
VarRef make_var(const NcFile& file, int file_index, const Candidate& found) {
  const int ncid = file.id();
  VarRef var;
  var.file = file_index;
  var.varid = found.varid;
  var.name = d::var_name(ncid, found.varid);
  var.shape = d::var_shape(ncid, found.varid);
  var.units = d::text_attribute(ncid, found.varid, "units");
  var.type = d::var_type(ncid, found.varid);
  var.quantity = found.standard_name;
  bool has_units = d::has_attribute(ncid, found.varid, "units");

  std::string target;
  double factor = 1.0;
  if (var.quantity == "air_temperature" || var.quantity == "dew_point_temperature") {
    target = "K";
  } else if (var.quantity == "specific_humidity" || var.quantity == "humidity_mixing_ratio") {
    target = "1";
    if (!has_units) var.units = "1";  // CF: dimensionless quantities may omit units
  } else if (var.quantity == "relative_humidity") {
    target = "1";
  } else if (var.quantity == "surface_air_pressure") {
    target = "Pa";
  } else {  // geopotential or geopotential height (also at the surface), told apart by the units
    const bool surface = var.quantity.rfind("surface_", 0) == 0;
    if (has_units && d::convertible(var.units, "m2 s-2")) {
      target = "m2 s-2";
      factor = 1.0 / kStandardGravity;
      var.quantity = surface ? "surface_geopotential" : "geopotential";
    } else {
      target = "m";
      var.quantity = surface ? "surface_altitude" : "geopotential_height";
    }
  }
  if (!has_units)
    throw InputError(file.path(), var.name, "a units attribute (expected units convertible to '" + target +
                                                "' for " + var.quantity + ")");
  double conv_scale = 1.0, conv_offset = 0.0;
  try {
    d::UnitConverter converter(var.units, target);
    conv_offset = converter.convert(0.0);
    conv_scale = converter.convert(1.0) - conv_offset;
  } catch (const std::invalid_argument& e) {
    std::string expectation = "units convertible to '" + target + "' for " + var.quantity;
    if (var.quantity == "geopotential_height" || var.quantity == "surface_altitude")
      expectation = "units of geopotential (m2 s-2) or geopotential height (m)";
    throw InputError(file.path(), var.name, expectation + " (" + d::shorten(e.what(), 160) + ")");
  }

  d::check_packing_attributes(ncid, found.varid, file.path(), var.name);
  var.si_per_unit = conv_scale * factor;
  var.si_offset = conv_offset * factor;
  std::vector<double> scale = d::number_attribute(ncid, found.varid, "scale_factor");
  std::vector<double> offset = d::number_attribute(ncid, found.varid, "add_offset");
  double pack_scale = scale.empty() ? 1.0 : scale[0];
  double pack_offset = offset.empty() ? 0.0 : offset[0];
  var.scale = pack_scale * conv_scale * factor;
  var.offset = (pack_offset * conv_scale + conv_offset) * factor;

  for (const char* name : {"_FillValue", "missing_value"})
    for (double value : d::number_attribute(ncid, found.varid, name)) var.fills.push_back(value);
  if (!d::has_attribute(ncid, found.varid, "_FillValue")) {
    switch (d::var_type(ncid, found.varid)) {  // netCDF default fill values (unwritten data)
      case NC_FLOAT: var.fills.push_back(static_cast<double>(NC_FILL_FLOAT)); break;
      case NC_DOUBLE: var.fills.push_back(NC_FILL_DOUBLE); break;
      case NC_SHORT: var.fills.push_back(NC_FILL_SHORT); break;
      case NC_INT: var.fills.push_back(NC_FILL_INT); break;
      case NC_USHORT: var.fills.push_back(NC_FILL_USHORT); break;
      default: break;
    }
  }
  std::vector<double> range = d::number_attribute(ncid, found.varid, "valid_range");
  if (range.size() == 2) {
    var.valid_min = range[0];
    var.valid_max = range[1];
  }
  std::vector<double> vmin = d::number_attribute(ncid, found.varid, "valid_min");
  std::vector<double> vmax = d::number_attribute(ncid, found.varid, "valid_max");
  if (!vmin.empty()) var.valid_min = vmin[0];
  if (!vmax.empty()) var.valid_max = vmax[0];
  return var;
}

/// Read a 1-D coordinate variable as double (no unpacking).
std::vector<double> coordinate_values(const NcFile& file, const std::string& name) {
  int varid = d::find_var(file.id(), name);
  if (varid < 0) return {};
  return d::read_all_doubles(file.id(), varid, file.path());
}

bool same_values(const std::vector<double>& a, const std::vector<double>& b) {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i)
    if (std::abs(a[i] - b[i]) > 1e-6 * std::max(1.0, std::abs(a[i]))) return false;
  return true;
}

/// Pressure values (Pa) of the coordinate variable of a pressure dimension.
std::vector<double> level_values_pa(const NcFile& file, const std::string& dim) {
  const int coord = d::coordinate_var(file.id(), dim);
  std::vector<double> values = d::read_all_doubles(file.id(), coord, file.path());
  d::UnitConverter(d::text_attribute(file.id(), coord, "units"), "Pa").convert(values.data(), values.size());
  return values;
}

/// Two pressure levels are the same when they agree to 0.01 Pa (float rounding of hPa values).
bool same_level(double a, double b) { return std::abs(a - b) <= 0.01 + 1e-6 * std::abs(a); }

std::string format_hpa(double pa) {
  std::ostringstream out;
  out << pa / 100.0;
  return out.str();
}

/// Time values with their units, e.g. "1016772 hours since 1900-01-01" (at most 4 values shown).
std::string format_times(const std::vector<double>& values, const std::string& units) {
  std::ostringstream out;
  out.precision(12);
  for (std::size_t i = 0; i < values.size() && i < 4; ++i) out << (i ? ", " : "") << values[i];
  if (values.size() > 4) out << ", ... (" << values.size() << " times)";
  out << " " << units;
  return out.str();
}

std::string format_levels(const std::vector<double>& pa) {
  std::string text;
  for (double p : pa) text += (text.empty() ? "" : " ") + format_hpa(p);
  return text + " hPa";
}

}  // namespace

const char* to_string(SurfacePressureSource source) {
  switch (source) {
    case SurfacePressureSource::input: return "input";
    case SurfacePressureSource::derived_from_surface_geopotential: return "derived_from_surface_geopotential";
    case SurfacePressureSource::none: break;
  }
  return "none";
}

const Segment& InputDataset::Impl::segment_of_time(std::size_t time_index, std::size_t& local) const {
  for (const Segment& segment : segments)
    if (time_index < segment.time_offset + segment.time_length) {
      local = time_index - segment.time_offset;
      return segment;
    }
  throw Error("time index " + std::to_string(time_index) + " outside the input");
}

namespace {

/// Give the float variables of NetCDF-4 files a ChunkReader where it knows their storage
/// (deflate/shuffle, chunked); the others stay with netCDF-C. Called with the netCDF lock held.
void attach_chunk_readers(InputDataset::Impl& impl) {
  std::map<std::pair<int, int>, std::shared_ptr<d::ChunkReader>> made;  // (file, varid): one reader each
  for (Segment& segment : impl.segments)
    for (VarRef* var : {&segment.temp, &segment.humidity, &segment.height, &segment.surface_pressure,
                        &segment.surface_height}) {
      if (!var->present() || (var->type != NC_FLOAT && var->type != NC_DOUBLE)) continue;
      auto key = std::make_pair(var->file, var->varid);
      auto it = made.find(key);
      if (it == made.end()) {
        int format = 0;
        std::shared_ptr<d::ChunkReader> reader;
        const NcFile& file = impl.files[var->file];
        if (!d::is_memory_id(file.id()) && nc_inq_format(file.id(), &format) == NC_NOERR &&
            (format == NC_FORMAT_NETCDF4 || format == NC_FORMAT_NETCDF4_CLASSIC)) {
          std::vector<bool> outer_dims;
          for (DimRole role : var->roles) outer_dims.push_back(role == DimRole::outer);
          reader = std::make_shared<d::ChunkReader>(file.path(), var->name, var->shape.lengths, outer_dims,
                                                    var->type == NC_FLOAT);
          if (!reader->supports()) reader.reset();
        }
        it = made.emplace(key, reader).first;
      }
      var->direct = it->second;
    }
}

/// Attach the grid roles of a variable's dimensions, checking it lies on the dataset's grid.
void bind_to_grid(InputDataset::Impl& impl, VarRef& var, bool need_vertical) {
  const NcFile& file = impl.files[var.file];
  int vertical = 0;
  var.roles = classify(file.id(), var.varid, var.shape, vertical);
  var.grid_dim.assign(var.shape.names.size(), -1);
  std::size_t horizontal_seen = 0;
  const GridDescription& grid = impl.grid;
  for (std::size_t i = 0; i < var.shape.names.size(); ++i) {
    const std::string& name = var.shape.names[i];
    const std::size_t length = var.shape.lengths[i];
    if (var.roles[i] == DimRole::vertical) {  // matched by the level values, never by the name
      std::vector<double> own = level_values_pa(file, name);
      var.levels.clear();
      for (double p : grid.pressure_pa) {
        auto at = std::find_if(own.begin(), own.end(), [&](double q) { return same_level(p, q); });
        if (at == own.end())
          throw InputError(file.path(), var.name, "the pressure level " + format_hpa(p) + " hPa of the analysis (its "
                                                      "levels on '" + name + "': " + format_levels(own) + ")");
        var.levels.push_back(static_cast<std::size_t>(at - own.begin()));
      }
      continue;
    }
    bool found = false;
    for (std::size_t h = 0; h < grid.horizontal.size(); ++h)
      if (grid.horizontal[h].name == name) {
        if (grid.horizontal[h].length != length)
          throw InputError(file.path(), var.name,
                           "the same grid as the other inputs (dimension '" + name + "' has length " +
                               std::to_string(length) + ", expected " + std::to_string(grid.horizontal[h].length) + ")");
        var.roles[i] = DimRole::horizontal;
        var.grid_dim[i] = static_cast<int>(h);
        ++horizontal_seen;
        found = true;
      }
    if (found) continue;
    for (std::size_t o = 0; o < grid.outer.size(); ++o)
      if (grid.outer[o].name == name) {
        if (!grid.outer[o].is_time && grid.outer[o].length != length)
          throw InputError(file.path(), var.name,
                           "dimension '" + name + "' of length " + std::to_string(grid.outer[o].length) +
                               " like the other inputs (found " + std::to_string(length) + ")");
        var.roles[i] = DimRole::outer;
        var.grid_dim[i] = static_cast<int>(o);
        found = true;
      }
    if (found) continue;
    if (length == 1) {  // a degenerate extra dimension (e.g. height = 1) is read at index 0
      var.roles[i] = DimRole::outer;
      var.grid_dim[i] = -2;
      continue;
    }
    throw InputError(file.path(), var.name,
                     "the same grid as the other inputs (unexpected dimension '" + name + "')");
  }
  if (horizontal_seen != grid.horizontal.size())
    throw InputError(file.path(), var.name, "the same horizontal grid as the other inputs (dimensions " +
                                                grid.horizontal[0].name +
                                                (grid.horizontal.size() > 1 ? ", " + grid.horizontal[1].name : "") + ")");
  if (need_vertical && vertical != 1)
    throw InputError(file.path(), var.name, "one pressure dimension");
}

/// Check that the horizontal coordinates of file b match those of the grid file.
void check_same_coordinates(const InputDataset::Impl& impl, int file_index) {
  if (file_index == impl.grid_file) return;
  const NcFile& a = impl.files[impl.grid_file];
  const NcFile& b = impl.files[file_index];
  for (const Dimension& dim : impl.grid.horizontal) {
    if (d::coordinate_var(a.id(), dim.name) < 0 || d::coordinate_var(b.id(), dim.name) < 0) continue;
    if (!same_values(coordinate_values(a, dim.name), coordinate_values(b, dim.name)))
      throw InputError(b.path(), dim.name, "the same grid as " + a.path() + " (coordinate values differ)");
  }
  // Pressure levels are matched per variable by their values (bind_to_grid).
}

}  // namespace

namespace {

void check_sampled_columns(const InputDataset& input);

void find_inputs(InputDataset::Impl& impl, const InputAliases& aliases, const InputConventions& conventions);

void open_files(InputDataset::Impl& impl, const std::vector<std::string>& input_paths, const InputAliases& aliases,
                const InputConventions& conventions) {
  impl.input_paths = input_paths;
  std::vector<std::string> grib_paths;
  for (const std::string& path : input_paths) {
    if (d::is_grib_file(path)) {
      grib_paths.push_back(path);
      continue;
    }
    impl.paths.push_back(path);
    impl.files.push_back(NcFile::open_read(path));
  }
  if (!grib_paths.empty()) {  // every GRIB file together: time steps, members and fields split across files
    impl.grib = std::make_unique<d::GribStaging>(grib_paths);
    impl.paths.push_back(impl.grib->label());
    impl.files.push_back(NcFile::open_read(impl.grib->path(), impl.grib->label()));
  }
  find_inputs(impl, aliases, conventions);
}

/// Everything the reader decides about the opened datasets (impl.files, named impl.paths).
void find_inputs(InputDataset::Impl& impl, const InputAliases& aliases, const InputConventions& conventions) {
  const std::vector<std::string>& chosen = conventions.chosen_quantities;
  impl.conventions = conventions;
  const std::vector<std::string>& paths = impl.paths;  // from here on: one entry per opened file
  const int nfiles = static_cast<int>(paths.size());

  // 1. Which file has which quantity.
  struct Found {
    Candidate temp, humidity, height, surface_pressure, surface_height;
  };
  std::vector<Found> found(nfiles);
  for (int f = 0; f < nfiles; ++f) {
    int ncid = impl.files[f].id();
    found[f].temp = find_quantity(ncid, kTemperature, aliases, true, paths[f], chosen);
    found[f].humidity = find_quantity(ncid, kHumidity, aliases, true, paths[f], chosen);
    found[f].height = find_quantity(ncid, kHeight, aliases, true, paths[f], chosen);
    found[f].surface_pressure = find_quantity(ncid, kSurfacePressure, aliases, false, paths[f], chosen);
    found[f].surface_height = find_quantity(ncid, kSurfaceHeight, aliases, false);  // several 2-D heights are common: first
  }
  std::string all_files;
  for (const std::string& path : paths) all_files += (all_files.empty() ? "" : ", ") + path;
  std::vector<int> temp_files;
  for (int f = 0; f < nfiles; ++f)
    if (found[f].temp.varid >= 0) temp_files.push_back(f);
  if (temp_files.empty()) {
    // Say why when a temperature exists but lacks a pressure dimension.
    for (int f = 0; f < nfiles; ++f) {
      Candidate flat = find_quantity(impl.files[f].id(), kTemperature, aliases, false);
      if (flat.varid >= 0)
        throw InputError(paths[f], d::var_name(impl.files[f].id(), flat.varid),
                         "a pressure dimension (a coordinate variable with pressure units such as Pa, hPa or "
                         "millibar); none found");
    }
    throw InputError(all_files, "", "air temperature: looked for " + looked_for(kTemperature, aliases, true));
  }

  // 2. The grid, from the first file with temperature.
  impl.grid_file = temp_files[0];
  {
    const NcFile& file = impl.files[impl.grid_file];
    const int ncid = file.id();
    const int varid = found[impl.grid_file].temp.varid;
    const std::string name = d::var_name(ncid, varid);
    VarShape shape = d::var_shape(ncid, varid);
    int vertical = 0;
    std::vector<DimRole> roles = classify(ncid, varid, shape, vertical);
    GridDescription& grid = impl.grid;
    std::string pressure_units;
    for (std::size_t i = 0; i < roles.size(); ++i) {
      const std::string& dim = shape.names[i];
      int coord = d::coordinate_var(ncid, dim);
      if (roles[i] == DimRole::vertical) {
        grid.vertical = {dim, shape.lengths[i]};
        impl.vertical_coordinate = dim;
        grid.pressure_pa = d::read_all_doubles(ncid, coord, file.path());
        pressure_units = d::text_attribute(ncid, coord, "units");
        d::UnitConverter(pressure_units, "Pa").convert(grid.pressure_pa.data(), grid.pressure_pa.size());
      } else if (roles[i] == DimRole::horizontal) {
        grid.horizontal.push_back({dim, shape.lengths[i]});
        impl.horizontal_coordinates.push_back(coord >= 0 ? dim : "");
      } else {
        grid.outer.push_back({dim, shape.lengths[i], is_time_dim(ncid, dim)});
        impl.outer_coordinates.push_back(coord >= 0 ? dim : "");
      }
    }
    if (grid.horizontal.empty() || grid.horizontal.size() > 2)
      throw InputError(file.path(), name,
                       "one or two horizontal dimensions (latitude/longitude, x/y with a grid_mapping, or cells); "
                       "found " + std::to_string(grid.horizontal.size()));
    std::size_t time_dims = 0;
    for (std::size_t o = 0; o < grid.outer.size(); ++o)
      if (grid.outer[o].is_time) {
        impl.time_outer = static_cast<int>(o);
        ++time_dims;
      }
    if (time_dims > 1) throw InputError(file.path(), name, "at most one time dimension");
    d::check_pressure_levels(file.path(), impl.vertical_coordinate, pressure_units, grid.pressure_pa);
    grid.n_columns = 1;
    double columns = 1.0;
    for (const Dimension& dim : grid.horizontal) {
      if (dim.length == 0)
        throw InputError(file.path(), name, "dimension '" + dim.name + "' has length 0: expected at least one column");
      grid.n_columns *= dim.length;
      columns *= static_cast<double>(dim.length);
    }
    d::check_memory(file.path(), name, "one level of " + std::to_string(static_cast<unsigned long long>(columns)) + " columns",
                    columns * 8.0);
    find_lat_lon_aux(ncid, varid, shape, impl.lat_var, impl.lon_var);
    if (!impl.lat_var.empty()) {
      impl.aux_coordinates = {impl.lat_var, impl.lon_var};
      if (impl.lon_var.empty()) impl.aux_coordinates.pop_back();
    } else {
      for (const Dimension& dim : grid.horizontal) {
        int coord = d::coordinate_var(ncid, dim.name);
        if (coord >= 0 && is_latitude(ncid, coord)) impl.lat_var = dim.name;
        if (coord >= 0 && is_longitude(ncid, coord)) impl.lon_var = dim.name;
      }
    }
    for (const auto& [coordinate, is_lat] : {std::pair<std::string, bool>{impl.lat_var, true}, {impl.lon_var, false}}) {
      if (coordinate.empty()) continue;
      const int id = d::find_var(ncid, coordinate);
      const std::vector<double> degrees = d::read_all_doubles(ncid, id, file.path());
      const std::string units = d::text_attribute(ncid, id, "units");
      const bool auxiliary = d::coordinate_var(ncid, coordinate) < 0;  // 2-D: may be missing outside a projection
      if (is_lat)
        d::check_latitudes(file.path(), coordinate, units, degrees, auxiliary);
      else
        d::check_longitudes(file.path(), coordinate, units, degrees, auxiliary);
    }
    if (grid.horizontal.size() == 1)
      grid.kind = HorizontalKind::unstructured;
    else if (impl.lat_var == grid.horizontal[0].name || impl.lat_var == grid.horizontal[1].name)
      grid.kind = HorizontalKind::latlon;
    else
      grid.kind = HorizontalKind::projected;
    grid.grid_mapping = d::text_attribute(ncid, varid, "grid_mapping");
    if (!grid.grid_mapping.empty() && d::find_var(ncid, grid.grid_mapping) < 0)
      throw InputError(file.path(), name, "its grid_mapping variable '" + grid.grid_mapping + "' in the file");
    grid.coordinates = d::text_attribute(ncid, varid, "coordinates");
    if (grid.coordinates.empty() && !impl.aux_coordinates.empty()) {
      grid.coordinates = impl.aux_coordinates[0];
      if (impl.aux_coordinates.size() > 1) grid.coordinates += " " + impl.aux_coordinates[1];
    }
  }

  // 3. Segments: one per file with temperature; other quantities from the same file,
  //    or from as many separate files (paired in order), or from one file for all.
  const std::size_t nseg = temp_files.size();
  impl.segments.resize(nseg);
  auto sources_of = [&](Candidate Found::*member) {
    std::vector<int> files;
    for (int f = 0; f < nfiles; ++f)
      if ((found[f].*member).varid >= 0) files.push_back(f);
    return files;
  };
  auto assign = [&](Candidate Found::*member, VarRef Segment::*slot, const char* what,
                    const std::vector<Wanted>& wanted, bool need_vertical, bool required) {
    std::vector<int> with = sources_of(member);
    std::vector<int> separate;
    for (int f : with)
      if (std::find(temp_files.begin(), temp_files.end(), f) == temp_files.end()) separate.push_back(f);
    for (std::size_t s = 0; s < nseg; ++s) {
      int f = -1;
      if ((found[temp_files[s]].*member).varid >= 0 && separate.empty())
        f = temp_files[s];
      else if (separate.size() == nseg)
        f = separate[s];
      else if (separate.size() == 1)
        f = separate[0];
      else if (!separate.empty() || with.size() != 0)
        throw InputError(all_files, "", std::string(what) + " in every file with air temperature, or in one " +
                                            "separate file per such file (found it in " + std::to_string(with.size()) +
                                            " of " + std::to_string(nfiles) + " files)");
      if (f < 0) {
        if (required)
          throw InputError(all_files, "", std::string(what) + ": looked for " + looked_for(wanted, aliases, need_vertical));
        continue;
      }
      impl.segments[s].*slot = make_var(impl.files[f], f, found[f].*member);
    }
  };
  for (std::size_t s = 0; s < nseg; ++s)
    impl.segments[s].temp = make_var(impl.files[temp_files[s]], temp_files[s], found[temp_files[s]].temp);
  assign(&Found::humidity, &Segment::humidity, "humidity", kHumidity, true, true);
  assign(&Found::height, &Segment::height, "geopotential or geopotential height", kHeight, true, true);
  assign(&Found::surface_pressure, &Segment::surface_pressure, "surface air pressure", kSurfacePressure, false, false);
  assign(&Found::surface_height, &Segment::surface_height, "surface geopotential or orography", kSurfaceHeight, false,
         false);
  for (Segment& segment : impl.segments) {  // a 2-D geopotential (height) found as surface height is one
    std::string& q = segment.surface_height.quantity;
    if (q == "geopotential_height") q = "surface_altitude";
    if (q == "geopotential") q = "surface_geopotential";
  }
  if (impl.segments[0].surface_pressure.present()) {
    impl.surface_pressure_source = SurfacePressureSource::input;
    for (Segment& segment : impl.segments) segment.surface_height = VarRef{};  // not needed
  } else if (impl.segments[0].surface_height.present()) {
    impl.surface_pressure_source = SurfacePressureSource::derived_from_surface_geopotential;
  } else if (conventions.require_surface_pressure) {
    throw InputError(all_files, "", "surface air pressure or surface geopotential/orography "
                                    "(input.require_surface_pressure = true): looked for " +
                                        looked_for(kSurfacePressure, aliases, false) + "; and for " +
                                        looked_for(kSurfaceHeight, aliases, false));
  }

  // 3b. Pressure levels: each quantity's levels by value (Pa); the analysis uses those common to all.
  {
    GridDescription& grid = impl.grid;
    const Segment& first = impl.segments[0];
    std::vector<double> common = grid.pressure_pa;
    std::string note;
    bool reduced = false;
    for (const VarRef* var : {&first.temp, &first.humidity, &first.height}) {
      const NcFile& file = impl.files[var->file];
      int vertical = 0;
      std::vector<DimRole> roles = classify(file.id(), var->varid, var->shape, vertical);
      std::vector<double> own;
      for (std::size_t i = 0; i < roles.size(); ++i)
        if (roles[i] == DimRole::vertical) own = level_values_pa(file, var->shape.names[i]);
      std::vector<double> kept;
      for (double p : common)
        if (std::any_of(own.begin(), own.end(), [&](double q) { return same_level(p, q); })) kept.push_back(p);
      reduced = reduced || kept.size() != common.size() || own.size() != grid.pressure_pa.size();
      common = kept;
      note += (note.empty() ? "" : ", ") + var->quantity + " '" + var->name + "' on " + std::to_string(own.size()) +
              " levels";
    }
    if (common.size() < 3)
      throw InputError(all_files, first.humidity.name, "at least 3 pressure levels shared by air temperature, humidity "
                                                       "and geopotential (" + note + "; " +
                                                           std::to_string(common.size()) + " in common)");
    if (reduced) {
      std::vector<double> dropped;
      for (double p : grid.pressure_pa)
        if (std::none_of(common.begin(), common.end(), [&](double q) { return same_level(p, q); })) dropped.push_back(p);
      impl.common_levels_note = note + ": analysed on the " + std::to_string(common.size()) + " levels common to all" +
                                (dropped.empty() ? std::string() : " (not used: " + format_levels(dropped) + ")");
      grid.pressure_pa = common;
      grid.vertical.length = common.size();
    }
  }

  // 4. Humidity kind must agree across segments.
  const std::string humidity_quantity = impl.segments[0].humidity.quantity;
  for (const Wanted& w : kHumidity)
    if (humidity_quantity == w.standard_name) impl.humidity_kind = w.kind;
  for (const Segment& segment : impl.segments)
    if (segment.humidity.quantity != humidity_quantity)
      throw InputError(paths[segment.humidity.file], segment.humidity.name,
                       humidity_quantity + " like the other files (found " + segment.humidity.quantity + ")");

  // 5. Time: concatenate along the time dimension of the temperature files.
  GridDescription& grid = impl.grid;
  if (nseg > 1 && impl.time_outer < 0)
    throw InputError(paths[temp_files[1]], impl.segments[1].temp.name,
                     "a time dimension: several files with air temperature are joined along time");
  std::size_t offset = 0;
  std::string first_time_units;
  for (std::size_t s = 0; s < nseg; ++s) {
    Segment& segment = impl.segments[s];
    const NcFile& file = impl.files[segment.temp.file];
    segment.time_offset = offset;
    segment.time_length = 1;
    if (impl.time_outer >= 0) {
      const std::string& time_dim = grid.outer[impl.time_outer].name;
      auto it = std::find(segment.temp.shape.names.begin(), segment.temp.shape.names.end(), time_dim);
      if (it == segment.temp.shape.names.end())
        throw InputError(file.path(), segment.temp.name, "a time dimension '" + time_dim + "' like " + paths[impl.grid_file]);
      segment.time_length = segment.temp.shape.lengths[it - segment.temp.shape.names.begin()];
      int coord = d::coordinate_var(file.id(), time_dim);
      if (coord >= 0) {
        std::vector<double> values = d::read_all_doubles(file.id(), coord, file.path());
        std::string units = d::text_attribute(file.id(), coord, "units");
        if (s == 0) {
          first_time_units = units;
          grid.time_units = units;
          grid.time_calendar = d::text_attribute(file.id(), coord, "calendar");
        } else if (units != first_time_units) {
          try {
            d::UnitConverter(units, first_time_units).convert(values.data(), values.size());
          } catch (const std::invalid_argument& e) {
            throw InputError(file.path(), time_dim, "time units convertible to '" + d::shorten(first_time_units) + "' (" + d::shorten(e.what(), 160) + ")");
          }
        }
        grid.time_values.insert(grid.time_values.end(), values.begin(), values.end());
      }
    }
    offset += segment.time_length;
  }
  if (impl.time_outer >= 0) {
    grid.outer[impl.time_outer].length = offset;
    if (!grid.time_values.empty() && grid.time_values.size() != offset)
      throw InputError(all_files, grid.outer[impl.time_outer].name, "a time coordinate in every file");
    for (std::size_t i = 1; i < grid.time_values.size(); ++i)
      if (!(grid.time_values[i] > grid.time_values[i - 1]))
        throw InputError(all_files, grid.outer[impl.time_outer].name,
                         "time steps in increasing order across the files (give the files in time order)");
  }
  grid.n_times = impl.time_outer >= 0 ? offset : 1;
  grid.n_steps = 1;
  for (const OuterDimension& dim : grid.outer) {
    if (dim.length == 0)
      throw InputError(all_files, impl.segments[0].temp.name, "dimension '" + dim.name + "' has length 0: expected at least one " +
                                                               (dim.is_time ? "time step" : "index"));
    grid.n_steps *= dim.length;
  }

  // 6. Every variable on the same grid; coordinates equal across files.
  std::set<int> used_files;
  for (Segment& segment : impl.segments) {
    bind_to_grid(impl, segment.temp, true);
    bind_to_grid(impl, segment.humidity, true);
    bind_to_grid(impl, segment.height, true);
    if (segment.surface_pressure.present()) bind_to_grid(impl, segment.surface_pressure, false);
    if (segment.surface_height.present()) bind_to_grid(impl, segment.surface_height, false);
    for (const VarRef* var : {&segment.temp, &segment.humidity, &segment.height, &segment.surface_pressure,
                              &segment.surface_height})
      if (var->present()) used_files.insert(var->file);
  }
  for (int f : used_files) check_same_coordinates(impl, f);
  for (int f = 0; f < nfiles; ++f)
    if (!used_files.count(f))
      throw InputError(paths[f], "", "at least one quantity of the analysis (air temperature, humidity, "
                                     "geopotential, surface air pressure) on the grid of " + paths[impl.grid_file]);
  // A separate file's time must match the segment it is paired with.
  if (impl.time_outer >= 0) {
    const std::string& time_dim = grid.outer[impl.time_outer].name;
    for (Segment& segment : impl.segments)
      for (VarRef* var : {&segment.humidity, &segment.height, &segment.surface_pressure, &segment.surface_height}) {
        if (!var->present() || var->file == segment.temp.file) continue;
        auto it = std::find(var->shape.names.begin(), var->shape.names.end(), time_dim);
        if (it == var->shape.names.end()) continue;  // static field: broadcast over time
        std::size_t length = var->shape.lengths[it - var->shape.names.begin()];
        if (impl.segments.size() > 1 && length == grid.n_times && length != segment.time_length) {
          // One file with every time step beside one file per time step: index it by the global time.
          var->global_time = true;
          const NcFile& b = impl.files[var->file];
          if (!grid.time_values.empty() && d::coordinate_var(b.id(), time_dim) >= 0 &&
              d::text_attribute(b.id(), d::find_var(b.id(), time_dim), "units") == grid.time_units &&
              !same_values(coordinate_values(b, time_dim), grid.time_values))
            throw InputError(b.path(), var->name, "the same times as the files with air temperature (theirs: " +
                                                      format_times(grid.time_values, grid.time_units) + "; found " +
                                                      format_times(coordinate_values(b, time_dim), grid.time_units) + ")");
          continue;
        }
        if (length != segment.time_length)
          throw InputError(paths[var->file], var->name,
                           std::to_string(segment.time_length) + " time steps like " + paths[segment.temp.file] +
                               " (found " + std::to_string(length) + ")");
        const NcFile& a = impl.files[segment.temp.file];
        const NcFile& b = impl.files[var->file];
        if (d::coordinate_var(a.id(), time_dim) >= 0 && d::coordinate_var(b.id(), time_dim) >= 0 &&
            d::text_attribute(a.id(), d::find_var(a.id(), time_dim), "units") ==
                d::text_attribute(b.id(), d::find_var(b.id(), time_dim), "units") &&
            !same_values(coordinate_values(a, time_dim), coordinate_values(b, time_dim)))
          throw InputError(b.path(), var->name, "the same times as " + a.path() + " (" + a.path() + ": " +
                                                    format_times(coordinate_values(a, time_dim), grid.time_units) +
                                                    "; found " + format_times(coordinate_values(b, time_dim), grid.time_units) + ")");
      }
  }
  // 7. NetCDF-4 deflated variables: their chunks are read raw and inflated on every core.
  attach_chunk_readers(impl);
}

}  // namespace

InputDataset::InputDataset(const std::vector<std::string>& input_paths, const InputAliases& aliases,
                           const InputConventions& conventions)
    : impl_(std::make_unique<Impl>()) {
  if (input_paths.empty()) throw UsageError("no input file given");
  {
    std::lock_guard<std::mutex> lock(d::netcdf_mutex());
    open_files(*impl_, input_paths, aliases, conventions);
  }
  check_sampled_columns(*this);  // reads a sample through read_block, which takes the lock itself
}

InputDataset::InputDataset() : impl_(std::make_unique<Impl>()) {}

std::unique_ptr<InputDataset> InputDataset::from_memory(const MemoryDataset& dataset, const InputAliases& aliases,
                                                        const InputConventions& conventions, bool check_sample) {
  std::unique_ptr<InputDataset> input(new InputDataset());
  Impl& impl = *input->impl_;
  impl.input_paths = {dataset.name};
  impl.paths = {dataset.name};
  impl.files.push_back(NcFile::open_memory(dataset));
  // No netCDF-C (nor HDF5) call is made for a dataset in memory, so the netCDF lock is not
  // taken: blocks of several threads are read side by side, beside any other netCDF user.
  find_inputs(impl, aliases, conventions);
  if (check_sample) check_sampled_columns(*input);
  return input;
}

InputDataset::~InputDataset() = default;

const GridDescription& InputDataset::grid() const { return impl_->grid; }
HumidityKind InputDataset::humidity_kind() const { return impl_->humidity_kind; }
const std::vector<std::string>& InputDataset::paths() const { return impl_->input_paths; }

std::vector<QuantitySource> InputDataset::sources() const {
  std::vector<QuantitySource> out;
  const Segment& segment = impl_->segments[0];
  for (const VarRef* var : {&segment.temp, &segment.humidity, &segment.height, &segment.surface_pressure,
                            &segment.surface_height})
    if (var->present()) out.push_back({var->quantity, var->name, impl_->paths[var->file], var->units});
  return out;
}

SurfacePressureSource InputDataset::surface_pressure_source() const { return impl_->surface_pressure_source; }
const std::string& InputDataset::common_levels_note() const { return impl_->common_levels_note; }

std::string InputDataset::grid_netcdf_path() const {
  if (impl_->grib && impl_->grid_file == static_cast<int>(impl_->files.size()) - 1) return impl_->grib->path();
  return impl_->paths[impl_->grid_file];
}

bool is_grib_input(const std::string& path) { return d::is_grib_file(path); }

namespace {

thread_local std::vector<double> t_raw_double;
thread_local std::vector<float> t_raw_float;
thread_local std::vector<std::size_t> t_offsets;

/// Turn raw values into SI and scatter them to dst[c * column_stride + k]: raw value of
/// column c and level k sits at raw[offsets[c] + k * level_stride].
template <typename Raw>
bool scatter(const Raw* raw, const VarRef& var, std::size_t level_stride, std::size_t n_levels,
             const std::vector<std::size_t>& offsets, std::size_t column_stride, double* dst) {
  const std::size_t* level_index = var.levels.empty() ? nullptr : var.levels.data();
  const double scale = var.scale, offset = var.offset, lo = var.valid_min, hi = var.valid_max;
  const double fill0 = var.fills.size() > 0 ? var.fills[0] : kNaN;
  const double fill1 = var.fills.size() > 1 ? var.fills[1] : kNaN;
  const bool more_fills = var.fills.size() > 2;
  bool valid = false;
  auto convert = [&](double v) {
    bool missing = std::isnan(v) || v < lo || v > hi || v == fill0 || v == fill1;
    if (more_fills)
      for (double fill : var.fills) missing = missing || v == fill;
    valid = valid || !missing;
    return missing ? kNaN : v * scale + offset;
  };
  const std::size_t n_columns = offsets.size();
  if (level_stride == 1) {  // levels innermost in the file: contiguous per column
    for (std::size_t c = 0; c < n_columns; ++c) {
      const Raw* in = raw + offsets[c];
      double* out = dst + c * column_stride;
      for (std::size_t k = 0; k < n_levels; ++k)
        out[k] = convert(static_cast<double>(in[level_index ? level_index[k] : k]));
    }
  } else {  // levels outside the horizontal dimensions: transpose in cache-sized tiles of columns
    constexpr std::size_t kTile = 64;
    for (std::size_t c0 = 0; c0 < n_columns; c0 += kTile) {
      const std::size_t c1 = std::min(n_columns, c0 + kTile);
      for (std::size_t k = 0; k < n_levels; ++k) {
        const Raw* in = raw + (level_index ? level_index[k] : k) * level_stride;
        for (std::size_t c = c0; c < c1; ++c) dst[c * column_stride + k] = convert(static_cast<double>(in[offsets[c]]));
      }
    }
  }
  return valid;
}

/// Read one variable's hyperslab and scatter it, converted to SI, into dst[column * column_stride + level].
/// Start of a variable's hyperslab along its outer dimensions at one step (0 elsewhere).
std::vector<std::size_t> outer_start(const InputDataset::Impl& impl, const VarRef& var, std::size_t local_time,
                                     const std::vector<std::size_t>& outer_index) {
  std::vector<std::size_t> start(var.shape.names.size(), 0);
  for (std::size_t i = 0; i < start.size(); ++i)
    if (var.roles[i] == DimRole::outer && var.grid_dim[i] >= 0) {
      const int o = var.grid_dim[i];
      start[i] = (o != impl.time_outer) ? outer_index[o] : var.global_time ? outer_index[o] : local_time;
    }
  return start;
}

/// Read one variable's hyperslab (or take it from its decoded slab at this step, when given)
/// and scatter it, converted to SI, into dst[column * column_stride + level].
void read_var(const InputDataset::Impl& impl, const VarRef& var, std::size_t local_time,
              const std::vector<std::size_t>& outer_index, std::size_t row0, std::size_t nrows, std::size_t col0,
              std::size_t ncols, std::size_t column_stride, double* dst, bool& any_valid,
              const d::DecodedSlab* slab = nullptr) {
  const std::size_t ndims = var.shape.names.size();
  std::vector<size_t> start = outer_start(impl, var, local_time, outer_index), count(ndims, 1);
  const bool two_d = impl.grid.horizontal.size() == 2;
  int vertical = -1, row_dim = -1, col_dim = -1;
  for (std::size_t i = 0; i < ndims; ++i) {
    switch (var.roles[i]) {
      case DimRole::vertical:
        count[i] = var.shape.lengths[i];
        vertical = static_cast<int>(i);
        break;
      case DimRole::horizontal:
        if (two_d && var.grid_dim[i] == 0) {
          start[i] = row0;
          count[i] = nrows;
          row_dim = static_cast<int>(i);
        } else {
          start[i] = col0;
          count[i] = ncols;
          col_dim = static_cast<int>(i);
        }
        break;
      case DimRole::outer:
        break;
    }
  }
  // Strides of the raw values: the hyperslab read, or the whole slab of the step (base: its start).
  std::vector<std::size_t> raw_stride(ndims, 1);
  std::size_t total = 1, base = 0;
  for (std::size_t i = ndims; i-- > 0;) {
    raw_stride[i] = total;
    if (slab && var.roles[i] != DimRole::outer) base += start[i] * total;
    total *= slab ? (var.roles[i] == DimRole::outer ? 1 : var.shape.lengths[i]) : count[i];
  }
  const std::size_t n_levels = vertical >= 0 ? (var.levels.empty() ? count[vertical] : var.levels.size()) : 1;
  const std::size_t level_stride = vertical >= 0 ? raw_stride[vertical] : 0;
  const std::size_t row_stride = row_dim >= 0 ? raw_stride[row_dim] : 0;
  const std::size_t col_stride = col_dim >= 0 ? raw_stride[col_dim] : 0;
  std::vector<std::size_t>& offsets = t_offsets;
  offsets.resize(nrows * ncols);
  for (std::size_t r = 0; r < nrows; ++r)
    for (std::size_t x = 0; x < ncols; ++x) offsets[r * ncols + x] = base + r * row_stride + x * col_stride;

  if (slab) {
    const bool valid = slab->is_float
                           ? scatter(slab->floats.data(), var, level_stride, n_levels, offsets, column_stride, dst)
                           : scatter(slab->doubles.data(), var, level_stride, n_levels, offsets, column_stride, dst);
    any_valid = any_valid || valid;
    return;
  }
  const NcFile& file = impl.files[var.file];
  if (d::is_memory_id(file.id())) {  // held in memory: no netCDF-C call, no lock
    t_raw_double.resize(total);
    const int status = d::read_slab_doubles(file.id(), var.varid, start.data(), count.data(), t_raw_double.data());
    if (status != NC_NOERR) throw InputError(file.path(), var.name, std::string("numeric data (") + nc_strerror(status) + ")");
    any_valid = scatter(t_raw_double.data(), var, level_stride, n_levels, offsets, column_stride, dst) || any_valid;
    return;
  }
  const bool as_float = var.type == NC_FLOAT;
  {
    std::lock_guard<std::mutex> lock(d::netcdf_mutex());
    int status;
    if (as_float) {
      t_raw_float.resize(total);
      status = nc_get_vara_float(file.id(), var.varid, start.data(), count.data(), t_raw_float.data());
    } else {
      t_raw_double.resize(total);
      status = nc_get_vara_double(file.id(), var.varid, start.data(), count.data(), t_raw_double.data());
    }
    if (status != NC_NOERR)
      throw InputError(file.path(), var.name, std::string("readable data (") + nc_strerror(status) +
                                                  "; is the file truncated?)");
  }
  const bool valid = as_float ? scatter(t_raw_float.data(), var, level_stride, n_levels, offsets, column_stride, dst)
                              : scatter(t_raw_double.data(), var, level_stride, n_levels, offsets, column_stride, dst);
  any_valid = any_valid || valid;
}

}  // namespace

void InputDataset::read_block(std::size_t step, ColumnRange range, ColumnBlock& block) const {
  const Impl& impl = *impl_;
  const GridDescription& grid = impl.grid;
  if (step >= grid.n_steps || range.begin + range.count > grid.n_columns)
    throw Error("read_block: step or columns outside the grid");
  std::vector<std::size_t> outer = step_indices(grid, step);
  std::size_t time_index = impl.time_outer >= 0 ? outer[impl.time_outer] : 0;
  std::size_t local = 0;
  const Segment& segment = impl.segment_of_time(time_index, local);

  std::size_t row0 = 0, nrows = 1, col0 = range.begin, ncols = range.count;
  if (grid.horizontal.size() == 2) {
    const std::size_t nx = grid.horizontal[1].length;
    row0 = range.begin / nx;
    col0 = range.begin % nx;
    if (col0 + range.count <= nx) {
      nrows = 1;
      ncols = range.count;
    } else if (col0 == 0 && range.count % nx == 0) {
      nrows = range.count / nx;
      ncols = nx;
    } else {
      throw Error("read_block: a block must be whole rows or part of one row");
    }
  }
  const int nz = static_cast<int>(grid.vertical.length);
  block.range = range;
  block.n_levels = nz;
  block.humidity_kind = impl.humidity_kind;
  const std::size_t n = range.count * nz;
  block.temp_k.resize(n);
  block.humidity.resize(n);
  block.height_m.resize(n);
  bool any_ps = false;
  block.any_temp = block.any_humidity = block.any_height = false;
  std::shared_ptr<d::DecodedStep> decoded;
  {
    std::lock_guard<std::mutex> lock(impl.decoded_mutex);
    auto it = impl.decoded.find(step);
    if (it != impl.decoded.end()) decoded = it->second;
  }
  if (decoded) decoded->job->help_and_wait();  // normally finished already
  auto slab_of = [&](const VarRef& var) -> const d::DecodedSlab* {
    if (!decoded) return nullptr;
    auto it = decoded->slabs.find(&var);
    return it == decoded->slabs.end() ? nullptr : &it->second;
  };
  read_var(impl, segment.temp, local, outer, row0, nrows, col0, ncols, nz, block.temp_k.data(), block.any_temp,
           slab_of(segment.temp));
  read_var(impl, segment.humidity, local, outer, row0, nrows, col0, ncols, nz, block.humidity.data(),
           block.any_humidity, slab_of(segment.humidity));
  read_var(impl, segment.height, local, outer, row0, nrows, col0, ncols, nz, block.height_m.data(), block.any_height,
           slab_of(segment.height));
  if (segment.surface_pressure.present()) {
    block.surface_pressure_pa.resize(range.count);
    read_var(impl, segment.surface_pressure, local, outer, row0, nrows, col0, ncols, 1,
             block.surface_pressure_pa.data(), any_ps, slab_of(segment.surface_pressure));
  } else if (segment.surface_height.present()) {
    // Surface pressure from the surface height and the column's geopotential heights (thermo).
    block.surface_pressure_pa.resize(range.count);
    read_var(impl, segment.surface_height, local, outer, row0, nrows, col0, ncols, 1,
             block.surface_pressure_pa.data(), any_ps, slab_of(segment.surface_height));
    const double* p = grid.pressure_pa.data();
    for (std::size_t c = 0; c < range.count; ++c)
      block.surface_pressure_pa[c] = thermo::surface_pressure_from_height_pa(
          nz, p, block.height_m.data() + c * nz, block.temp_k.data() + c * nz, block.surface_pressure_pa[c]);
  } else {
    block.surface_pressure_pa.clear();
  }
  const InputConventions& conventions = impl.conventions;
  if (impl.humidity_kind == HumidityKind::relative_humidity &&
      conventions.relative_humidity_over != thermo::SaturationReference::water)
    for (std::size_t i = 0; i < n; ++i)  // the kernel takes relative humidity over liquid water
      block.humidity[i] = thermo::relative_humidity_over_water(block.humidity[i], block.temp_k[i],
                                                               conventions.relative_humidity_over,
                                                               conventions.mixed_phase);
}

void InputDataset::decode_step(std::size_t step) const {
  const Impl& impl = *impl_;
  if (step >= impl.grid.n_steps) throw Error("decode_step: step outside the grid");
  std::shared_ptr<d::DecodedStep> decoded;
  {
    std::lock_guard<std::mutex> lock(impl.decoded_mutex);
    auto it = impl.decoded.find(step);
    if (it != impl.decoded.end()) {
      decoded = it->second;
    } else {
      std::vector<std::size_t> outer = step_indices(impl.grid, step);
      std::size_t local = 0;
      const Segment& segment =
          impl.segment_of_time(impl.time_outer >= 0 ? outer[impl.time_outer] : 0, local);
      auto created = std::make_shared<d::DecodedStep>();
      std::vector<d::SlabJob::Part> parts;
      for (const VarRef* var : {&segment.temp, &segment.humidity, &segment.height, &segment.surface_pressure,
                                &segment.surface_height}) {
        if (!var->present() || !var->direct) continue;
        std::vector<std::size_t> start = outer_start(impl, *var, local, outer), outer_of_var;
        for (std::size_t i = 0; i < start.size(); ++i)
          if (var->roles[i] == DimRole::outer) outer_of_var.push_back(start[i]);
        parts.push_back({var->direct.get(), outer_of_var, &created->slabs[var]});
      }
      if (parts.empty()) return;  // netCDF-C reads this step
      created->job = std::make_unique<d::SlabJob>(std::move(parts));
      impl.decoded[step] = decoded = created;
    }
  }
  decoded->job->help_and_wait();
}

void InputDataset::decode_step_on_all_threads(std::size_t step) const {
  d::FirstFailure failure;
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel
#endif
  {
    try {
      decode_step(step);
    } catch (...) {
      failure.capture();
    }
  }
  failure.rethrow();
}

void InputDataset::release_steps_except(std::size_t step) const {
  std::map<std::size_t, std::shared_ptr<d::DecodedStep>> released;  // freed outside the lock
  std::lock_guard<std::mutex> lock(impl_->decoded_mutex);
  for (auto it = impl_->decoded.begin(); it != impl_->decoded.end();) {
    if (it->first == step) {
      ++it;
      continue;
    }
    released.insert(*it);
    it = impl_->decoded.erase(it);
  }
}

void InputDataset::release_step(std::size_t step) const {
  std::shared_ptr<d::DecodedStep> released;  // freed outside the lock
  std::lock_guard<std::mutex> lock(impl_->decoded_mutex);
  auto it = impl_->decoded.find(step);
  if (it == impl_->decoded.end()) return;
  released = std::move(it->second);
  impl_->decoded.erase(it);
}

std::size_t InputDataset::directly_read_variables() const {
  std::set<std::pair<int, int>> found;
  for (const Segment& segment : impl_->segments)
    for (const VarRef* var : {&segment.temp, &segment.humidity, &segment.height, &segment.surface_pressure,
                              &segment.surface_height})
      if (var->present() && var->direct) found.insert({var->file, var->varid});
  return found.size();
}

void InputDataset::prepare_block_reads(std::size_t block_columns) const {
  const Impl& impl = *impl_;
  const GridDescription& grid = impl.grid;
  constexpr double kCapBytes = 256.0 * 1024 * 1024;
  std::size_t rows = 1, cols = std::min(block_columns, grid.n_columns);
  if (grid.horizontal.size() == 2) {
    const std::size_t nx = grid.horizontal[1].length;
    rows = block_columns >= nx ? std::min(grid.horizontal[0].length, block_columns / nx) : 1;
    cols = block_columns >= nx ? nx : block_columns;
  }
  if (std::all_of(impl.files.begin(), impl.files.end(), [](const NcFile& f) { return d::is_memory_id(f.id()); }))
    return;  // nothing to cache
  std::lock_guard<std::mutex> lock(d::netcdf_mutex());
  for (const Segment& segment : impl.segments)
    for (const VarRef* var : {&segment.temp, &segment.humidity, &segment.height, &segment.surface_pressure,
                              &segment.surface_height}) {
      if (!var->present() || var->direct) continue;  // read raw by chunk_reader: no netCDF cache needed
      const int ncid = impl.files[var->file].id();
      const std::size_t ndims = var->shape.lengths.size();
      int storage = 0;
      std::vector<size_t> chunks(std::max<std::size_t>(1, ndims));
      if (nc_inq_var_chunking(ncid, var->varid, &storage, chunks.data()) != NC_NOERR || storage != NC_CHUNKED) continue;
      size_t type_size = 0;
      nc_inq_type(ncid, var->type, nullptr, &type_size);
      double chunk_bytes = static_cast<double>(type_size), touched = 1.0;
      for (std::size_t i = 0; i < ndims; ++i) {
        const std::size_t length = var->shape.lengths[i];
        std::size_t count = 1;
        if (var->roles[i] == DimRole::vertical) count = length;
        if (var->roles[i] == DimRole::horizontal)
          count = (grid.horizontal.size() == 2 && var->grid_dim[i] == 0) ? rows : cols;
        const std::size_t chunk = std::max<size_t>(1, chunks[i]);
        chunk_bytes *= static_cast<double>(chunk);
        // +1 for blocks of rows or columns not aligned with the chunks; a block reads one index
        // of each outer dimension (time), so one chunk along it is touched, not two.
        const bool misaligned = var->roles[i] == DimRole::horizontal && count < length;
        std::size_t across = (count + chunk - 1) / chunk + (misaligned ? 1 : 0);
        touched *= static_cast<double>(std::min(across, (length + chunk - 1) / chunk));
      }
      const double wanted = std::min(kCapBytes, 1.1 * touched * chunk_bytes);
      if (wanted > 16.0 * 1024 * 1024)  // the library default suffices for small chunks
        nc_set_var_chunk_cache(ncid, var->varid, static_cast<size_t>(wanted), 100003, 0.75f);
    }
}

namespace {

d::FieldOrigin origin_of(const InputDataset::Impl& impl, const VarRef& var) {
  d::FieldOrigin origin;
  if (!var.present()) return origin;
  origin.file = impl.paths[var.file];
  origin.variable = var.name;
  origin.units = var.units;
  origin.quantity = var.quantity;
  origin.si_per_unit = var.si_per_unit;
  origin.si_offset = var.si_offset;
  return origin;
}

/// Judge each quantity as a whole on a sample of columns (up to three part-rows across the
/// grid, the first step of each file), before any column is analysed.
void check_sampled_columns(const InputDataset& input) {
  const InputDataset::Impl& impl = input.impl();
  const GridDescription& grid = impl.grid;
  constexpr std::size_t kSampleColumns = 1024;  // per part-row
  std::vector<ColumnRange> ranges;
  const std::size_t row = grid.horizontal.size() == 2 ? grid.horizontal[1].length : grid.n_columns;
  const std::size_t rows = grid.n_columns / row;
  for (std::size_t quarter = 1; quarter <= 3; ++quarter) {
    std::size_t begin = grid.horizontal.size() == 2 ? (rows * quarter / 4) * row : grid.n_columns * quarter / 4;
    ColumnRange range{begin, std::min(kSampleColumns, grid.horizontal.size() == 2 ? row : grid.n_columns - begin)};
    if (range.count == 0 || (!ranges.empty() && ranges.back().begin == range.begin)) continue;
    ranges.push_back(range);
  }
  for (const Segment& segment : impl.segments) {
    std::size_t step = 0;
    while (step + 1 < grid.n_steps && time_index_of_step(grid, step) != segment.time_offset) ++step;
    d::ColumnSample sample;
    sample.pressure_pa = grid.pressure_pa;
    sample.humidity_kind = impl.humidity_kind;
    sample.temp = origin_of(impl, segment.temp);
    sample.humidity_origin = origin_of(impl, segment.humidity);
    sample.height = origin_of(impl, segment.height);
    sample.surface_pressure = origin_of(impl, segment.surface_pressure);
    ColumnBlock block;
    // Compressed inputs: the sample step is inflated on every thread and kept for the run,
    // which starts with it (netCDF-C would inflate every chunk the sample touches - with one
    // chunk per level map, all of them - on this thread alone).
    input.decode_step_on_all_threads(step);
    for (const ColumnRange& range : ranges) {
      input.read_block(step, range, block);
      sample.n_columns += range.count;
      sample.temp_k.insert(sample.temp_k.end(), block.temp_k.begin(), block.temp_k.end());
      sample.humidity.insert(sample.humidity.end(), block.humidity.begin(), block.humidity.end());
      sample.height_m.insert(sample.height_m.end(), block.height_m.begin(), block.height_m.end());
      sample.surface_pressure_pa.insert(sample.surface_pressure_pa.end(), block.surface_pressure_pa.begin(),
                                        block.surface_pressure_pa.end());
    }
    d::check_sample(sample);
  }
}

}  // namespace

void InputDataset::throw_all_missing(std::size_t step, bool any_temp, bool any_humidity, bool any_height) const {
  const Impl& impl = *impl_;
  std::vector<std::size_t> outer = step_indices(impl.grid, step);
  std::size_t time_index = impl.time_outer >= 0 ? outer[impl.time_outer] : 0;
  std::size_t local = 0;
  const Segment& segment = impl.segment_of_time(time_index, local);
  const VarRef& var = !any_temp ? segment.temp : !any_humidity ? segment.humidity : segment.height;
  (void)any_height;
  std::string where = impl.time_outer >= 0 ? " at time index " + std::to_string(time_index) : "";
  throw InputError(impl.paths[var.file], var.name, "some valid data" + where + " (every value is missing)");
}

void InputDataset::column_lat_lon(std::vector<double>& lat_deg, std::vector<double>& lon_deg) const {
  const Impl& impl = *impl_;
  const GridDescription& grid = impl.grid;
  const NcFile& file = impl.files[impl.grid_file];
  d::check_memory(file.path(), "", "latitudes and longitudes of " + std::to_string(grid.n_columns) + " columns",
                  4.0 * 8.0 * static_cast<double>(grid.n_columns));
  std::unique_lock<std::mutex> lock;  // a dataset in memory needs no netCDF lock
  if (!d::is_memory_id(file.id())) lock = std::unique_lock<std::mutex>(d::netcdf_mutex());
  if ((impl.lat_var.empty() || impl.lon_var.empty()) && grid.kind == HorizontalKind::projected &&
      !grid.grid_mapping.empty() && d::coordinate_var(file.id(), grid.horizontal[0].name) >= 0 &&
      d::coordinate_var(file.id(), grid.horizontal[1].name) >= 0) {
    // No 2-D lat/lon in the file: derive them from the grid mapping and the 1-D x/y (PROJ).
    const int mapping = d::find_var(file.id(), grid.grid_mapping);
    geo::AttributeList attributes;
    for (const std::string& name : d::attribute_names(file.id(), mapping)) {
      std::vector<double> numbers = d::number_attribute(file.id(), mapping, name.c_str());
      if (!numbers.empty())
        attributes.push_back({name, numbers});
      else
        attributes.push_back({name, d::text_attribute(file.id(), mapping, name.c_str())});
    }
    const int y_var = d::coordinate_var(file.id(), grid.horizontal[0].name);
    const int x_var = d::coordinate_var(file.id(), grid.horizontal[1].name);
    std::vector<double> y = d::read_all_doubles(file.id(), y_var, file.path());
    std::vector<double> x = d::read_all_doubles(file.id(), x_var, file.path());
    for (auto [var, values] : {std::pair<int, std::vector<double>*>{x_var, &x}, {y_var, &y}}) {
      std::string units = d::text_attribute(file.id(), var, "units");
      if (!units.empty() && d::convertible(units, "m")) d::UnitConverter(units, "m").convert(values->data(), values->size());
    }
    geo::LatLonGrid latlon = geo::latlon_of_projected(attributes, x, y, file.path(), grid.grid_mapping);
    lat_deg = latlon.latitude_deg;
    lon_deg = latlon.longitude_deg;
    return;
  }
  if (impl.lat_var.empty() || impl.lon_var.empty())
    throw InputError(file.path(), "", "latitude and longitude coordinates (units degrees_north/degrees_east), or "
                                      "projected x/y with a grid_mapping");
  auto read = [&](const std::string& name, std::vector<double>& out) {
    int varid = d::find_var(file.id(), name);
    VarShape shape = d::var_shape(file.id(), varid);
    std::vector<double> values = d::read_all_doubles(file.id(), varid, file.path());
    out.assign(grid.n_columns, kNaN);
    const std::size_t nx = grid.horizontal.size() == 2 ? grid.horizontal[1].length : grid.n_columns;
    // Strides of the variable's dims in column order (row-major over grid.horizontal).
    std::vector<std::size_t> col_stride(shape.names.size(), 0);
    for (std::size_t i = 0; i < shape.names.size(); ++i)
      for (std::size_t h = 0; h < grid.horizontal.size(); ++h)
        if (shape.names[i] == grid.horizontal[h].name)
          col_stride[i] = (grid.horizontal.size() == 2 && h == 0) ? nx : 1;
    std::vector<std::size_t> index(shape.names.size(), 0);
    for (std::size_t k = 0; k < values.size(); ++k) {
      std::size_t rest = k, col = 0;
      for (std::size_t i = shape.names.size(); i-- > 0;) {
        index[i] = rest % shape.lengths[i];
        rest /= shape.lengths[i];
        col += index[i] * col_stride[i];
      }
      out[col] = values[k];
    }
    // A 1-D coordinate covers one horizontal dimension: spread it over the other.
    if (shape.names.size() == 1 && grid.horizontal.size() == 2) {
      bool is_rows = shape.names[0] == grid.horizontal[0].name;
      for (std::size_t c = 0; c < grid.n_columns; ++c)
        out[c] = values[is_rows ? c / nx : c % nx];
    }
  };
  read(impl.lat_var, lat_deg);
  read(impl.lon_var, lon_deg);
}

}  // namespace latentlift
