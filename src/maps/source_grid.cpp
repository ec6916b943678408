// Identify the horizontal grid of a field (CF 1.8 sections 4, 5 and 5.6).
#include "maps/source_grid.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <sstream>

#include "io/plausibility.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::maps::detail {

namespace {

enum class Axis { none, x_projected, y_projected, x_rotated, y_rotated, longitude, latitude };

Axis axis_of(const io::detail::NcFile& file, const io::detail::VarInfo& var) {
  std::string standard = io::detail::text_attribute(file, var.id, "standard_name").value_or("");
  std::string units = io::detail::text_attribute(file, var.id, "units").value_or("");
  std::string axis = io::detail::text_attribute(file, var.id, "axis").value_or("");
  if (standard == "projection_x_coordinate") return Axis::x_projected;
  if (standard == "projection_y_coordinate") return Axis::y_projected;
  if (standard == "grid_longitude") return Axis::x_rotated;
  if (standard == "grid_latitude") return Axis::y_rotated;
  if (standard == "longitude" || units == "degrees_east" || units == "degree_east" || units == "degree_E" ||
      units == "degrees_E")
    return Axis::longitude;
  if (standard == "latitude" || units == "degrees_north" || units == "degree_north" || units == "degree_N" ||
      units == "degrees_N")
    return Axis::latitude;
  if (axis == "X") return Axis::x_projected;
  if (axis == "Y") return Axis::y_projected;
  return Axis::none;
}

// Metres per unit of a projection coordinate.
double metres_per_unit(const io::detail::NcFile& file, const io::detail::VarInfo& var) {
  std::string units = io::detail::text_attribute(file, var.id, "units").value_or("m");
  if (units == "m" || units == "metre" || units == "metres" || units == "meter" || units == "meters" || units == "1")
    return 1.0;
  if (units == "km" || units == "kilometre" || units == "kilometres" || units == "kilometer" ||
      units == "kilometers")
    return 1000.0;
  throw InputError(file.path(), var.name, "projection coordinates in m or km, not '" + units + "'");
}

std::optional<io::detail::VarInfo> coordinate_variable(const io::detail::NcFile& file, const std::string& dim) {
  auto var = io::detail::find_variable(file, dim);
  if (var && var->dim_names.size() == 1 && var->dim_names[0] == dim) return var;
  return std::nullopt;
}

bool evenly_spaced(const std::vector<double>& c) {
  if (c.size() < 2) return true;
  double step = (c.back() - c.front()) / static_cast<double>(c.size() - 1);
  for (std::size_t i = 1; i < c.size(); ++i)
    if (std::fabs((c[i] - c[i - 1]) - step) > 1e-6 * std::fabs(step)) return false;
  return step != 0.0;
}

void require_monotonic(const io::detail::NcFile& file, const std::string& name, const std::vector<double>& c) {
  bool up = true, down = true;
  for (std::size_t i = 1; i < c.size(); ++i) {
    up = up && c[i] > c[i - 1];
    down = down && c[i] < c[i - 1];
  }
  for (double v : c)
    if (!std::isfinite(v)) up = down = false;
  if (!up && !down) throw InputError(file.path(), name, "strictly monotonic, finite coordinate values");
}

/// A grid with cells, and latitudes/longitudes within their ranges (io::detail plausibility).
void check_grid(const io::detail::NcFile& file, const io::detail::VarInfo& field, const SourceGrid& grid, bool geographic) {
  for (std::size_t k = 0; k < grid.shape.size(); ++k)
    if (grid.shape[k] == 0)
      throw InputError(file.path(), field.name, "dimension '" + grid.dims[k] + "' has length 0: expected at least one cell");
  if (grid.kind == SourceGrid::Kind::points) {
    io::detail::check_latitudes(file.path(), "latitude", "degrees_north", grid.lat, true);
    io::detail::check_longitudes(file.path(), "longitude", "degrees_east", grid.lon, true);
  } else if (geographic) {
    io::detail::check_latitudes(file.path(), grid.y_name, "degrees_north", grid.y, false);
    io::detail::check_longitudes(file.path(), grid.x_name, "degrees_east", grid.x, false);
  }
}

}  // namespace

bool SourceGrid::regular() const { return kind == Kind::rectilinear && evenly_spaced(x) && evenly_spaced(y); }

SourceGrid grid_of(const io::detail::NcFile& file, const io::detail::VarInfo& field) {
  SourceGrid grid;
  if (auto name = io::detail::text_attribute(file, field.id, "grid_mapping")) {
    // The simple form "crs"; the extended form "crs: x y" names the variable first.
    std::string mapping = *name;
    if (auto colon = mapping.find(':'); colon != std::string::npos) mapping = mapping.substr(0, colon);
    mapping.erase(std::remove_if(mapping.begin(), mapping.end(), ::isspace), mapping.end());
    auto var = io::detail::find_variable(file, mapping);
    if (!var) throw InputError(file.path(), field.name, "its grid_mapping variable '" + mapping + "' to exist");
    grid.mapping_variable = mapping;
    grid.mapping = io::detail::read_attributes(file, var->id);
  }
  auto mapping_crs = [&]() -> std::optional<geo::Crs> {
    if (grid.mapping_variable.empty()) return std::nullopt;
    return geo::Crs::from_grid_mapping(grid.mapping, file.path(), grid.mapping_variable);
  };

  const std::size_t n = field.dim_names.size();
  // Rectilinear: the last two dimensions have 1-D coordinate variables (y, x).
  if (n >= 2) {
    auto xv = coordinate_variable(file, field.dim_names[n - 1]);
    auto yv = coordinate_variable(file, field.dim_names[n - 2]);
    Axis ax = xv ? axis_of(file, *xv) : Axis::none, ay = yv ? axis_of(file, *yv) : Axis::none;
    bool projected = ax == Axis::x_projected && ay == Axis::y_projected;
    bool rotated = ax == Axis::x_rotated && ay == Axis::y_rotated;
    bool geographic = ax == Axis::longitude && ay == Axis::latitude;
    if (ax == Axis::latitude && ay == Axis::longitude)
      throw InputError(file.path(), field.name, "dimensions ordered (..., y, x): latitude before longitude");
    if (projected || rotated || geographic) {
      grid.kind = SourceGrid::Kind::rectilinear;
      grid.dims = {field.dim_names[n - 2], field.dim_names[n - 1]};
      grid.shape = {field.shape[n - 2], field.shape[n - 1]};
      grid.x_name = xv->name;
      grid.y_name = yv->name;
      grid.x = io::detail::read_doubles(file, *xv);
      grid.y = io::detail::read_doubles(file, *yv);
      require_monotonic(file, xv->name, grid.x);
      require_monotonic(file, yv->name, grid.y);
      grid.crs = mapping_crs();
      if (projected) {
        if (!grid.crs)
          throw InputError(file.path(), field.name, "a grid_mapping attribute for projection x/y coordinates");
        if (grid.crs->is_geographic())
          throw InputError(file.path(), grid.mapping_variable,
                           "a projected CRS for projection_x/y_coordinate axes, not " + grid.crs->name());
        // Coordinates in the units of the CRS (metres for CF mappings; a crs_wkt may use feet).
        double fx = metres_per_unit(file, *xv) / grid.crs->metres_per_unit();
        double fy = metres_per_unit(file, *yv) / grid.crs->metres_per_unit();
        for (double& v : grid.x) v *= fx;
        for (double& v : grid.y) v *= fy;
      } else if (rotated) {
        if (!grid.crs || !grid.crs->is_rotated_pole())
          throw InputError(file.path(), field.name, "a rotated_latitude_longitude grid_mapping for grid_longitude/grid_latitude axes");
      } else {
        if (!grid.crs) grid.crs = geo::Crs::wgs84();  // 1-D lat/lon without a grid_mapping: EPSG:4326
        if (!grid.crs->is_geographic() || grid.crs->is_rotated_pole())
          throw InputError(file.path(), grid.mapping_variable,
                           "a latitude_longitude grid_mapping for longitude/latitude axes, not " + grid.crs->name());
      }
      check_grid(file, field, grid, geographic);
      return grid;
    }
  }
  // Points: the coordinates attribute names latitude and longitude over the trailing dimension(s).
  std::string coordinates = io::detail::text_attribute(file, field.id, "coordinates").value_or("");
  std::istringstream names(coordinates);
  std::optional<io::detail::VarInfo> lon, lat;
  for (std::string name; names >> name;) {
    auto var = io::detail::find_variable(file, name);
    if (!var) continue;
    Axis a = axis_of(file, *var);
    if (a == Axis::longitude) lon = var;
    if (a == Axis::latitude) lat = var;
  }
  if (!lon || !lat)
    throw InputError(file.path(), field.name,
                     "a horizontal grid: 1-D x/y, lon/lat or rotated-pole coordinate variables for the last two "
                     "dimensions, or latitude/longitude named in its coordinates attribute");
  if (lon->dim_names != lat->dim_names || lon->dim_names.empty() || lon->dim_names.size() > 2 ||
      lon->dim_names.size() > n ||
      !std::equal(lon->dim_names.begin(), lon->dim_names.end(), field.dim_names.end() - lon->dim_names.size()))
    throw InputError(file.path(), field.name, "latitude/longitude over the field's trailing dimensions");
  grid.kind = SourceGrid::Kind::points;
  grid.dims = lon->dim_names;
  grid.shape = lon->shape;
  grid.lon = io::detail::read_doubles(file, *lon);
  grid.lat = io::detail::read_doubles(file, *lat);
  check_grid(file, field, grid, true);
  auto crs = mapping_crs();
  grid.crs = crs ? crs->geodetic() : geo::Crs::wgs84();
  return grid;
}

bool is_field_on(const io::detail::NcFile& file, const io::detail::VarInfo& var, const SourceGrid& grid) {
  (void)file;
  std::size_t k = grid.dims.size();
  if (var.dim_names.size() < k) return false;
  if (!std::equal(grid.dims.begin(), grid.dims.end(), var.dim_names.end() - k)) return false;
  if (var.type == NC_CHAR || var.type == NC_STRING) return false;
  if (var.name == grid.x_name || var.name == grid.y_name) return false;
  if (var.dim_names.size() == 1 && var.dim_names[0] == var.name) return false;  // a coordinate variable
  if (var.name == "lat" || var.name == "lon") {
    std::string standard = io::detail::text_attribute(file, var.id, "standard_name").value_or("");
    if (standard == "latitude" || standard == "longitude") return false;
  }
  std::string standard = io::detail::text_attribute(file, var.id, "standard_name").value_or("");
  if (standard == "latitude" || standard == "longitude") return false;
  return true;
}

bool is_class_field(const io::detail::NcFile& file, const io::detail::VarInfo& var) {
  if (var.type == NC_BYTE || var.type == NC_UBYTE) return true;
  nc_type type;
  std::size_t length;
  return nc_inq_att(file.id(), var.id, "flag_values", &type, &length) == NC_NOERR ||
         nc_inq_att(file.id(), var.id, "flag_masks", &type, &length) == NC_NOERR;
}

std::vector<double> read_slice(const io::detail::NcFile& file, const io::detail::VarInfo& field, const SourceGrid& grid,
                               const std::vector<std::size_t>& leading_index) {
  std::size_t lead = field.dim_names.size() - grid.dims.size();
  if (leading_index.size() != lead) throw Error("read_slice: wrong number of leading indices");
  std::vector<std::size_t> start(leading_index), count(lead, 1);
  for (std::size_t k = 0; k < grid.dims.size(); ++k) {
    start.push_back(0);
    count.push_back(grid.shape[k]);
  }
  io::detail::check_memory(file.path(), field.name, "one map of it", 8.0 * static_cast<double>(grid.size()));
  std::vector<double> values(grid.size());
  io::detail::read_slab(file, field, start, count, values.data());
  io::detail::Unpacking unpack = io::detail::unpacking_of(file, field);
  for (double& v : values) v = unpack(v);
  // Validated like model inputs: never an infinite value, and a class field only its flag_values.
  for (double v : values)
    if (std::isinf(v)) throw InputError(file.path(), field.name, "finite values or the fill value (found infinite values)");
  if (auto flags = io::detail::number_attribute(file, field.id, "flag_values"))
    for (double v : values)
      if (!std::isnan(v) && std::find(flags->begin(), flags->end(), v) == flags->end()) {
        char found[32];
        std::snprintf(found, sizeof found, "%g", v);
        throw InputError(file.path(), field.name, std::string("only its flag_values or the fill value (found ") + found + ")");
      }
  return values;
}

}  // namespace latentlift::maps::detail
