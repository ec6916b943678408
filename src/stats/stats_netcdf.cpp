// NetCDF access of the climatology: analyze outputs in, STATS.nc in and out.
// CF-1.8 climatological statistics (sec. 7.4): time(group) with a climatology
// bounds variable and "within/over" cell_methods; group labels as a string
// auxiliary coordinate.
#include "stats/stats_netcdf.hpp"

#include <netcdf.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <limits>
#include <mutex>

#include "io/netcdf_file.hpp"
#include "io/netcdf_util.hpp"
#include "io/plausibility.hpp"
#include "io/temporary_output.hpp"
#include "io/units.hpp"
#include "maps/source_grid.hpp"
#include <set>
#include <sstream>
#include <utility>

#include "latentlift/crs.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::climatology::detail {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr int kFormatVersion = 1;
const char* const kTimeUnits = "seconds since 1970-01-01 00:00:00";

// Write failures say "No space left on device" when the disk is full (src/io/netcdf_util.hpp).
using io::detail::check;

// The one RAII owner of netCDF ids (src/io/netcdf_util.hpp).
using Nc = io::detail::NcFile;

using io::detail::find_var;

std::string text_att(int nc, int varid, const char* name) {
  nc_type type;
  size_t len = 0;
  if (nc_inq_att(nc, varid, name, &type, &len) != NC_NOERR) return "";
  if (type == NC_CHAR) {
    std::string s(len, '\0');
    nc_get_att_text(nc, varid, name, s.data());
    while (!s.empty() && (s.back() == '\0' || s.back() == ' ')) s.pop_back();
    return s;
  }
  if (type == NC_STRING && len == 1) {
    char* value = nullptr;
    nc_get_att_string(nc, varid, name, &value);
    std::string s = value ? value : "";
    nc_free_string(1, &value);
    return s;
  }
  return "";
}

std::vector<double> number_att(int nc, int varid, const char* name) {
  nc_type type;
  size_t len = 0;
  if (nc_inq_att(nc, varid, name, &type, &len) != NC_NOERR || type == NC_CHAR || type == NC_STRING) return {};
  std::vector<double> v(len);
  nc_get_att_double(nc, varid, name, v.data());
  return v;
}

// Attribute value as text, whatever its type (for recording settings).
std::string any_att_text(int nc, int varid, const char* name) {
  nc_type type;
  size_t len = 0;
  if (nc_inq_att(nc, varid, name, &type, &len) != NC_NOERR) return "";
  if (type == NC_CHAR || type == NC_STRING) return text_att(nc, varid, name);
  std::ostringstream out;
  out.precision(17);
  auto values = number_att(nc, varid, name);
  for (size_t i = 0; i < values.size(); ++i) out << (i ? " " : "") << values[i];
  return out.str();
}

void put_text(int nc, int varid, const char* name, const std::string& value, const std::string& file) {
  check(nc_put_att_text(nc, varid, name, value.size(), value.c_str()), file, std::string("attribute ") + name);
}

void put_double_att(int nc, int varid, const char* name, nc_type type, double value, const std::string& file) {
  check(nc_put_att_double(nc, varid, name, type, 1, &value), file, std::string("attribute ") + name);
}

// A variable's dimension ids, names and lengths: io's VarShape (src/io/netcdf_util.hpp).
using VarDims = io::detail::VarShape;
using io::detail::var_shape;

std::vector<std::string> split_words(const std::string& text) {
  std::istringstream in(text);
  std::vector<std::string> words;
  for (std::string w; in >> w;) words.push_back(w);
  return words;
}

bool is_time_var(int nc, int varid) {
  const std::string standard_name = text_att(nc, varid, "standard_name");
  const std::string axis = text_att(nc, varid, "axis");
  const std::string units = text_att(nc, varid, "units");
  if (standard_name == "forecast_reference_time" || standard_name == "forecast_period") return false;
  return standard_name == "time" || axis == "T" || units.find(" since ") != std::string::npos;
}

// ---- UDUNITS-2 conversion to the units of the statistics ----------------------------

// Returns (scale, offset) with to = scale * from + offset; throws InputError when not convertible.
// The UDUNITS-2 layer is io's (src/io/units.hpp), the one owner of the unit database.
std::pair<double, double> unit_conversion(const std::string& from, const std::string& to,
                                          const std::string& file, const std::string& variable) {
  if (from == to) return {1.0, 0.0};
  try {
    const io::detail::UnitConverter converter(io::detail::normalise_unit(from), to);
    const double offset = converter.convert(0.0);
    return {converter.convert(1.0) - offset, offset};
  } catch (const std::invalid_argument&) {
    throw InputError(file, variable, "units convertible to '" + to + "', got '" + from + "'");
  }
}

// ---- analyze outputs ---------------------------------------------------------

struct TimeAxis {
  int dimid = -1;  // -1: a scalar time coordinate (one step)
  std::vector<std::int64_t> valid_times;
};

TimeAxis find_time_axis(int nc, int varid, const std::string& path, const std::string& var) {
  TimeAxis axis;
  const VarDims dims = var_shape(nc, varid);
  int time_var = -1;
  for (size_t i = 0; i < dims.names.size(); ++i) {
    int cv = find_var(nc, dims.names[i]);
    if (cv >= 0 && is_time_var(nc, cv)) {
      axis.dimid = dims.dimids[i];
      time_var = cv;
      break;
    }
  }
  if (time_var < 0) {
    for (const std::string& name : split_words(text_att(nc, varid, "coordinates"))) {
      int cv = find_var(nc, name);
      int ndims = -1;
      if (cv >= 0) nc_inq_varndims(nc, cv, &ndims);
      if (cv >= 0 && ndims == 0 && is_time_var(nc, cv)) {
        time_var = cv;
        break;
      }
    }
  }
  if (time_var < 0)
    throw InputError(path, var, "a time coordinate (units '<unit> since <date>') giving the valid time of each step");
  const std::string units = text_att(nc, time_var, "units");
  const std::string tname = [&] {
    char name[NC_MAX_NAME + 1] = {0};
    nc_inq_varname(nc, time_var, name);
    return std::string(name);
  }();
  TimeUnits decoded;
  try {
    decoded = parse_time_units(units, text_att(nc, time_var, "calendar"));
  } catch (const std::invalid_argument& e) {
    throw InputError(path, tname, e.what());
  }
  size_t n = 1;
  if (axis.dimid >= 0) nc_inq_dimlen(nc, axis.dimid, &n);
  std::vector<double> values(n);
  check(nc_get_var_double(nc, time_var, values.data()), path, "reading " + tname);
  for (double v : values) {
    if (!std::isfinite(v)) throw InputError(path, tname, "finite time values (no missing valid times)");
    axis.valid_times.push_back(static_cast<std::int64_t>(std::llround(v * decoded.seconds_per_unit)) + decoded.epoch_s);
  }
  return axis;
}

Settings read_settings(int nc) {
  Settings settings;
  int natts = 0;
  nc_inq_varnatts(nc, NC_GLOBAL, &natts);
  for (int i = 0; i < natts; ++i) {
    char name[NC_MAX_NAME + 1] = {0};
    nc_inq_attname(nc, NC_GLOBAL, i, name);
    std::string n = name;
    if (n.rfind("analysis_", 0) == 0) settings[n] = any_att_text(nc, NC_GLOBAL, name);
  }
  // analyze outputs record the effective configuration as TOML text
  for (const auto& [key, value] : settings_from_toml(text_att(nc, NC_GLOBAL, "latentlift_settings")))
    settings[key] = value;
  // Files written before analysis.mu_parcel existed chose the MU parcel by its theta_w.
  if (settings.count("analysis_buoyancy") && !settings.count("analysis_mu_parcel"))
    settings["analysis_mu_parcel"] = "max_theta_w";
  return settings;
}

}  // namespace

Settings settings_from_toml(const std::string& toml) {
  Settings settings;
  std::istringstream in(toml);
  bool analysis = false;
  for (std::string line; std::getline(in, line);) {
    const size_t a = line.find_first_not_of(" \t");
    if (a == std::string::npos || line[a] == '#') continue;
    if (line[a] == '[') {
      analysis = line.compare(a, 10, "[analysis]") == 0;
      continue;
    }
    const size_t eq = line.find('=');
    if (!analysis || eq == std::string::npos) continue;
    std::string key = line.substr(a, eq - a), value = line.substr(eq + 1);
    while (!key.empty() && (key.back() == ' ' || key.back() == '\t')) key.pop_back();
    const size_t b = value.find_first_not_of(" \t\"");
    const size_t e = value.find_last_not_of(" \t\"\r");
    value = b == std::string::npos ? "" : value.substr(b, e - b + 1);
    settings["analysis_" + key] = value;
  }
  return settings;
}

bool is_analysis_output(const std::string& path) {
  Nc nc = Nc::open_read(path);
  return find_var(nc.id(), "latent_class") >= 0 && find_var(nc.id(), "mu_cape") >= 0;
}

AnalysisInput scan_analysis_output(const std::string& path) {
  Nc nc = Nc::open_read(path);
  AnalysisInput in;
  in.path = path;
  const int cls = find_var(nc.id(), "latent_class");
  if (cls < 0) throw InputError(path, "latent_class", "a latentlift analyze output (variable missing)");
  TimeAxis axis = find_time_axis(nc.id(), cls, path, "latent_class");
  in.valid_times = axis.valid_times;
  in.surface_pressure_source = text_att(nc.id(), NC_GLOBAL, "surface_pressure_source");
  const VarDims dims = var_shape(nc.id(), cls);
  in.grid.points = 1;
  for (size_t i = 0; i < dims.dimids.size(); ++i) {
    if (dims.dimids[i] == axis.dimid) continue;
    in.grid.dims.push_back(dims.names[i]);
    in.grid.sizes.push_back(dims.lengths[i]);
    in.grid.points *= dims.lengths[i];
  }
  if (in.grid.dims.empty() || in.grid.dims.size() > 2)
    throw InputError(path, "latent_class", "one or two horizontal dimensions besides time");
  for (std::size_t k = 0; k < in.grid.dims.size(); ++k)
    if (in.grid.sizes[k] == 0)
      throw InputError(path, "latent_class", "dimension '" + in.grid.dims[k] + "' has length 0: expected at least one cell");
  in.grid.grid_mapping = text_att(nc.id(), cls, "grid_mapping");
  if (!in.grid.grid_mapping.empty()) {  // validated like any input: a mapping PROJ understands
    const int mapping = find_var(nc.id(), in.grid.grid_mapping);
    if (mapping < 0)
      throw InputError(path, "latent_class", "its grid_mapping variable '" + io::detail::shorten(in.grid.grid_mapping) + "' in the file");
    geo::Crs::from_grid_mapping(io::detail::read_attributes(nc.id(), path, mapping), path, in.grid.grid_mapping);
  }
  in.grid.coordinates = text_att(nc.id(), cls, "coordinates");
  // Its coordinates are checked like those of reproject's and quicklook's inputs (one owner:
  // maps::detail::grid_of): latitudes within -90..90, longitudes within -360..720, monotonic.
  if (auto field = io::detail::find_variable(nc, "latent_class")) maps::detail::grid_of(nc, *field);
  for (const auto& spec : field_specs()) {
    const int v = find_var(nc.id(), spec.name);
    if (v < 0) throw InputError(path, spec.name, "a latentlift analyze output field (variable missing)");
    VarDims vd = var_shape(nc.id(), v);
    if (vd.dimids != dims.dimids) throw InputError(path, spec.name, "the same dimensions as latent_class");
  }
  const int stab = find_var(nc.id(), "stability_class");
  if (stab >= 0) {
    VarDims vd = var_shape(nc.id(), stab);
    std::vector<std::string> rest;
    std::vector<size_t> rest_len;
    std::vector<std::string> horizontal;
    for (size_t i = 0; i < vd.dimids.size(); ++i) {
      if (vd.dimids[i] == axis.dimid) continue;
      if (std::find(in.grid.dims.begin(), in.grid.dims.end(), vd.names[i]) != in.grid.dims.end()) {
        horizontal.push_back(vd.names[i]);
        continue;
      }
      rest.push_back(vd.names[i]);
      rest_len.push_back(vd.lengths[i]);
    }
    if (rest.size() != 1 || horizontal != in.grid.dims)
      throw InputError(path, "stability_class", "dimensions (time, level, horizontal dimensions of latent_class)");
    in.grid.level_dim = rest[0];
    in.grid.levels = rest_len[0];
  }
  in.settings = read_settings(nc.id());
  return in;
}

TimeStepFields StepBuffers::view(std::int64_t valid_time_s) const {
  TimeStepFields step;
  step.valid_time_s = valid_time_s;
  for (int f = 0; f < kFieldCount; ++f) step.field[f] = field[f].empty() ? nullptr : field[f].data();
  step.latent_class = latent_class.empty() ? nullptr : latent_class.data();
  step.stability_class = stability.empty() ? nullptr : stability.data();
  return step;
}

struct AnalysisReader::Impl {
  AnalysisInput input;
  bool with_levels = false;
  Nc nc;
  int time_dim = -1;
  struct Var {
    int varid = -1;
    std::string name;
    VarDims dims;
    double scale = 1.0, offset = 0.0;      // packing
    double to_scale = 1.0, to_offset = 0.0;  // unit conversion
    std::vector<double> fills;
  };
  std::array<Var, kFieldCount> fields;
  Var latent_class, stability;
  std::vector<double> buffer;

  Var describe(const std::string& name, const char* target_units) {
    Var v;
    v.name = name;
    v.varid = find_var(nc.id(), name);
    if (v.varid < 0) throw InputError(input.path, name, "a latentlift analyze output field (variable missing)");
    v.dims = var_shape(nc.id(), v.varid);
    io::detail::check_packing_attributes(nc.id(), v.varid, input.path, name);
    auto sf = number_att(nc.id(), v.varid, "scale_factor");
    auto ao = number_att(nc.id(), v.varid, "add_offset");
    if (!sf.empty()) v.scale = sf[0];
    if (!ao.empty()) v.offset = ao[0];
    for (const char* att : {"_FillValue", "missing_value"})
      for (double f : number_att(nc.id(), v.varid, att)) v.fills.push_back(f);
    if (target_units) {
      const std::string units = text_att(nc.id(), v.varid, "units");
      if (units.empty()) throw InputError(input.path, name, std::string("a units attribute ('") + target_units + "')");
      std::tie(v.to_scale, v.to_offset) = unit_conversion(units, target_units, input.path, name);
    }
    return v;
  }

  // Reads the slab of time index t into buffer (values in the variable's dimension order, time removed).
  void read_slab(const Var& v, size_t t) {
    std::vector<size_t> start(v.dims.dimids.size(), 0), count(v.dims.lengths);
    size_t total = 1;
    for (size_t i = 0; i < v.dims.dimids.size(); ++i) {
      if (v.dims.dimids[i] == time_dim) {
        start[i] = t;
        count[i] = 1;
      }
      total *= count[i];
    }
    buffer.resize(total);
    const int status = nc_get_vara_double(nc.id(), v.varid, start.data(), count.data(), buffer.data());
    if (status != NC_NOERR)  // a damaged input, not the machine
      throw InputError(input.path, v.name, std::string("readable values (") + nc_strerror(status) +
                                               "; is the file damaged or truncated?)");
  }

  bool is_fill(const Var& v, double raw) const {
    if (std::isnan(raw)) return true;
    for (double f : v.fills)
      if (raw == f) return true;
    return false;
  }
};

AnalysisReader::AnalysisReader(const AnalysisInput& input, bool with_levels) : impl_(new Impl) {
  try {
    impl_->input = input;
    impl_->with_levels = with_levels;
    impl_->nc = Nc::open_read(input.path);
    const int cls = find_var(impl_->nc.id(), "latent_class");
    impl_->time_dim = find_time_axis(impl_->nc.id(), cls, input.path, "latent_class").dimid;
    for (int f = 0; f < kFieldCount; ++f)
      impl_->fields[f] = impl_->describe(field_specs()[f].name, field_specs()[f].units);
    impl_->latent_class = impl_->describe("latent_class", nullptr);
    if (with_levels) impl_->stability = impl_->describe("stability_class", nullptr);
  } catch (...) {
    delete impl_;
    throw;
  }
}

AnalysisReader::~AnalysisReader() { delete impl_; }

void AnalysisReader::read(size_t t, StepBuffers& out) {
  Impl& m = *impl_;
  const size_t np = m.input.grid.points;
  for (int f = 0; f < kFieldCount; ++f) {
    const auto& v = m.fields[f];
    m.read_slab(v, t);
    auto& dst = out.field[f];
    dst.resize(np);
    for (size_t p = 0; p < np; ++p) {
      const double raw = m.buffer[p];
      dst[p] = m.is_fill(v, raw) ? kNaN : (raw * v.scale + v.offset) * v.to_scale + v.to_offset;
      if (std::isinf(dst[p]))  // never data: validated like model inputs
        throw InputError(m.input.path, v.name, "finite values or the fill value (found infinite values)");
    }
  }
  auto to_class = [&](const Impl::Var& v, double raw, int max_code) -> std::int8_t {
    if (m.is_fill(v, raw) || raw < 0) return -1;
    if (raw != std::floor(raw) || raw > max_code)
    {
      char got[32];
      std::snprintf(got, sizeof got, "%g", raw);
      throw InputError(m.input.path, v.name,
                       "flag values 0 to " + std::to_string(max_code) + " or the fill value, got " + got);
    }
    return static_cast<std::int8_t>(raw);
  };
  m.read_slab(m.latent_class, t);
  out.latent_class.resize(np);
  for (size_t p = 0; p < np; ++p) out.latent_class[p] = to_class(m.latent_class, m.buffer[p], 2);
  if (m.with_levels) {
    m.read_slab(m.stability, t);
    const size_t nl = m.input.grid.levels;
    out.stability.resize(nl * np);
    // position of the level dimension among the non-time dimensions
    size_t level_pos = 0, pos = 0;
    for (size_t i = 0; i < m.stability.dims.dimids.size(); ++i) {
      if (m.stability.dims.dimids[i] == m.time_dim) continue;
      if (m.stability.dims.names[i] == m.input.grid.level_dim) level_pos = pos;
      ++pos;
    }
    // non-time dims are [h..., level at level_pos, h...]: stride of level = product of later dims
    size_t after = 1;
    {
      size_t k = 0;
      for (size_t i = 0; i < m.stability.dims.dimids.size(); ++i) {
        if (m.stability.dims.dimids[i] == m.time_dim) continue;
        if (k > level_pos) after *= m.stability.dims.lengths[i];
        ++k;
      }
    }
    for (size_t src = 0; src < nl * np; ++src) {
      const size_t outer = src / (after * nl), level = (src / after) % nl, inner = src % after;
      const size_t point = outer * after + inner;
      out.stability[level * np + point] = to_class(m.stability, m.buffer[src], kStabilityClassCount - 1);
    }
  } else {
    out.stability.clear();
  }
}

// ---- STATS.nc ------------------------------------------------------------------

namespace {

std::string join(const std::vector<std::string>& items, const char* sep) {
  std::string out;
  for (size_t i = 0; i < items.size(); ++i) out += (i ? sep : "") + items[i];
  return out;
}

std::vector<std::string> split_lines(const std::string& text) {
  std::vector<std::string> out;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);)
    if (!line.empty()) out.push_back(line);
  return out;
}

// Climatological cell of a group (CF 7.4): [start of the first cell, end of the last cell] and the
// mid-point of the first cell as the time coordinate.
struct Cell {
  double time, lo, hi;
};

std::int64_t month_start(int year, int month) {  // month may run past 12
  year += (month - 1) / 12;
  month = (month - 1) % 12 + 1;
  return days_from_civil(year, month, 1) * 86400;
}

std::vector<Cell> group_cells(GroupBy group_by, const std::vector<std::int64_t>& times) {
  const int groups = group_count(group_by);
  std::vector<Cell> cells(groups);
  const std::int64_t t0 = times.front(), t1 = times.back();
  auto day_of = [](std::int64_t t) { return t >= 0 ? t / 86400 : -((-t + 86399) / 86400); };
  auto year_of = [&](std::int64_t t) {
    int y, m, d;
    civil_from_days(day_of(t), y, m, d);
    return std::pair<int, int>{y, m};
  };
  for (int g = 0; g < groups; ++g) {
    std::int64_t first = std::numeric_limits<std::int64_t>::max(), last = std::numeric_limits<std::int64_t>::min();
    for (std::int64_t t : times)
      if (group_index(group_by, t) == g) {
        first = std::min(first, t);
        last = std::max(last, t);
      }
    if (first > last) first = last = t0;  // empty group: placed in the first period of the record
    Cell& c = cells[g];
    switch (group_by) {
      case GroupBy::all:
        c = {0.5 * (double(t0) + double(t1)), double(t0), double(t1)};
        break;
      case GroupBy::hour: {
        const std::int64_t d0 = day_of(first) * 86400 + g * 3600, d1 = day_of(last) * 86400 + (g + 1) * 3600;
        c = {double(d0) + 1800.0, double(d0), double(d1)};
        break;
      }
      case GroupBy::month: {
        const int y0 = year_of(first).first, y1 = year_of(last).first;
        const std::int64_t s = month_start(y0, g + 1), e = month_start(y0, g + 2);
        c = {0.5 * (double(s) + double(e)), double(s), double(month_start(y1, g + 2))};
        break;
      }
      case GroupBy::season: {
        // season year: DJF belongs to the year of its January and February
        auto season_year = [&](std::int64_t t) {
          auto [y, m] = year_of(t);
          return m == 12 ? y + 1 : y;
        };
        const int start_month = g == 0 ? 0 : 3 * g;  // 0 = December of the previous year
        const int y0 = season_year(first), y1 = season_year(last);
        const std::int64_t s = start_month == 0 ? month_start(y0 - 1, 12) : month_start(y0, start_month);
        const std::int64_t e = start_month == 0 ? month_start(y0, 3) : month_start(y0, start_month + 3);
        const std::int64_t end = start_month == 0 ? month_start(y1, 3) : month_start(y1, start_month + 3);
        c = {0.5 * (double(s) + double(e)), double(s), double(end)};
        break;
      }
    }
  }
  (void)t1;
  return cells;
}

std::string cell_method(GroupBy group_by, const char* method) {
  const std::string m = method;
  switch (group_by) {
    case GroupBy::all: return "time: " + m;
    case GroupBy::month:
    case GroupBy::season: return "time: " + m + " within years time: " + m + " over years";
    case GroupBy::hour: return "time: " + m + " within days time: " + m + " over days";
  }
  return "time: " + m;
}

// Variables of the template copied into STATS.nc: coordinate variables of the grid (and level)
// dimensions, auxiliary coordinates, the grid mapping and their bounds.
std::vector<int> template_vars(int nc, const Grid& grid, const std::set<std::string>& own_names) {
  std::set<std::string> wanted;
  for (const auto& d : grid.dims) wanted.insert(d);
  if (!grid.level_dim.empty()) wanted.insert(grid.level_dim);
  for (const auto& w : split_words(grid.coordinates)) wanted.insert(w);
  if (!grid.grid_mapping.empty()) wanted.insert(grid.grid_mapping);
  std::set<std::string> allowed_dims(grid.dims.begin(), grid.dims.end());
  if (!grid.level_dim.empty()) allowed_dims.insert(grid.level_dim);
  std::vector<int> result;
  std::set<std::string> seen;
  std::vector<std::string> queue(wanted.begin(), wanted.end());
  while (!queue.empty()) {
    std::string name = queue.back();
    queue.pop_back();
    if (seen.count(name) || own_names.count(name)) continue;
    seen.insert(name);
    int v = find_var(nc, name);
    if (v < 0) continue;
    VarDims d = var_shape(nc, v);
    bool ok = true;
    for (size_t i = 0; i < d.names.size(); ++i)
      if (!allowed_dims.count(d.names[i]) && d.lengths[i] > 4) ok = false;  // bounds dims are small
    nc_type type;
    nc_inq_vartype(nc, v, &type);
    if (!ok || type == NC_STRING) continue;
    result.push_back(v);
    const std::string bounds = text_att(nc, v, "bounds");
    if (!bounds.empty()) queue.push_back(bounds);
  }
  std::sort(result.begin(), result.end());
  return result;
}

struct Writer {
  int nc;
  std::string path;
  int def_dim(const std::string& name, size_t len) {
    int id = -1;
    if (nc_inq_dimid(nc, name.c_str(), &id) == NC_NOERR) {
      size_t have = 0;
      nc_inq_dimlen(nc, id, &have);
      if (have != len) throw Error(path + ": dimension '" + name + "' defined twice with different lengths");
      return id;
    }
    check(nc_def_dim(nc, name.c_str(), len, &id), path, "defining dimension " + name);
    return id;
  }
  int def_var(const std::string& name, nc_type type, const std::vector<int>& dims, bool compress = false) {
    int id = -1;
    check(nc_def_var(nc, name.c_str(), type, static_cast<int>(dims.size()), dims.data(), &id), path,
          "defining variable " + name);
    if (compress && !dims.empty()) check(nc_def_var_deflate(nc, id, 1, 1, 1), path, "compressing " + name);
    return id;
  }
};

}  // namespace

bool is_stats_file(const std::string& path) {
  Nc nc = Nc::open_read(path);
  return !text_att(nc.id(), NC_GLOBAL, "latentlift_climatology_format").empty();
}

StatsMetadata read_stats_metadata(const std::string& path) {
  Nc nc = Nc::open_read(path);
  const int id = nc.id();
  if (text_att(id, NC_GLOBAL, "latentlift_climatology_format").empty() || find_var(id, "count") < 0)
    throw InputError(path, "", "a latentlift climatology file (written by latentlift climatology)");
  StatsMetadata meta;
  try {
    meta.group_by = parse_group_by(text_att(id, NC_GLOBAL, "group_by"));
  } catch (const UsageError&) {
    throw InputError(path, "", "a global attribute group_by of all, month, season or hour");
  }
  meta.grid.dims = split_words(text_att(id, NC_GLOBAL, "horizontal_dimensions"));
  meta.grid.points = 1;
  for (const auto& d : meta.grid.dims) {
    int dimid;
    size_t len = 0;
    check(nc_inq_dimid(id, d.c_str(), &dimid), path, "dimension " + d);
    nc_inq_dimlen(id, dimid, &len);
    meta.grid.sizes.push_back(len);
    meta.grid.points *= len;
  }
  meta.grid.level_dim = text_att(id, NC_GLOBAL, "level_dimension");
  if (!meta.grid.level_dim.empty()) {
    int dimid;
    check(nc_inq_dimid(id, meta.grid.level_dim.c_str(), &dimid), path, "dimension " + meta.grid.level_dim);
    nc_inq_dimlen(id, dimid, &meta.grid.levels);
  }
  const int count = find_var(id, "count");
  meta.grid.grid_mapping = text_att(id, count, "grid_mapping");
  std::vector<std::string> coords;
  for (const auto& w : split_words(text_att(id, count, "coordinates")))
    if (w != "time" && w != "group_label") coords.push_back(w);
  meta.grid.coordinates = join(coords, " ");
  const int vt = find_var(id, "valid_time");
  if (vt < 0) throw InputError(path, "valid_time", "the record of the valid times counted");
  VarDims d = var_shape(id, vt);
  meta.valid_times.resize(d.lengths.at(0));
  if (!meta.valid_times.empty())
    check(nc_get_var_longlong(id, vt, reinterpret_cast<long long*>(meta.valid_times.data())), path, "reading valid_time");
  meta.input_files = split_lines(text_att(id, NC_GLOBAL, "input_files"));
  meta.surface_pressure_source = text_att(id, NC_GLOBAL, "surface_pressure_source");
  meta.settings = read_settings(id);
  meta.history = text_att(id, NC_GLOBAL, "history");
  return meta;
}

Accumulator read_stats_accumulator(const std::string& path, const StatsMetadata& meta) {
  Nc nc = Nc::open_read(path);
  const int id = nc.id();
  Accumulator acc(meta.group_by, meta.grid.points, static_cast<int>(meta.grid.levels));
  const size_t cells = acc.count.size();
  auto read_u32 = [&](const std::string& name, std::vector<std::uint32_t>& dst) {
    int v = find_var(id, name);
    if (v < 0) throw InputError(path, name, "climatology state variable (missing)");
    std::vector<unsigned int> buf(dst.size());
    check(nc_get_var_uint(id, v, buf.data()), path, "reading " + name);
    std::copy(buf.begin(), buf.end(), dst.begin());
  };
  auto read_f64 = [&](const std::string& name, std::vector<double>& dst) {
    int v = find_var(id, name);
    if (v < 0) throw InputError(path, name, "climatology state variable (missing)");
    check(nc_get_var_double(id, v, dst.data()), path, "reading " + name);
  };
  read_u32("count", acc.count);
  read_u32("latent_count", acc.latent_count);
  read_u32("real_latent_count", acc.real_latent_count);
  for (int f = 0; f < kFieldCount; ++f) {
    const auto& spec = field_specs()[f];
    const std::string name = spec.name;
    read_u32(name + "_count", acc.n[f]);
    read_f64(name + "_mean", acc.mean[f]);
    read_f64(name + "_m2", acc.m2[f]);
    read_f64(name + "_max", acc.max[f]);
    for (size_t i = 0; i < cells; ++i)
      if (acc.n[f][i] == 0) {
        acc.mean[f][i] = 0.0;
        acc.m2[f][i] = 0.0;
        acc.max[f][i] = -std::numeric_limits<double>::infinity();
      }
    // bins must be the ones of this build
    const int bb = find_var(id, (name + "_bin_bounds").c_str());
    if (bb < 0) throw InputError(path, name + "_bin_bounds", "histogram bin bounds (missing)");
    VarDims bd = var_shape(id, bb);
    const size_t bins = spec.bin_count();
    if (bd.lengths.size() != 2 || bd.lengths[0] != bins)
      throw InputError(path, name + "_bin_bounds", "the histogram bins of this latentlift version (" +
                                                       std::to_string(bins) + " bins)");
    std::vector<double> bounds(bins * 2);
    check(nc_get_var_double(id, bb, bounds.data()), path, "reading " + name + "_bin_bounds");
    for (size_t k = 0; k + 1 < bins; ++k)
      if (bounds[2 * k + 1] != spec.edges[k])
        throw InputError(path, name + "_bin_bounds", "the histogram bins of this latentlift version (edge " +
                                                         std::to_string(spec.edges[k]) + ")");
    const int hv = find_var(id, name + "_histogram");
    if (hv < 0) throw InputError(path, name + "_histogram", "climatology state variable (missing)");
    VarDims hd = var_shape(id, hv);
    std::vector<size_t> start(hd.lengths.size(), 0), count(hd.lengths);
    count[0] = 1;
    std::vector<std::uint32_t> buf(bins * meta.grid.points);
    for (int g = 0; g < acc.groups(); ++g) {  // file (group, bin, grid...), memory (group, point, bin)
      start[0] = g;
      check(nc_get_vara_uint(id, hv, start.data(), count.data(), reinterpret_cast<unsigned int*>(buf.data())), path,
            "reading " + name + "_histogram");
      acc.histogram_from_file_layout(f, g, buf.data());
    }
  }
  if (meta.grid.levels > 0) read_u32("stability_class_count", acc.stability_count);
  return acc;
}

void write_stats(const std::string& path, const StatsMetadata& meta, const Accumulator& acc,
                 const std::string& template_path, bool replace) {
  namespace fs = std::filesystem;
  io::detail::TemporaryOutput staged(path, replace, kReplaceHint);  // removed unless committed
  const std::string& tmp = path;  // messages name the user's file, never the temporary one

  const Grid& grid = meta.grid;
  const int groups = acc.groups();
  const auto& specs = field_specs();
  Nc out = Nc::create_netcdf4(staged.path(), path);
  Writer w{out.id(), tmp};
  const int nc = out.id();

  std::set<std::string> own = {"group", "time", "climatology_bounds", "time_bnds", "group_label", "valid_time", "count",
                               "latent_count", "real_latent_count", "latent_frequency", "real_latent_frequency",
                               "stability_class", "stability_class_count"};
  for (const auto& s : specs)
    for (const char* suffix : {"", "_count", "_mean", "_m2", "_std", "_max", "_p50", "_p90", "_p99", "_histogram",
                               "_bin", "_bin_bounds"})
      own.insert(std::string(s.name) + suffix);

  // dimensions
  const int dim_group = w.def_dim("group", groups);
  const int dim_nv = w.def_dim("nv", 2);
  std::vector<int> hdims;
  for (size_t i = 0; i < grid.dims.size(); ++i) hdims.push_back(w.def_dim(grid.dims[i], grid.sizes[i]));
  int dim_level = -1, dim_class = -1;
  if (grid.levels > 0) {
    dim_level = w.def_dim(grid.level_dim, grid.levels);
    dim_class = w.def_dim("stability_class", kStabilityClassCount);
  }
  const int dim_vt = w.def_dim("valid_time", meta.valid_times.size());

  // copied grid variables
  Nc tpl = Nc::open_read(template_path);
  std::vector<std::pair<int, int>> copies;  // (template varid, output varid)
  for (int v : template_vars(tpl.id(), grid, own)) {
    char name[NC_MAX_NAME + 1] = {0};
    nc_type type;
    nc_inq_var(tpl.id(), v, name, &type, nullptr, nullptr, nullptr);
    VarDims d = var_shape(tpl.id(), v);
    std::vector<int> dims;
    for (size_t i = 0; i < d.names.size(); ++i) dims.push_back(w.def_dim(d.names[i], d.lengths[i]));
    const int ov = w.def_var(name, type, dims);
    int natts = 0;
    nc_inq_varnatts(tpl.id(), v, &natts);
    for (int a = 0; a < natts; ++a) {
      char att[NC_MAX_NAME + 1] = {0};
      nc_inq_attname(tpl.id(), v, a, att);
      check(nc_copy_att(tpl.id(), v, att, nc, ov), tmp, std::string("copying attribute ") + att + " of " + name);
    }
    copies.emplace_back(v, ov);
  }

  // group coordinate and climatological time (CF 7.4)
  const std::vector<Cell> cells = group_cells(meta.group_by, meta.valid_times);
  const bool climatological = meta.group_by != GroupBy::all;
  const int v_time = w.def_var("time", NC_DOUBLE, {dim_group});
  put_text(nc, v_time, "standard_name", "time", tmp);
  put_text(nc, v_time, "long_name", climatological ? "climatological time of the group" : "time", tmp);
  put_text(nc, v_time, "units", kTimeUnits, tmp);
  put_text(nc, v_time, "calendar", "standard", tmp);
  const char* bounds_name = climatological ? "climatology_bounds" : "time_bnds";
  put_text(nc, v_time, climatological ? "climatology" : "bounds", bounds_name, tmp);
  const int v_bounds = w.def_var(bounds_name, NC_DOUBLE, {dim_group, dim_nv});
  put_text(nc, v_bounds, "units", kTimeUnits, tmp);
  put_text(nc, v_bounds, "calendar", "standard", tmp);
  // The group dimension's own coordinate variable (its index; the axis of climatological time, CF 4),
  // so that readers such as GDAL find one coordinate for it instead of choosing among time and group_label.
  const int v_group = w.def_var("group", NC_INT, {dim_group});
  put_text(nc, v_group, "long_name", "index of the group of valid times (labels in group_label, times in time)", tmp);
  put_text(nc, v_group, "axis", "T", tmp);
  const int v_label = w.def_var("group_label", NC_STRING, {dim_group});
  put_text(nc, v_label, "long_name", std::string("group of valid times (") + to_string(meta.group_by) + ")", tmp);
  const int v_vt = w.def_var("valid_time", NC_INT64, {dim_vt}, true);
  put_text(nc, v_vt, "long_name", "valid times counted in this climatology (a time step is counted once)", tmp);
  put_text(nc, v_vt, "units", kTimeUnits, tmp);
  put_text(nc, v_vt, "calendar", "standard", tmp);

  std::vector<int> gdims{dim_group};
  gdims.insert(gdims.end(), hdims.begin(), hdims.end());
  std::string coordinates = "time group_label";
  if (!grid.coordinates.empty()) coordinates += " " + grid.coordinates;
  auto grid_atts = [&](int v) {
    put_text(nc, v, "coordinates", coordinates, tmp);
    if (!grid.grid_mapping.empty()) put_text(nc, v, "grid_mapping", grid.grid_mapping, tmp);
  };
  auto def_count = [&](const std::string& name, const std::string& long_name, const std::vector<int>& dims) {
    const int v = w.def_var(name, NC_UINT, dims, true);
    put_text(nc, v, "long_name", long_name, tmp);
    put_text(nc, v, "units", "1", tmp);
    grid_atts(v);
    return v;
  };
  auto def_stat = [&](const std::string& name, nc_type type, const std::string& long_name, const std::string& units,
                      const std::string& method) {
    const int v = w.def_var(name, type, gdims, true);
    if (type == NC_FLOAT) {
      float fill = NC_FILL_FLOAT;
      check(nc_def_var_fill(nc, v, 0, &fill), tmp, "fill of " + name);
    } else {
      double fill = NC_FILL_DOUBLE;
      check(nc_def_var_fill(nc, v, 0, &fill), tmp, "fill of " + name);
    }
    put_text(nc, v, "long_name", long_name, tmp);
    put_text(nc, v, "units", units, tmp);
    if (!method.empty()) put_text(nc, v, "cell_methods", method, tmp);
    grid_atts(v);
    return v;
  };

  // Chunks of one group (written group by group), whole inner dimensions, rows of the grid up to ~4 MiB.
  auto chunk_by_group = [&](int v, std::vector<size_t> inner) {
    size_t inner_size = 4;
    for (size_t l : inner) inner_size *= l;
    size_t row = inner_size;
    for (size_t i = 1; i < grid.sizes.size(); ++i) row *= grid.sizes[i];
    const size_t rows = std::max<size_t>(1, std::min(grid.sizes[0], (size_t(4) << 20) / std::max<size_t>(row, 1)));
    std::vector<size_t> chunks{1};
    chunks.insert(chunks.end(), inner.begin(), inner.end());
    chunks.push_back(rows);
    for (size_t i = 1; i < grid.sizes.size(); ++i) chunks.push_back(grid.sizes[i]);
    check(nc_def_var_chunking(nc, v, NC_CHUNKED, chunks.data()), tmp, "chunking");
  };
  const int v_count = def_count("count", "number of valid time steps (column analysed)", gdims);
  const int v_lc = def_count("latent_count", "number of time steps with the most-unstable parcel latently unstable", gdims);
  const int v_rlc = def_count("real_latent_count", "number of time steps with real-latent instability", gdims);
  const int v_lf = def_stat("latent_frequency", NC_FLOAT,
                            "frequency of latent instability of the most-unstable parcel (pseudo- or real-latent)", "1",
                            cell_method(meta.group_by, "mean"));
  const int v_rlf = def_stat("real_latent_frequency", NC_FLOAT, "frequency of real-latent instability (CAPE > CIN)",
                             "1", cell_method(meta.group_by, "mean"));
  struct FieldVars {
    int count, mean, m2, std, max, p50, p90, p99, hist, bin, bin_bounds;
  };
  std::array<FieldVars, kFieldCount> fv{};
  for (int f = 0; f < kFieldCount; ++f) {
    const auto& s = specs[f];
    const std::string n = s.name;
    FieldVars& x = fv[f];
    x.count = def_count(n + "_count", "number of time steps with " + n + " defined", gdims);
    x.mean = def_stat(n + "_mean", NC_DOUBLE, "mean of the " + std::string(s.long_name), s.units,
                      cell_method(meta.group_by, "mean"));
    x.m2 = def_stat(n + "_m2", NC_DOUBLE,
                    "sum of squared deviations from the mean of " + n + " (state for exact merges)",
                    std::string("(") + s.units + ")2", "");
    x.std = def_stat(n + "_std", NC_FLOAT, "standard deviation (sample, n - 1) of the " + std::string(s.long_name),
                     s.units, cell_method(meta.group_by, "standard_deviation"));
    x.max = def_stat(n + "_max", NC_DOUBLE, "maximum of the " + std::string(s.long_name), s.units,
                     cell_method(meta.group_by, "maximum"));
    x.p50 = def_stat(n + "_p50", NC_FLOAT, "median of the " + std::string(s.long_name) + " (from the histogram)",
                     s.units, cell_method(meta.group_by, "median"));
    x.p90 = def_stat(n + "_p90", NC_FLOAT, "90th percentile of the " + std::string(s.long_name) + " (from the histogram)",
                     s.units, "");
    x.p99 = def_stat(n + "_p99", NC_FLOAT, "99th percentile of the " + std::string(s.long_name) + " (from the histogram)",
                     s.units, "");
    put_double_att(nc, x.p90, "percentile", NC_DOUBLE, 90.0, tmp);
    put_double_att(nc, x.p99, "percentile", NC_DOUBLE, 99.0, tmp);
    for (int v : {x.p50, x.p90, x.p99})
      put_text(nc, v, "comment",
               "percentile over the time steps of the group where the field is defined, interpolated linearly "
               "within the histogram bin that holds it (" + n + "_histogram), capped at " + n + "_max",
               tmp);
    const int dim_bin = w.def_dim(n + "_bin", s.bin_count());
    x.bin = w.def_var(n + "_bin", NC_DOUBLE, {dim_bin});
    put_text(nc, x.bin, "long_name", "lower bound of the histogram bin of " + n, tmp);
    put_text(nc, x.bin, "units", s.units, tmp);
    put_text(nc, x.bin, "bounds", n + "_bin_bounds", tmp);
    x.bin_bounds = w.def_var(n + "_bin_bounds", NC_DOUBLE, {dim_bin, dim_nv});
    put_text(nc, x.bin_bounds, "units", s.units, tmp);
    put_text(nc, x.bin_bounds, "comment",
             "bin 0 holds values <= its upper bound (a point mass at 0); bin k holds values in (lower, upper]; "
             "the last bin holds values above its lower bound",
             tmp);
    std::vector<int> hd{dim_group, dim_bin};
    hd.insert(hd.end(), hdims.begin(), hdims.end());
    x.hist = def_count(n + "_histogram", "histogram of " + n + " over the time steps of the group", hd);
    chunk_by_group(x.hist, {static_cast<size_t>(s.bin_count())});
  }
  int v_sc = -1, v_scc = -1;
  if (grid.levels > 0) {
    v_sc = w.def_var("stability_class", NC_BYTE, {dim_class});
    put_text(nc, v_sc, "long_name", "static stability class of the layer from a level to the next above", tmp);
    const signed char flags[] = {0, 1, 2, 3, 4};
    check(nc_put_att_schar(nc, v_sc, "flag_values", NC_BYTE, 5, flags), tmp, "flag_values");
    put_text(nc, v_sc, "flag_meanings",
             "absolutely_stable conditionally_unstable absolutely_unstable neutral_saturated neutral_dry", tmp);
    std::vector<int> sd{dim_group, dim_level, dim_class};
    sd.insert(sd.end(), hdims.begin(), hdims.end());
    v_scc = def_count("stability_class_count", "number of time steps with the layer in each stability class", sd);
    chunk_by_group(v_scc, {grid.levels, static_cast<size_t>(kStabilityClassCount)});
  }

  // global attributes
  put_text(nc, NC_GLOBAL, "Conventions", "CF-1.8", tmp);
  put_text(nc, NC_GLOBAL, "title", "latent instability climatology", tmp);
  put_text(nc, NC_GLOBAL, "source", std::string("latentlift ") + LATENTLIFT_VERSION + " climatology", tmp);
  put_text(nc, NC_GLOBAL, "history", meta.history, tmp);
  put_text(nc, NC_GLOBAL, "latentlift_climatology_format", std::to_string(kFormatVersion), tmp);
  put_text(nc, NC_GLOBAL, "group_by", to_string(meta.group_by), tmp);
  put_text(nc, NC_GLOBAL, "horizontal_dimensions", join(grid.dims, " "), tmp);
  if (grid.levels > 0) put_text(nc, NC_GLOBAL, "level_dimension", grid.level_dim, tmp);
  put_text(nc, NC_GLOBAL, "input_files", join(meta.input_files, "\n"), tmp);
  if (!meta.surface_pressure_source.empty())
    put_text(nc, NC_GLOBAL, "surface_pressure_source", meta.surface_pressure_source, tmp);
  long long steps = static_cast<long long>(meta.valid_times.size());
  check(nc_put_att_longlong(nc, NC_GLOBAL, "time_steps", NC_INT64, 1, &steps), tmp, "time_steps");
  put_text(nc, NC_GLOBAL, "time_coverage_start", iso8601(meta.valid_times.front()), tmp);
  put_text(nc, NC_GLOBAL, "time_coverage_end", iso8601(meta.valid_times.back()), tmp);
  put_text(nc, NC_GLOBAL, "statistics",
           "per grid point and group over the valid times of the group: mean and M2 by Welford (1962) updates and "
           "the Chan, Golub and LeVeque (1979) pairwise merge; standard deviation sqrt(M2 / (n - 1)); percentiles "
           "from fixed-bin histograms (bins in <field>_bin_bounds) by linear interpolation within the bin, capped "
           "at the maximum; statistics pooled over all time steps of the group",
           tmp);
  for (const auto& [key, value] : meta.settings) put_text(nc, NC_GLOBAL, key.c_str(), value, tmp);
  check(nc_enddef(nc), tmp, "leaving define mode");

  // data: copies
  for (auto [tv, ov] : copies) {
    nc_type type;
    nc_inq_vartype(tpl.id(), tv, &type);
    size_t size = 0;
    nc_inq_type(tpl.id(), type, nullptr, &size);
    VarDims d = var_shape(tpl.id(), tv);
    size_t n = 1;
    for (size_t l : d.lengths) n *= l;
    std::vector<char> buf(n * size);
    check(nc_get_var(tpl.id(), tv, buf.data()), template_path, "reading a grid coordinate");
    check(nc_put_var(nc, ov, buf.data()), tmp, "writing a grid coordinate");
  }
  tpl.close();

  std::vector<double> tv(groups), tb(2 * groups);
  for (int g = 0; g < groups; ++g) {
    tv[g] = cells[g].time;
    tb[2 * g] = cells[g].lo;
    tb[2 * g + 1] = cells[g].hi;
  }
  check(nc_put_var_double(nc, v_time, tv.data()), tmp, "writing time");
  check(nc_put_var_double(nc, v_bounds, tb.data()), tmp, "writing time bounds");
  {
    std::vector<int> index(static_cast<size_t>(groups));
    for (int g = 0; g < groups; ++g) index[static_cast<size_t>(g)] = g;
    check(nc_put_var_int(nc, v_group, index.data()), tmp, "writing group");
  }
  {
    const auto labels = group_labels(meta.group_by);
    std::vector<const char*> ptrs;
    for (const auto& l : labels) ptrs.push_back(l.c_str());
    check(nc_put_var_string(nc, v_label, ptrs.data()), tmp, "writing group_label");
  }
  if (!meta.valid_times.empty())
    check(nc_put_var_longlong(nc, v_vt, reinterpret_cast<const long long*>(meta.valid_times.data())), tmp,
          "writing valid_time");

  auto put_u32 = [&](int v, const std::vector<std::uint32_t>& data, const std::string& name) {
    check(nc_put_var_uint(nc, v, reinterpret_cast<const unsigned int*>(data.data())), tmp, "writing " + name);
  };
  put_u32(v_count, acc.count, "count");
  put_u32(v_lc, acc.latent_count, "latent_count");
  put_u32(v_rlc, acc.real_latent_count, "real_latent_count");
  const size_t cells_n = acc.count.size();
  std::vector<float> f32(cells_n);
  std::vector<double> f64(cells_n);
  auto ratio = [&](const std::vector<std::uint32_t>& num) {
    for (size_t i = 0; i < cells_n; ++i)
      f32[i] = acc.count[i] ? static_cast<float>(double(num[i]) / acc.count[i]) : NC_FILL_FLOAT;
  };
  ratio(acc.latent_count);
  check(nc_put_var_float(nc, v_lf, f32.data()), tmp, "writing latent_frequency");
  ratio(acc.real_latent_count);
  check(nc_put_var_float(nc, v_rlf, f32.data()), tmp, "writing real_latent_frequency");
  for (int f = 0; f < kFieldCount; ++f) {
    const auto& s = specs[f];
    const FieldVars& x = fv[f];
    const std::string n = s.name;
    const auto& cnt = acc.n[f];
    put_u32(x.count, cnt, n + "_count");
    auto put_f64 = [&](int v, const std::vector<double>& src, const std::string& name) {
      for (size_t i = 0; i < cells_n; ++i) f64[i] = cnt[i] ? src[i] : NC_FILL_DOUBLE;
      check(nc_put_var_double(nc, v, f64.data()), tmp, "writing " + name);
    };
    put_f64(x.mean, acc.mean[f], n + "_mean");
    put_f64(x.m2, acc.m2[f], n + "_m2");
    put_f64(x.max, acc.max[f], n + "_max");
    for (size_t i = 0; i < cells_n; ++i) {
      const double sd = standard_deviation(cnt[i], acc.m2[f][i]);
      f32[i] = std::isnan(sd) ? NC_FILL_FLOAT : static_cast<float>(sd);
    }
    check(nc_put_var_float(nc, x.std, f32.data()), tmp, "writing " + n + "_std");
    const int bins = s.bin_count();
    for (auto [v, q] : {std::pair<int, double>{x.p50, 50.0}, {x.p90, 90.0}, {x.p99, 99.0}}) {
      const std::vector<double> values = acc.percentile(f, q);
      for (size_t i = 0; i < cells_n; ++i) f32[i] = std::isnan(values[i]) ? NC_FILL_FLOAT : static_cast<float>(values[i]);
      check(nc_put_var_float(nc, v, f32.data()), tmp, "writing " + n + " percentile");
    }
    std::vector<double> lower(bins), bb(2 * bins);
    for (int k = 0; k < bins; ++k) {
      lower[k] = k == 0 ? s.edges[0] : s.edges[k - 1];
      bb[2 * k] = lower[k];
      bb[2 * k + 1] = k == 0 ? s.edges[0] : k < bins - 1 ? s.edges[k] : std::numeric_limits<double>::infinity();
    }
    check(nc_put_var_double(nc, x.bin, lower.data()), tmp, "writing " + n + "_bin");
    check(nc_put_var_double(nc, x.bin_bounds, bb.data()), tmp, "writing " + n + "_bin_bounds");
    {
      std::vector<size_t> start(2 + hdims.size(), 0), count(2 + hdims.size(), 1);
      count[1] = bins;
      for (size_t i = 0; i < grid.sizes.size(); ++i) count[2 + i] = grid.sizes[i];
      std::vector<std::uint32_t> buf(static_cast<size_t>(bins) * grid.points);
      for (int g = 0; g < groups; ++g) {  // memory (group, point, bin), file (group, bin, grid...)
        acc.histogram_to_file_layout(f, g, buf.data());
        start[0] = g;
        check(nc_put_vara_uint(nc, x.hist, start.data(), count.data(), reinterpret_cast<const unsigned int*>(buf.data())),
              tmp, "writing " + n + "_histogram");
      }
    }
  }
  if (grid.levels > 0) {
    const signed char classes[] = {0, 1, 2, 3, 4};
    check(nc_put_var_schar(nc, v_sc, classes), tmp, "writing stability_class");
    put_u32(v_scc, acc.stability_count, "stability_class_count");
  }
  out.close();
  staged.commit();
}

}  // namespace latentlift::climatology::detail
