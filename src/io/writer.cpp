// The NetCDF writer: CF-1.8 NetCDF-4 output through a temporary file renamed into place.
#include <netcdf.h>

#include <cmath>
#include <cstring>
#include <cstdio>
#include <filesystem>
#include <variant>

#include "io/netcdf_crs.hpp"  // grid_mapping completion
#include "io/dataset_impl.hpp"
#include "io/netcdf_util.hpp"
#include "io/temporary_output.hpp"
#include "latentlift/crs.hpp"
#include "latentlift/errors.hpp"

namespace latentlift {

namespace d = io::detail;
using d::NcFile;

namespace {

struct FieldInfo {
  const char* name;
  const char* units;
  const char* long_name;
  const char* standard_name;  // "" when CF has none
  const char* flag_meanings;  // byte fields: space-separated, for flag_values 0, 1, ...
};

// DESIGN.md "Output fields": names fixed, pressures hPa, temperatures K.
const std::vector<FieldInfo>& real_fields() {
  static const std::vector<FieldInfo> fields = {
      {"latent_layer_depth", "hPa", "total pressure depth of latently unstable layers", "", ""},
      {"latent_layer_depth_z", "m", "total height depth of latently unstable layers", "", ""},
      {"latent_layer_bottom", "hPa", "pressure at the bottom of the lowest latently unstable layer", "", ""},
      {"latent_layer_top", "hPa", "pressure at the top of the lowest latently unstable layer", "", ""},
      {"tangent_theta_w", "K", "wet-bulb potential temperature of the saturated adiabat tangent to the profile", "", ""},
      {"tangent_pressure", "hPa", "pressure where the tangent saturated adiabat touches the profile", "", ""},
      {"mu_pressure", "hPa", "source pressure of the most-unstable parcel", "", ""},
      {"mu_theta_w", "K", "wet-bulb potential temperature of the most-unstable parcel", "", ""},
      {"mu_cape", "J kg-1", "convective available potential energy of the most-unstable parcel",
       "atmosphere_convective_available_potential_energy", ""},
      {"mu_cin", "J kg-1", "convective inhibition of the most-unstable parcel (positive)",
       "atmosphere_convective_inhibition", ""},
      {"mu_lfc_pressure", "hPa", "pressure at the level of free convection of the most-unstable parcel", "", ""},
      {"mu_el_pressure", "hPa", "pressure at the equilibrium level of the most-unstable parcel", "", ""},
      {"mu_lift_to_lfc", "hPa", "pressure lift needed to bring the most-unstable parcel to its level of free convection", "", ""},
      {"mu_lift_to_lfc_z", "m", "height lift needed to bring the most-unstable parcel to its level of free convection", "", ""},
      {"easiest_lift", "hPa", "least pressure lift over the latently unstable parcels", "", ""},
      {"easiest_lift_pressure", "hPa", "source pressure of the latently unstable parcel needing the least lift", "", ""},
  };
  return fields;
}

const std::vector<FieldInfo>& byte_fields() {
  static const std::vector<FieldInfo> fields = {
      {"latent_class", "1", "Normand class of the most-unstable parcel", "", "none pseudo_latent real_latent"}};
  return fields;
}

const std::vector<FieldInfo>& real_level_fields() {
  static const std::vector<FieldInfo> fields = {
      {"wet_bulb_temperature", "K", "wet-bulb temperature", "wet_bulb_temperature", ""},
      {"wet_bulb_potential_temperature", "K", "wet-bulb potential temperature", "wet_bulb_potential_temperature", ""},
      {"saturation_theta_w", "K", "wet-bulb potential temperature of the saturated adiabat through the air temperature", "", ""},
      {"max_parcel_excess", "K", "largest buoyancy excess of the parcel lifted from this level", "", ""},
  };
  return fields;
}

const std::vector<FieldInfo>& byte_level_fields() {
  static const std::vector<FieldInfo> fields = {
      {"latent_flag", "1", "parcel from this level is latently unstable", "", "stable latently_unstable"},
      {"stability_class", "1", "static stability of the layer from this level to the next above", "",
       "absolutely_stable conditionally_unstable absolutely_unstable neutral_saturated neutral_dry"},
      {"potential_instability", "1", "wet-bulb potential temperature decreases with height above this level", "",
       "potentially_stable potentially_unstable"},
  };
  return fields;
}

std::vector<std::string> names_of(const std::vector<FieldInfo>& fields) {
  std::vector<std::string> names;
  for (const FieldInfo& f : fields) names.emplace_back(f.name);
  return names;
}

void put_text(int ncid, int varid, const char* name, const std::string& value, const std::string& file) {
  d::check(nc_put_att_text(ncid, varid, name, value.size(), value.c_str()), file, std::string("attribute ") + name);
}

/// Copy every attribute of a variable (or NC_GLOBAL), except those listed.
void copy_attributes(int in, int in_var, int out, int out_var, const std::string& file,
                     std::initializer_list<const char*> skip = {}) {
  for (const std::string& name : d::attribute_names(in, in_var)) {
    bool skipped = false;
    for (const char* s : skip) skipped = skipped || name == s;
    if (skipped) continue;
    d::check(nc_copy_att(in, in_var, name.c_str(), out, out_var), file, "copying attribute " + name);
  }
}

}  // namespace

const std::vector<std::string>& real_field_names() {
  static const std::vector<std::string> names = names_of(real_fields());
  return names;
}
const std::vector<std::string>& byte_field_names() {
  static const std::vector<std::string> names = names_of(byte_fields());
  return names;
}
const std::vector<std::string>& real_level_field_names() {
  static const std::vector<std::string> names = names_of(real_level_fields());
  return names;
}
const std::vector<std::string>& byte_level_field_names() {
  static const std::vector<std::string> names = names_of(byte_level_fields());
  return names;
}

void write_grid_mapping(int ncid_in, int ncid_out, const std::string& grid_mapping_name,
                        const std::string& input_file) {
  // Copied verbatim, then completed by geo::complete_grid_mapping (crs_wkt and CF parameters from PROJ).
  int in_var = d::find_var(ncid_in, grid_mapping_name);
  if (in_var < 0) throw InputError(input_file, grid_mapping_name, "the grid_mapping variable named by the data");
  int out_var = -1;
  d::check(nc_def_var(ncid_out, grid_mapping_name.c_str(), NC_INT, 0, nullptr, &out_var), input_file,
           "defining " + grid_mapping_name);
  copy_attributes(ncid_in, in_var, ncid_out, out_var, input_file, {"_FillValue"});
  d::complete_grid_mapping_variable(ncid_in, in_var, ncid_out, out_var, input_file, grid_mapping_name);
}

namespace {

/// A regular lat/lon input without a grid_mapping: record WGS 84 longitude/latitude (the usual
/// meaning of such grids; common practice) so that GIS clients know the coordinate system.
void write_latlon_grid_mapping(int ncid_out, const std::string& name, const std::string& file) {
  int var = -1;
  d::check(nc_def_var(ncid_out, name.c_str(), NC_INT, 0, nullptr, &var), file, "defining " + name);
  for (const geo::Attribute& attribute : geo::Crs::wgs84().grid_mapping()) {
    if (const auto* text = std::get_if<std::string>(&attribute.value)) {
      put_text(ncid_out, var, attribute.name.c_str(), *text, file);
    } else {
      const auto& numbers = std::get<std::vector<double>>(attribute.value);
      d::check(nc_put_att_double(ncid_out, var, attribute.name.c_str(), NC_DOUBLE, numbers.size(), numbers.data()),
               file, attribute.name);
    }
  }
}


}  // namespace

struct OutputWriter::Impl {
  const InputDataset* input = nullptr;
  OutputOptions options;
  std::string target, temporary;
  std::unique_ptr<d::TemporaryOutput> staged;  // the file being written, renamed on commit
  NcFile file;
  bool committed = false;
  std::vector<OuterDimension> outer;          // output outer dimensions (time subset)
  std::vector<std::size_t> time_indices;      // input time index per output time index
  int time_outer = -1;
  std::map<std::string, int> field_var;       // output field -> varid
  bool banded = false;                        // 2-D fields chunked in bands of block rows
  std::vector<float> scratch;

  std::vector<std::size_t> out_indices(std::size_t out_step) const {
    std::vector<std::size_t> idx(outer.size(), 0);
    for (std::size_t dd = outer.size(); dd-- > 0;) {
      idx[dd] = out_step % outer[dd].length;
      out_step /= outer[dd].length;
    }
    return idx;
  }
  void define(const InputDataset& in);
};

void OutputWriter::Impl::define(const InputDataset& in) {
  const InputDataset::Impl& src = in.impl();
  const GridDescription& grid = src.grid;
  const NcFile& grid_file = src.files[src.grid_file];
  const int out = file.id();
  const std::string& path = target;  // messages name the user's file, never the temporary one

  // Dimensions: outer (time subset), pressure (with level fields), horizontal.
  std::vector<int> outer_dims, horizontal_dims;
  for (std::size_t o = 0; o < outer.size(); ++o) {
    int id = -1;
    d::check(nc_def_dim(out, outer[o].name.c_str(), outer[o].length, &id), path, "defining dimension " + outer[o].name);
    outer_dims.push_back(id);
  }
  int vertical_dim = -1;
  if (options.level_fields)
    d::check(nc_def_dim(out, grid.vertical.name.c_str(), grid.vertical.length, &vertical_dim), path,
             "defining dimension " + grid.vertical.name);
  for (const Dimension& dim : grid.horizontal) {
    int id = -1;
    d::check(nc_def_dim(out, dim.name.c_str(), dim.length, &id), path, "defining dimension " + dim.name);
    horizontal_dims.push_back(id);
  }

  // Coordinate variables copied from the input (data written after nc_enddef).
  struct Copy {
    std::string name;
    int in_var, out_var;
  };
  std::vector<Copy> copies;
  auto copy_var = [&](const std::string& name) {
    int in_var = d::find_var(grid_file.id(), name);
    if (in_var < 0) return;
    d::VarShape shape = d::var_shape(grid_file.id(), in_var);
    std::vector<int> dims;
    for (const std::string& dim_name : shape.names) {
      int id = -1;
      if (nc_inq_dimid(out, dim_name.c_str(), &id) != NC_NOERR) return;  // not on the output's dimensions
      dims.push_back(id);
    }
    int out_var = -1;
    d::check(nc_def_var(out, name.c_str(), d::var_type(grid_file.id(), in_var), static_cast<int>(dims.size()),
                        dims.data(), &out_var),
             path, "defining " + name);
    copy_attributes(grid_file.id(), in_var, out, out_var, path, {"bounds"});
    copies.push_back({name, in_var, out_var});
  };
  int time_var = -1;
  for (std::size_t o = 0; o < outer.size(); ++o) {
    const std::string& coord = src.outer_coordinates[o];
    if (coord.empty()) continue;
    if (static_cast<int>(o) == src.time_outer) {  // times of all input files, in their first units, as double
      d::check(nc_def_var(out, coord.c_str(), NC_DOUBLE, 1, &outer_dims[o], &time_var), path, "defining " + coord);
      copy_attributes(grid_file.id(), d::find_var(grid_file.id(), coord), out, time_var, path,
                      {"bounds", "_FillValue", "missing_value", "scale_factor", "add_offset", "valid_range",
                       "valid_min", "valid_max", "units"});
      put_text(out, time_var, "units", grid.time_units, path);
      if (!d::has_attribute(out, time_var, "standard_name")) put_text(out, time_var, "standard_name", "time", path);
      if (!d::has_attribute(out, time_var, "axis")) put_text(out, time_var, "axis", "T", path);
    } else {
      copy_var(coord);
    }
  }
  int level_var = -1;  // pressure coordinate of a reduced level set (common levels), written from grid.pressure_pa
  if (options.level_fields && !src.vertical_coordinate.empty()) {
    if (src.common_levels_note.empty()) {
      copy_var(src.vertical_coordinate);
    } else {
      d::check(nc_def_var(out, grid.vertical.name.c_str(), NC_DOUBLE, 1, &vertical_dim, &level_var), path,
               "defining " + grid.vertical.name);
      put_text(out, level_var, "units", "Pa", path);
      put_text(out, level_var, "standard_name", "air_pressure", path);
      put_text(out, level_var, "positive", "down", path);
      put_text(out, level_var, "axis", "Z", path);
    }
  }
  for (const std::string& coord : src.horizontal_coordinates)
    if (!coord.empty()) copy_var(coord);
  for (const std::string& coord : src.aux_coordinates) copy_var(coord);
  std::string grid_mapping = grid.grid_mapping;
  if (!grid_mapping.empty()) {
    write_grid_mapping(grid_file.id(), out, grid_mapping, grid_file.path());
  } else if (grid.kind == HorizontalKind::latlon) {
    grid_mapping = d::find_var(out, "crs") < 0 ? "crs" : "latentlift_crs";
    write_latlon_grid_mapping(out, grid_mapping, path);
  }
  std::string coordinates;
  for (const std::string& coord : src.aux_coordinates)
    if (d::find_var(out, coord) >= 0) coordinates += (coordinates.empty() ? "" : " ") + coord;
  // A projected grid without 2-D latitude/longitude gets them, computed with geo (PROJ).
  d::LatLonVariableIds added_latlon;
  const bool add_latlon = grid.kind == HorizontalKind::projected && coordinates.empty() && !grid.grid_mapping.empty() &&
                          !src.horizontal_coordinates[0].empty() && !src.horizontal_coordinates[1].empty() &&
                          d::find_var(out, "lat") < 0 && d::find_var(out, "lon") < 0;
  if (add_latlon) {
    added_latlon = d::define_latlon_variables(out, grid.horizontal[0].name, grid.horizontal[1].name, path);
    coordinates = "lat lon";
  }

  // Output fields: float (NaN written as _FillValue) and byte with flag_values.
  // Maps larger than a block of whole rows are chunked in bands of block rows, so that each
  // block is compressed and written while the next is analysed; smaller maps are one chunk.
  if (grid.horizontal.size() == 2) {
    const std::size_t nx = grid.horizontal[1].length;
    banded = grid.n_columns > options.block_columns && options.block_columns >= nx;
  } else {
    banded = grid.n_columns > options.block_columns;
  }
  auto define_field = [&](const FieldInfo& info, bool is_byte, bool per_level) {
    std::vector<int> dims = outer_dims;
    std::vector<size_t> chunks(outer_dims.size(), 1);
    if (per_level) {
      dims.push_back(vertical_dim);
      chunks.push_back(1);
    }
    dims.insert(dims.end(), horizontal_dims.begin(), horizontal_dims.end());
    // 2-D fields: one chunk per whole map; per-level fields: one chunk per block of columns.
    if (grid.horizontal.size() == 2) {
      const std::size_t ny = grid.horizontal[0].length, nx = grid.horizontal[1].length;
      if (per_level) {
        std::size_t rows = std::max<std::size_t>(1, std::min(ny, options.block_columns / std::max<std::size_t>(1, nx)));
        chunks.push_back(rows);
        chunks.push_back(std::min(nx, std::max<std::size_t>(1, options.block_columns)));
      } else {
        chunks.push_back(banded ? options.block_columns / nx : ny);
        chunks.push_back(nx);
      }
    } else {
      chunks.push_back(per_level || banded ? std::min(grid.n_columns, std::max<std::size_t>(1, options.block_columns))
                                           : grid.n_columns);
    }
    int var = -1;
    d::check(nc_def_var(out, info.name, is_byte ? NC_BYTE : NC_FLOAT, static_cast<int>(dims.size()), dims.data(), &var),
             path, std::string("defining ") + info.name);
    d::check(nc_def_var_chunking(out, var, NC_CHUNKED, chunks.data()), path, std::string("chunking ") + info.name);
    // Every chunk is written whole, once: a cache of about one chunk per field suffices. The
    // library default (up to 16 MiB per variable) keeps each step's chunks of every field, so
    // memory would grow with the number of time steps.
    std::size_t chunk_bytes = is_byte ? 1 : sizeof(float);
    for (std::size_t c : chunks) chunk_bytes *= c;
    d::check(nc_set_var_chunk_cache(out, var, 2 * chunk_bytes, 11, 1.0f), path, std::string("chunk cache of ") + info.name);
    if (options.deflate_level > 0)
      d::check(nc_def_var_deflate(out, var, 1, 1, options.deflate_level), path, std::string("compressing ") + info.name);
    if (is_byte) {
      signed char fill = kByteMissing;
      d::check(nc_put_att_schar(out, var, "_FillValue", NC_BYTE, 1, &fill), path, "_FillValue");
      std::vector<signed char> values;
      std::string meanings = info.flag_meanings;
      std::size_t count = 1;
      for (char c : meanings) count += c == ' ';
      for (std::size_t i = 0; i < count; ++i) values.push_back(static_cast<signed char>(i));
      d::check(nc_put_att_schar(out, var, "flag_values", NC_BYTE, values.size(), values.data()), path, "flag_values");
      put_text(out, var, "flag_meanings", meanings, path);
    } else {
      float fill = NC_FILL_FLOAT;
      d::check(nc_put_att_float(out, var, "_FillValue", NC_FLOAT, 1, &fill), path, "_FillValue");
      put_text(out, var, "units", info.units, path);
    }
    put_text(out, var, "long_name", info.long_name, path);
    if (*info.standard_name) put_text(out, var, "standard_name", info.standard_name, path);
    if (!coordinates.empty()) put_text(out, var, "coordinates", coordinates, path);
    if (!grid_mapping.empty()) put_text(out, var, "grid_mapping", grid_mapping, path);
    field_var[info.name] = var;
  };
  for (const FieldInfo& f : real_fields()) define_field(f, false, false);
  for (const FieldInfo& f : byte_fields()) define_field(f, true, false);
  if (options.level_fields) {
    for (const FieldInfo& f : real_level_fields()) define_field(f, false, true);
    for (const FieldInfo& f : byte_level_fields()) define_field(f, true, true);
  }

  // Global attributes known now; the QC counts follow at commit().
  put_text(out, NC_GLOBAL, "Conventions", "CF-1.8", path);
  put_text(out, NC_GLOBAL, "title", "Latent instability diagnostics (Normand's method) of every grid column", path);
  put_text(out, NC_GLOBAL, "source", std::string("latentlift ") + LATENTLIFT_VERSION, path);
  std::string history = d::utc_timestamp() + " " + options.history;
  std::string old_history = d::text_attribute(grid_file.id(), NC_GLOBAL, "history");
  if (!old_history.empty()) history += "\n" + old_history;
  put_text(out, NC_GLOBAL, "history", history, path);
  std::string inputs;
  for (const std::string& p : src.paths) inputs += (inputs.empty() ? "" : " ") + p;
  put_text(out, NC_GLOBAL, "input_files", inputs, path);
  std::string used;
  for (const QuantitySource& s : in.sources())
    used += (used.empty() ? "" : "; ") + s.quantity + ": " + s.variable + " (" + s.units + ")";
  put_text(out, NC_GLOBAL, "input_variables", used, path);
  put_text(out, NC_GLOBAL, "surface_pressure_source", to_string(in.surface_pressure_source()), path);
  if (!in.common_levels_note().empty()) put_text(out, NC_GLOBAL, "pressure_levels_used", in.common_levels_note(), path);
  put_text(out, NC_GLOBAL, "latentlift_settings", options.settings, path);
  d::check(nc_enddef(out), path, "leaving define mode");

  // Coordinate data.
  for (const Copy& c : copies) {
    d::VarShape shape = d::var_shape(grid_file.id(), c.in_var);
    size_t n = 1;
    for (size_t l : shape.lengths) n *= l;
    size_t type_size = 0;
    nc_inq_type(grid_file.id(), d::var_type(grid_file.id(), c.in_var), nullptr, &type_size);
    std::vector<unsigned char> buffer(n * type_size + 1);
    d::check(nc_get_var(grid_file.id(), c.in_var, buffer.data()), grid_file.path(), "reading " + c.name);
    d::check(nc_put_var(out, c.out_var, buffer.data()), path, "writing " + c.name);
  }
  if (add_latlon)
    d::write_latlon_variables(grid_file.id(), src.horizontal_coordinates[1], src.horizontal_coordinates[0],
                                grid.grid_mapping, out, added_latlon, grid_file.path());
  if (level_var >= 0) d::check(nc_put_var_double(out, level_var, grid.pressure_pa.data()), path, "writing levels");
  if (time_var >= 0) {
    std::vector<double> times;
    for (std::size_t t : time_indices) times.push_back(grid.time_values.at(t));
    d::check(nc_put_var_double(out, time_var, times.data()), path, "writing time");
  }
}

OutputWriter::OutputWriter(const std::string& target, const InputDataset& input, const OutputOptions& options)
    : impl_(std::make_unique<Impl>()) {
  namespace fs = std::filesystem;
  Impl& impl = *impl_;
  impl.input = &input;
  impl.options = options;
  impl.target = target;
  if (options.deflate_level < 0 || options.deflate_level > 9)
    throw UsageError("output.deflate_level: expected 0 to 9, got " + std::to_string(options.deflate_level));
  std::error_code ec;
  for (const std::string& p : input.paths())
    if (fs::exists(p, ec) && fs::exists(target, ec) && fs::equivalent(p, target, ec))
      throw UsageError(target + ": output would replace an input file");
  impl.staged = std::make_unique<d::TemporaryOutput>(target, options.overwrite);  // checks the target
  impl.temporary = impl.staged->path();

  const GridDescription& grid = input.grid();
  const int time_outer = input.impl().time_outer;
  impl.time_outer = time_outer;
  impl.time_indices = options.time_indices;
  if (impl.time_indices.empty())
    for (std::size_t t = 0; t < grid.n_times; ++t) impl.time_indices.push_back(t);
  for (std::size_t t : impl.time_indices)
    if (t >= grid.n_times)
      throw UsageError("time index " + std::to_string(t) + " outside the input (" + std::to_string(grid.n_times) +
                       " time steps)");
  impl.outer = grid.outer;
  if (time_outer >= 0) impl.outer[time_outer].length = impl.time_indices.size();

  std::lock_guard<std::mutex> lock(d::netcdf_mutex());
  impl.file = NcFile::create_netcdf4(impl.temporary, impl.target);
  try {
    impl.define(input);
  } catch (...) {
    impl.file = NcFile();
    impl.staged.reset();  // removes the temporary file
    throw;
  }
}

OutputWriter::~OutputWriter() {
  if (!impl_ || impl_->committed) return;
  {
    std::lock_guard<std::mutex> lock(d::netcdf_mutex());
    impl_->file = NcFile();
  }
  impl_->staged.reset();  // removes the temporary file
}

std::size_t OutputWriter::n_steps() const {
  std::size_t n = 1;
  for (const OuterDimension& dim : impl_->outer) n *= dim.length;
  return n;
}

std::size_t OutputWriter::input_step(std::size_t out_step) const {
  const Impl& impl = *impl_;
  std::vector<std::size_t> idx = impl.out_indices(out_step);
  if (impl.time_outer >= 0) idx[impl.time_outer] = impl.time_indices[idx[impl.time_outer]];
  const GridDescription& grid = impl.input->grid();
  std::size_t step = 0;
  for (std::size_t o = 0; o < grid.outer.size(); ++o) step = step * grid.outer[o].length + idx[o];
  return step;
}

const std::string& OutputWriter::temporary_path() const { return impl_->temporary; }

bool OutputWriter::writes_by_block() const { return impl_->banded; }

void OutputWriter::write_fields(std::size_t out_step, const FieldSet& fields) {
  write_fields_block(out_step, {0, impl_->input->grid().n_columns}, fields);
}

void OutputWriter::write_fields_block(std::size_t out_step, ColumnRange range, const FieldSet& fields) {
  Impl& impl = *impl_;
  const GridDescription& grid = impl.input->grid();
  std::vector<size_t> start, count;
  for (std::size_t i : impl.out_indices(out_step)) {
    start.push_back(i);
    count.push_back(1);
  }
  if (grid.horizontal.size() == 2) {
    const std::size_t nx = grid.horizontal[1].length;
    if (range.begin % nx != 0 || (range.count % nx != 0 && range.begin + range.count != grid.n_columns))
      throw Error("write_fields_block: columns must be whole rows");
    start.push_back(range.begin / nx);
    count.push_back((range.count + nx - 1) / nx);
    start.push_back(0);
    count.push_back(nx);
  } else {
    start.push_back(range.begin);
    count.push_back(range.count);
  }
  std::lock_guard<std::mutex> lock(d::netcdf_mutex());
  const int out = impl.file.id();
  for (const auto& [name, values] : fields.real) {
    auto it = impl.field_var.find(name);
    if (it == impl.field_var.end()) throw Error("write_fields: unknown output field " + name);
    if (values.size() != grid.n_columns) throw Error("write_fields: " + name + " has the wrong size");
    impl.scratch.assign(values.begin() + range.begin, values.begin() + range.begin + range.count);
    for (float& v : impl.scratch)
      if (std::isnan(v)) v = NC_FILL_FLOAT;
    d::check(nc_put_vara_float(out, it->second, start.data(), count.data(), impl.scratch.data()), impl.target,
             "writing " + name);
  }
  for (const auto& [name, values] : fields.byte) {
    auto it = impl.field_var.find(name);
    if (it == impl.field_var.end()) throw Error("write_fields: unknown output field " + name);
    if (values.size() != grid.n_columns) throw Error("write_fields: " + name + " has the wrong size");
    d::check(nc_put_vara_schar(out, it->second, start.data(), count.data(),
                               reinterpret_cast<const signed char*>(values.data() + range.begin)),
             impl.target, "writing " + name);
  }  // Push the finished chunks through compression now (on the I/O thread, while the analysis
  // runs) rather than at close.
  d::check(nc_sync(out), impl.target, "flushing");
}

void OutputWriter::write_level_block(std::size_t out_step, const LevelFieldBlock& block) {
  Impl& impl = *impl_;
  const GridDescription& grid = impl.input->grid();
  std::vector<size_t> start, count;
  for (std::size_t i : impl.out_indices(out_step)) {
    start.push_back(i);
    count.push_back(1);
  }
  start.push_back(0);
  count.push_back(static_cast<size_t>(block.n_levels));
  if (grid.horizontal.size() == 2) {
    const std::size_t nx = grid.horizontal[1].length;
    const std::size_t row0 = block.range.begin / nx, col0 = block.range.begin % nx;
    const bool one_row = col0 + block.range.count <= nx;
    start.push_back(row0);
    count.push_back(one_row ? 1 : block.range.count / nx);
    start.push_back(col0);
    count.push_back(one_row ? block.range.count : nx);
  } else {
    start.push_back(block.range.begin);
    count.push_back(block.range.count);
  }
  std::lock_guard<std::mutex> lock(d::netcdf_mutex());
  const int out = impl.file.id();
  for (const auto& [name, values] : block.real) {
    auto it = impl.field_var.find(name);
    if (it == impl.field_var.end()) throw Error("write_level_block: unknown output field " + name);
    impl.scratch.assign(values.begin(), values.end());
    for (float& v : impl.scratch)
      if (std::isnan(v)) v = NC_FILL_FLOAT;
    d::check(nc_put_vara_float(out, it->second, start.data(), count.data(), impl.scratch.data()), impl.target,
             "writing " + name);
  }
  for (const auto& [name, values] : block.byte) {
    auto it = impl.field_var.find(name);
    if (it == impl.field_var.end()) throw Error("write_level_block: unknown output field " + name);
    d::check(nc_put_vara_schar(out, it->second, start.data(), count.data(),
                               reinterpret_cast<const signed char*>(values.data())),
             impl.target, "writing " + name);
  }
  d::check(nc_sync(out), impl.target, "flushing");
}


void OutputWriter::commit(const QcCounts& qc) {
  Impl& impl = *impl_;
  {
    std::lock_guard<std::mutex> lock(d::netcdf_mutex());
    const int out = impl.file.id();
    d::check(nc_redef(out), impl.target, "entering define mode");
    auto put_count = [&](const char* name, long value) {
      long long v = value;
      d::check(nc_put_att_longlong(out, NC_GLOBAL, name, NC_INT64, 1, &v), impl.target, name);
    };
    put_count("qc_columns_analysed", qc.columns_analysed);
    put_count("qc_columns_skipped", qc.columns_skipped);
    put_count("qc_humidity_clipped", qc.humidity_clipped);
    put_count("qc_dew_point_corrected", qc.dew_point_corrected);
    put_count("qc_temperature_rejected", qc.temperature_rejected);
    put_count("qc_surface_pressure_rejected", qc.surface_pressure_rejected);
    d::check(nc_enddef(out), impl.target, "leaving define mode");
    impl.file.close();
  }
  impl.staged->commit();
  impl.committed = true;
}

}  // namespace latentlift
