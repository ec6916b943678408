// latentlift reproject: every field of an analyze output onto a regular map grid.
#include "latentlift/reproject.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <map>
#include <set>

#include "maps/cf_time_text.hpp"
#include "maps/cog_writer.hpp"
#include "io/netcdf_file.hpp"
#include "maps/resample.hpp"
#include "maps/source_grid.hpp"
#include "io/temporary_output.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::maps {

ResampleMethod parse_resample_method(const std::string& text) {
  if (text == "nearest") return ResampleMethod::nearest;
  if (text == "bilinear") return ResampleMethod::bilinear;
  throw UsageError("--method must be nearest or bilinear, not '" + text + "'");
}

MapFormat parse_map_format(const std::string& text) {
  if (text == "netcdf") return MapFormat::netcdf;
  if (text == "cog") return MapFormat::cog;
  throw UsageError("--format must be netcdf or cog, not '" + text + "'");
}

namespace {

using namespace detail;

std::string format_number(double v) {
  char text[32];
  std::snprintf(text, sizeof text, "%.10g", v);
  return text;
}

// Attributes that describe the source storage or grid, not the field: set anew in the output.
const std::set<std::string> kNotCopied = {"_FillValue", "missing_value", "scale_factor", "add_offset",
                                          "grid_mapping", "coordinates", "valid_range", "valid_min",
                                          "valid_max", "_ChunkSizes", "_Storage", "_DeflateLevel",
                                          "_Shuffle", "_Endianness", "_NoFill"};

void copy_attributes(const io::detail::NcFile& from, int from_id, io::detail::NcFile& to, int to_id, bool skip_grid_attributes) {
  int count = 0;
  if (from_id == NC_GLOBAL)
    io::detail::check(nc_inq_natts(from.id(), &count), from.path(), "", "attributes");
  else
    io::detail::check(nc_inq_varnatts(from.id(), from_id, &count), from.path(), "", "attributes");
  for (int i = 0; i < count; ++i) {
    char name[NC_MAX_NAME + 1] = {0};
    io::detail::check(nc_inq_attname(from.id(), from_id, i, name), from.path(), "", "attribute name");
    if (skip_grid_attributes && kNotCopied.count(name)) continue;
    io::detail::check(nc_copy_att(from.id(), from_id, name, to.id(), to_id), to.path(), "", std::string("copy attribute ") + name);
  }
}

int define_dimension(io::detail::NcFile& out, const std::string& name, std::size_t length) {
  int id = -1;
  io::detail::check(nc_def_dim(out.id(), name.c_str(), length, &id), out.path(), name, "cannot define dimension");
  return id;
}

struct OutputField {
  io::detail::VarInfo source;
  int id = -1;
  bool classes = false;
  bool bilinear = false;
  double fill = 0;
};

using io::detail::NcFile;
using io::detail::VarInfo;
using io::detail::find_variable;
using io::detail::number_attribute;
using io::detail::read_doubles;
using io::detail::text_attribute;

// One field as a COG: one band per time step (or the one --time), north row first.
void write_cog_layer(const NcFile& in, const VarInfo& field, bool classes, const SourceGrid& grid,
                     const TargetGrid& target, const ResamplePlan& plan, const ReprojectOptions& options,
                     const std::string& output) {
  CogLayer layer;
  layer.nx = static_cast<int>(target.nx);
  layer.ny = static_cast<int>(target.ny);
  layer.west = target.west;
  layer.north = target.north();
  layer.resolution = target.resolution;
  layer.crs_wkt = target.crs.wkt();
  layer.classes = classes;
  layer.field = field.name;
  layer.units = text_attribute(in, field.id, "units").value_or("");
  layer.long_name = text_attribute(in, field.id, "long_name").value_or("");
  if (auto values = number_attribute(in, field.id, "flag_values")) {
    std::string text;
    for (double v : *values) text += (text.empty() ? "" : " ") + format_number(v);
    layer.flag_values = text;
  }
  layer.flag_meanings = text_attribute(in, field.id, "flag_meanings").value_or("");
  layer.source = io::detail::utc_timestamp() + " latentlift reproject " + in.path() + " --format cog --field " +
                 field.name + " --crs " + options.crs + " --resolution " + format_number(options.resolution);
  std::size_t lead = field.dim_names.size() - grid.dims.size();
  // Leading dimensions: one of them may be time (one band per step); any other must have length 1.
  std::optional<std::size_t> time_dim;
  std::vector<double> times;
  std::string time_units, calendar;
  for (std::size_t k = 0; k < lead; ++k) {
    auto coordinate = find_variable(in, field.dim_names[k]);
    std::string units = coordinate ? text_attribute(in, coordinate->id, "units").value_or("") : "";
    if (units.find(" since ") != std::string::npos || field.dim_names[k] == "time") {
      time_dim = k;
      if (coordinate && coordinate->dim_names.size() == 1) times = read_doubles(in, *coordinate);
      time_units = units;
      calendar = coordinate ? text_attribute(in, coordinate->id, "calendar").value_or("") : "";
    } else if (field.shape[k] != 1) {
      throw UsageError("--format cog: " + field.name + " has the dimension '" + field.dim_names[k] +
                       "' besides time; a COG layer holds one time series of a 2-D field");
    }
  }
  if (options.time_index && !time_dim) throw UsageError("--time given but " + field.name + " has no time dimension");
  std::size_t steps = time_dim ? field.shape[*time_dim] : 1;
  if (options.time_index && *options.time_index >= steps)
    throw UsageError("--time " + std::to_string(*options.time_index) + " is beyond the " + std::to_string(steps) +
                     " time steps of " + in.path());
  std::size_t first = options.time_index.value_or(0), last = options.time_index ? first + 1 : steps;
  bool bilinear = !classes && options.method != ResampleMethod::nearest && plan.has_bilinear();
  std::vector<double> resampled;
  for (std::size_t t = first; t < last; ++t) {
    std::vector<std::size_t> index(lead, 0);
    if (time_dim) index[*time_dim] = t;
    std::vector<double> values = read_slice(in, field, grid, index);
    if (bilinear) plan.bilinear(values, resampled); else plan.nearest(values, resampled);
    std::vector<double> band(resampled.size());
    for (std::size_t j = 0; j < target.ny; ++j)  // target rows run south to north; GeoTIFF rows north first
      std::copy_n(resampled.begin() + static_cast<std::ptrdiff_t>(j * target.nx), target.nx,
                  band.begin() + static_cast<std::ptrdiff_t>((target.ny - 1 - j) * target.nx));
    layer.bands.push_back(std::move(band));
    layer.band_times.push_back(t < times.size() ? iso_time(times[t], time_units, calendar) : "");
  }
  io::detail::TemporaryOutput staged(output, options.overwrite);  // removed unless committed
  write_cog(staged.path(), layer, output);
  staged.commit();
}

}  // namespace

ReprojectSummary reproject_file(const std::string& input, const std::string& output, const ReprojectOptions& options) {
  namespace fs = std::filesystem;
  io::detail::TemporaryOutput::check_target(output, options.overwrite);  // before any work
  geo::Crs target_crs = geo::Crs::from_user_text(options.crs);
  if (target_crs.is_rotated_pole()) throw UsageError("--crs must be a geographic or projected CRS, not a rotated pole");
  if (std::fabs(target_crs.metres_per_unit() - 1.0) > 1e-12)
    throw UsageError("--crs " + options.crs + " measures x/y in units other than metres; choose a metre-based CRS");

  io::detail::NcFile in = io::detail::NcFile::open_read(input);
  auto variables = io::detail::all_variables(in);
  // The grid: from the first variable that has one (fields share the input's horizontal grid).
  std::optional<SourceGrid> grid;
  for (const auto& var : variables) {
    if (var.dim_names.empty() || var.type == NC_CHAR || var.type == NC_STRING) continue;
    bool coordinate = var.dim_names.size() == 1 && var.dim_names[0] == var.name;
    if (coordinate) continue;
    bool has_mapping = io::detail::text_attribute(in, var.id, "grid_mapping").has_value();
    bool has_coordinates = io::detail::text_attribute(in, var.id, "coordinates").has_value();
    if (var.dim_names.size() < 2 && !has_coordinates) continue;
    try {
      grid = grid_of(in, var);
      break;
    } catch (const InputError&) {
      if (has_mapping || has_coordinates) throw;  // a field that should have a grid but does not
    }
  }
  if (!grid) throw InputError(input, "", "at least one 2-D field on a horizontal grid");

  std::vector<io::detail::VarInfo> fields;
  for (const auto& var : variables)
    if (is_field_on(in, var, *grid) &&
        (options.fields.empty() || std::find(options.fields.begin(), options.fields.end(), var.name) != options.fields.end()))
      fields.push_back(var);
  for (const auto& name : options.fields)
    if (std::none_of(fields.begin(), fields.end(), [&](const io::detail::VarInfo& v) { return v.name == name; }))
      throw InputError(input, name, "a field of this name on the horizontal grid (see ncdump -h for the fields)");
  if (fields.empty()) throw InputError(input, "", "at least one field to reproject");
  if (options.format == MapFormat::cog && fields.size() != 1)
    throw UsageError("--format cog writes one field: give it with --field NAME");
  if (options.format == MapFormat::netcdf && options.time_index)
    throw UsageError("--time selects the time step of a COG layer (--format cog); NetCDF maps keep every step");

  bool any_bilinear = false;
  std::vector<bool> classes(fields.size());
  for (std::size_t f = 0; f < fields.size(); ++f) {
    classes[f] = is_class_field(in, fields[f]);
    bool wants_bilinear = !classes[f] && options.method != ResampleMethod::nearest;
    if (grid->kind == SourceGrid::Kind::points && options.method == ResampleMethod::automatic) wants_bilinear = false;
    any_bilinear = any_bilinear || wants_bilinear;
  }
  TargetGrid target = make_target_grid(*grid, target_crs, options.resolution, options.bbox);
  ResamplePlan plan(*grid, target, any_bilinear);

  ReprojectSummary summary;
  summary.nx = target.nx;
  summary.ny = target.ny;
  summary.fields = fields.size();
  summary.bbox = {target.west, target.south, target.east(), target.north()};
  summary.crs_name = target_crs.name();
  if (options.format == MapFormat::cog) {
    write_cog_layer(in, fields.front(), classes.front(), *grid, target, plan, options, output);
    return summary;
  }

  io::detail::TemporaryOutput staged(output, options.overwrite);  // removed unless committed
  {
    io::detail::NcFile out = io::detail::NcFile::create_netcdf4(staged.path(), output);
    copy_attributes(in, NC_GLOBAL, out, NC_GLOBAL, false);
    io::detail::write_text(out, NC_GLOBAL, "Conventions", "CF-1.8");
    std::string method_text = options.method == ResampleMethod::nearest ? "nearest" : options.method == ResampleMethod::bilinear ? "bilinear" : "automatic";
    std::string history = io::detail::utc_timestamp() + " latentlift reproject " + input + " -o " + output + " --crs " + options.crs +
                          " --resolution " + format_number(options.resolution) + " --method " + method_text;
    if (auto old = io::detail::text_attribute(in, NC_GLOBAL, "history")) history += "\n" + *old;
    io::detail::write_text(out, NC_GLOBAL, "history", history);
    io::detail::write_text(out, NC_GLOBAL, "reprojection",
               "resampled from the input grid onto a regular grid in " + target_crs.name() +
                   " at " + format_number(options.resolution) + " " + (target_crs.is_geographic() ? "degree" : "m") +
                   " cells; classes and flags by nearest cell, continuous fields " +
                   (any_bilinear ? "bilinear" : "by nearest cell") + "; missing outside the input grid");

    // Horizontal coordinates.
    bool geographic = target_crs.is_geographic();
    std::string yname = geographic ? "lat" : "y", xname = geographic ? "lon" : "x";
    int ydim = define_dimension(out, yname, target.ny), xdim = define_dimension(out, xname, target.nx);
    int xvar, yvar;
    io::detail::check(nc_def_var(out.id(), xname.c_str(), NC_DOUBLE, 1, &xdim, &xvar), out.path(), xname, "define");
    io::detail::check(nc_def_var(out.id(), yname.c_str(), NC_DOUBLE, 1, &ydim, &yvar), out.path(), yname, "define");
    if (geographic) {
      io::detail::write_attributes(out, xvar, {{"standard_name", std::string("longitude")}, {"long_name", std::string("longitude")},
                                   {"units", std::string("degrees_east")}, {"axis", std::string("X")}});
      io::detail::write_attributes(out, yvar, {{"standard_name", std::string("latitude")}, {"long_name", std::string("latitude")},
                                   {"units", std::string("degrees_north")}, {"axis", std::string("Y")}});
    } else {
      io::detail::write_attributes(out, xvar, {{"standard_name", std::string("projection_x_coordinate")},
                                   {"long_name", std::string("x coordinate of projection")},
                                   {"units", std::string("m")}, {"axis", std::string("X")}});
      io::detail::write_attributes(out, yvar, {{"standard_name", std::string("projection_y_coordinate")},
                                   {"long_name", std::string("y coordinate of projection")},
                                   {"units", std::string("m")}, {"axis", std::string("Y")}});
    }
    int latvar = -1, lonvar = -1;
    if (!geographic) {  // CF asks for true latitude/longitude beside projection coordinates
      int dims[2] = {ydim, xdim};
      io::detail::check(nc_def_var(out.id(), "lat", NC_DOUBLE, 2, dims, &latvar), out.path(), "lat", "define");
      io::detail::check(nc_def_var(out.id(), "lon", NC_DOUBLE, 2, dims, &lonvar), out.path(), "lon", "define");
      io::detail::write_attributes(out, latvar, {{"standard_name", std::string("latitude")}, {"units", std::string("degrees_north")}});
      io::detail::write_attributes(out, lonvar, {{"standard_name", std::string("longitude")}, {"units", std::string("degrees_east")}});
    }
    int crsvar;
    io::detail::check(nc_def_var(out.id(), "crs", NC_INT, 0, nullptr, &crsvar), out.path(), "crs", "define");
    io::detail::write_attributes(out, crsvar, target_crs.grid_mapping());

    // Leading dimensions (time, levels) and their coordinate variables, as in the input.
    std::map<std::string, int> leading_dims;
    std::vector<std::pair<io::detail::VarInfo, int>> leading_coordinates;
    for (const auto& field : fields)
      for (std::size_t k = 0; k + grid->dims.size() < field.dim_names.size(); ++k) {
        const std::string& name = field.dim_names[k];
        if (leading_dims.count(name)) continue;
        if (name == xname || name == yname)
          throw InputError(input, field.name, "no dimension named like the output's '" + name + "'");
        leading_dims[name] = define_dimension(out, name, field.shape[k]);
        if (auto coordinate = io::detail::find_variable(in, name); coordinate && coordinate->dim_names.size() == 1 &&
                                                        coordinate->dim_names[0] == name) {
          int id;
          int dim = leading_dims[name];
          io::detail::check(nc_def_var(out.id(), name.c_str(), coordinate->type, 1, &dim, &id), out.path(), name, "define");
          copy_attributes(in, coordinate->id, out, id, false);
          leading_coordinates.push_back({*coordinate, id});
        }
      }

    std::vector<OutputField> outputs;
    for (std::size_t f = 0; f < fields.size(); ++f) {
      OutputField o;
      o.source = fields[f];
      o.classes = classes[f];
      o.bilinear = !o.classes && options.method != ResampleMethod::nearest && plan.has_bilinear();
      std::vector<int> dims;
      for (std::size_t k = 0; k + grid->dims.size() < o.source.dim_names.size(); ++k)
        dims.push_back(leading_dims.at(o.source.dim_names[k]));
      dims.push_back(ydim);
      dims.push_back(xdim);
      nc_type type = o.classes ? o.source.type : (o.source.type == NC_DOUBLE ? NC_DOUBLE : NC_FLOAT);
      io::detail::check(nc_def_var(out.id(), o.source.name.c_str(), type, static_cast<int>(dims.size()), dims.data(), &o.id),
            out.path(), o.source.name, "define");
      std::vector<std::size_t> chunks(dims.size(), 1);
      chunks[dims.size() - 2] = target.ny;
      chunks[dims.size() - 1] = target.nx;
      io::detail::check(nc_def_var_chunking(out.id(), o.id, NC_CHUNKED, chunks.data()), out.path(), o.source.name, "chunking");
      io::detail::check(nc_def_var_deflate(out.id(), o.id, 1, 1, 4), out.path(), o.source.name, "compression");
      copy_attributes(in, o.source.id, out, o.id, true);
      io::detail::Unpacking unpack = io::detail::unpacking_of(in, o.source);
      if (o.classes) {
        auto fill = io::detail::number_attribute(in, o.source.id, "_FillValue");
        o.fill = fill ? fill->front() : (unpack.missing.empty() ? -127.0 : unpack.missing.front());
      } else {
        o.fill = type == NC_DOUBLE ? NC_FILL_DOUBLE : static_cast<double>(NC_FILL_FLOAT);
      }
      if (type == NC_FLOAT) {
        float fill = static_cast<float>(o.fill);
        io::detail::check(nc_put_att_float(out.id(), o.id, "_FillValue", NC_FLOAT, 1, &fill), out.path(), o.source.name, "_FillValue");
      } else {
        io::detail::check(nc_put_att_double(out.id(), o.id, "_FillValue", type, 1, &o.fill), out.path(), o.source.name, "_FillValue");
      }
      io::detail::write_text(out, o.id, "grid_mapping", "crs");
      if (!geographic) io::detail::write_text(out, o.id, "coordinates", "lat lon");
      io::detail::write_text(out, o.id, "resampling", o.bilinear ? "bilinear" : "nearest");
      outputs.push_back(o);
    }
    io::detail::check(nc_enddef(out.id()), out.path(), "", "end of definitions");

    // Coordinates.
    std::vector<double> xs(target.nx), ys(target.ny);
    for (std::size_t i = 0; i < target.nx; ++i) xs[i] = target.x(i);
    for (std::size_t j = 0; j < target.ny; ++j) ys[j] = target.y(j);
    io::detail::check(nc_put_var_double(out.id(), xvar, xs.data()), out.path(), xname, "write");
    io::detail::check(nc_put_var_double(out.id(), yvar, ys.data()), out.path(), yname, "write");
    if (!geographic) {
      std::vector<double> lon(target.nx * target.ny), lat(lon.size());
      for (std::size_t j = 0; j < target.ny; ++j)
        for (std::size_t i = 0; i < target.nx; ++i) {
          lon[j * target.nx + i] = xs[i];
          lat[j * target.nx + i] = ys[j];
        }
      geo::Transformer(target_crs, target_crs.geodetic()).forward(lon.data(), lat.data(), lon.size());
      io::detail::check(nc_put_var_double(out.id(), latvar, lat.data()), out.path(), "lat", "write");
      io::detail::check(nc_put_var_double(out.id(), lonvar, lon.data()), out.path(), "lon", "write");
    }
    for (const auto& [coordinate, id] : leading_coordinates) {
      std::vector<double> values = io::detail::read_doubles(in, coordinate);
      io::detail::check(nc_put_var_double(out.id(), id, values.data()), out.path(), coordinate.name, "write");
    }

    // Fields, one horizontal slice at a time (memory bounded by one source and one target slice).
    std::vector<double> resampled;
    for (const auto& o : outputs) {
      std::size_t lead = o.source.dim_names.size() - grid->dims.size();
      std::size_t slices = 1;
      for (std::size_t k = 0; k < lead; ++k) slices *= o.source.shape[k];
      for (std::size_t s = 0; s < slices; ++s) {
        std::vector<std::size_t> index(lead);
        for (std::size_t k = lead, rest = s; k-- > 0;) {
          index[k] = rest % o.source.shape[k];
          rest /= o.source.shape[k];
        }
        std::vector<double> values = read_slice(in, o.source, *grid, index);
        if (o.bilinear) plan.bilinear(values, resampled); else plan.nearest(values, resampled);
        for (double& v : resampled)
          if (std::isnan(v)) v = o.fill;
        std::vector<std::size_t> start(index), count(lead, 1);
        start.insert(start.end(), {0, 0});
        count.insert(count.end(), {target.ny, target.nx});
        io::detail::check(nc_put_vara_double(out.id(), o.id, start.data(), count.data(), resampled.data()), out.path(),
              o.source.name, "write");
      }
    }
    out.close();
  }
  staged.commit();
  return summary;
}

}  // namespace latentlift::maps
