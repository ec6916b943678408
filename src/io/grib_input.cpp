// GRIB input through ecCodes: find the messages, stage them into a temporary CF NetCDF file.
// Grid definitions become CF grid mappings and coordinates in the geo module (grib_grid.hpp).
#include "io/grib_input.hpp"

#include <eccodes.h>
#include <netcdf.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <map>
#include <memory>
#include <set>
#include <tuple>

#include "io/netcdf_util.hpp"
#include "io/temporary_output.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/grib_grid.hpp"

namespace latentlift::io::detail {

namespace {

struct FileCloser {
  void operator()(std::FILE* f) const { std::fclose(f); }
};
using FilePtr = std::unique_ptr<std::FILE, FileCloser>;

struct HandleDeleter {
  void operator()(codes_handle* h) const { codes_handle_delete(h); }
};
using HandlePtr = std::unique_ptr<codes_handle, HandleDeleter>;

/// A quantity of the analysis and how GRIB tags it (ecCodes paramId, the same for editions 1 and 2).
struct GribQuantity {
  const char* name;           // staged variable name
  const char* standard_name;  // CF
  const char* units;          // of the GRIB values (WMO tables)
  bool surface;               // on typeOfLevel=surface, else on isobaric levels
  std::vector<long> param_ids;
  int grib2_category = -1, grib2_number = -1;  // GRIB2 discipline 0 parameter without an ecCodes paramId
};

// ecCodes parameter database (paramId): 130 t, 133 q, 157 r, 3017 dpt, humidity mixing ratio by its
// GRIB2 code (discipline 0, category 1, number 2; WMO code table 4.2.0.1),
// 129 z, 156 gh, 134 sp, 228002 orog (GRIB2 0/3/5 at the surface), 129 z at the surface.
const std::vector<GribQuantity>& quantities() {
  static const std::vector<GribQuantity> list = {
      {"t", "air_temperature", "K", false, {130}},
      {"q", "specific_humidity", "kg kg-1", false, {133}},
      {"r", "relative_humidity", "%", false, {157}},
      {"dpt", "dew_point_temperature", "K", false, {3017}},
      {"mixr", "humidity_mixing_ratio", "kg kg-1", false, {}, 1, 2},
      {"gh", "geopotential_height", "m", false, {156}},
      {"z", "geopotential", "m2 s-2", false, {129}},
      {"sp", "surface_air_pressure", "Pa", true, {134}},
      {"orog", "surface_altitude", "m", true, {228002, 156}},
      {"z_surface", "surface_geopotential", "m2 s-2", true, {129}},
  };
  return list;
}

std::string get_string(codes_handle* h, const char* key) {
  char buffer[256] = {0};
  size_t length = sizeof buffer;
  if (codes_get_string(h, key, buffer, &length) != CODES_SUCCESS) return "";
  return buffer;
}

long get_long(codes_handle* h, const char* key, long fallback) {
  long value = 0;
  if (!codes_is_defined(h, key) || codes_get_long(h, key, &value) != CODES_SUCCESS) return fallback;
  return value;
}

double get_double(codes_handle* h, const char* key, double fallback) {
  double value = 0;
  if (!codes_is_defined(h, key) || codes_get_double(h, key, &value) != CODES_SUCCESS) return fallback;
  return value;
}

double need_double(codes_handle* h, const char* key, const std::string& where) {
  double value = 0;
  if (!codes_is_defined(h, key) || codes_get_double(h, key, &value) != CODES_SUCCESS)
    throw InputError(where, key, "this key of the grid definition");
  return value;
}

/// Seconds since 1970-01-01Z of validityDate (YYYYMMDD) and validityTime (hhmm).
long long validity_seconds(codes_handle* h) {
  const long date = get_long(h, "validityDate", 0), time = get_long(h, "validityTime", 0);
  std::tm tm{};
  tm.tm_year = static_cast<int>(date / 10000) - 1900;
  tm.tm_mon = static_cast<int>(date / 100 % 100) - 1;
  tm.tm_mday = static_cast<int>(date % 100);
  tm.tm_hour = static_cast<int>(time / 100);
  tm.tm_min = static_cast<int>(time % 100);
  return static_cast<long long>(timegm(&tm));
}

std::string iso_time(long long seconds) {
  std::time_t t = static_cast<std::time_t>(seconds);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char text[32];
  std::strftime(text, sizeof text, "%Y-%m-%dT%H:%MZ", &tm);
  return text;
}

std::string hpa_text(double pa) {
  char text[32];
  std::snprintf(text, sizeof text, "%g hPa", pa / 100.0);
  return text;
}

/// The grid definition of a message (ecCodes keys; WMO-No. 306 templates 3.0/3.1/3.10/3.20/3.30/3.40).
geo::GribGridDefinition grid_definition(codes_handle* h, const std::string& where) {
  geo::GribGridDefinition g;
  g.grid_type = get_string(h, "gridType");
  const bool projected = g.grid_type == "lambert" || g.grid_type == "polar_stereographic";
  g.ni = get_long(h, projected ? "Nx" : "Ni", -1);
  g.nj = get_long(h, projected ? "Ny" : "Nj", -1);
  static const std::set<std::string> known = {"regular_ll", "regular_gg", "rotated_ll", "lambert",
                                              "polar_stereographic", "mercator"};
  if (!known.count(g.grid_type))
    throw InputError(where, "gridType", "a grid of type regular_ll, regular_gg, rotated_ll, lambert, "
                                        "polar_stereographic or mercator (found '" + g.grid_type + "')");
  g.i_negative = get_long(h, "iScansNegatively", 0) != 0;
  g.j_positive = get_long(h, "jScansPositively", 0) != 0;
  g.j_consecutive = get_long(h, "jPointsAreConsecutive", 0) != 0;
  g.alternate_rows = get_long(h, "alternativeRowScanning", 0) != 0;
  g.lat_first = need_double(h, "latitudeOfFirstGridPointInDegrees", where);
  g.lon_first = need_double(h, "longitudeOfFirstGridPointInDegrees", where);
  if (g.grid_type == "regular_ll" || g.grid_type == "regular_gg" || g.grid_type == "rotated_ll" ||
      g.grid_type == "mercator") {
    g.lat_last = need_double(h, "latitudeOfLastGridPointInDegrees", where);
    g.lon_last = need_double(h, "longitudeOfLastGridPointInDegrees", where);
  }
  if (g.grid_type == "rotated_ll") {
    g.south_pole_lat = need_double(h, "latitudeOfSouthernPoleInDegrees", where);
    g.south_pole_lon = need_double(h, "longitudeOfSouthernPoleInDegrees", where);
    g.rotation_deg = get_double(h, "angleOfRotationInDegrees", 0.0);
  }
  if (g.grid_type == "lambert" || g.grid_type == "polar_stereographic") {
    // LoV: orientation of the grid (GRIB2 template 3.20 names it so, 3.30 LoV)
    g.lov = codes_is_defined(h, "LoVInDegrees") ? need_double(h, "LoVInDegrees", where)
                                                : need_double(h, "orientationOfTheGridInDegrees", where);
    g.dx_m = need_double(h, "DxInMetres", where);
    g.dy_m = need_double(h, "DyInMetres", where);
    g.south_pole = (get_long(h, "projectionCentreFlag", 0) & 128) != 0;
    g.lad = get_double(h, "LaDInDegrees", 60.0);  // GRIB1 polar stereographic: true at 60 degrees
  }
  if (g.grid_type == "lambert") {
    g.latin1 = need_double(h, "Latin1InDegrees", where);
    g.latin2 = need_double(h, "Latin2InDegrees", where);
  }
  if (g.grid_type == "mercator") {
    g.lad = need_double(h, "LaDInDegrees", where);
    g.dx_m = need_double(h, "DiInMetres", where);
    g.dy_m = need_double(h, "DjInMetres", where);
    if (std::fabs(get_double(h, "orientationOfTheGridInDegrees", 0.0)) > 1e-9)
      throw InputError(where, "orientationOfTheGridInDegrees", "a Mercator grid oriented along the meridians (0)");
  }
  // Earth figure: GRIB2 code table 3.2; GRIB1 sphere of 6367470 m or the IAU 1965 spheroid.
  if (get_long(h, "edition", 2) == 1) {
    geo::grib_earth_figure(get_long(h, "earthIsOblate", 0) ? 2 : 0, 0, 0, 0, g.earth_major_m, g.earth_minor_m, where);
  } else {
    auto scaled = [&](const char* factor, const char* value) {
      return get_double(h, value, 0.0) * std::pow(10.0, -get_double(h, factor, 0.0));
    };
    const long shape = get_long(h, "shapeOfTheEarth", 6);
    double major = scaled("scaleFactorOfEarthMajorAxis", "scaledValueOfEarthMajorAxis");
    double minor = scaled("scaleFactorOfEarthMinorAxis", "scaledValueOfEarthMinorAxis");
    if (shape == 3) {  // axes given in km
      major *= 1000.0;
      minor *= 1000.0;
    }
    geo::grib_earth_figure(shape, major, minor,
                           scaled("scaleFactorOfRadiusOfSphericalEarth", "scaledValueOfRadiusOfSphericalEarth"),
                           g.earth_major_m, g.earth_minor_m, where);
  }
  if (g.grid_type == "regular_gg" && g.ni > 0 && g.nj > 0) {  // the Gaussian latitudes, per row (ecCodes)
    const std::size_t n = static_cast<std::size_t>(g.ni * g.nj);
    std::vector<double> lats(n), lons(n), values(n);
    if (codes_grib_get_data(h, lats.data(), lons.data(), values.data()) != CODES_SUCCESS)
      throw InputError(where, "", "decodable latitudes of the Gaussian grid");
    g.row_latitudes.assign(static_cast<std::size_t>(g.nj), 0.0);
    for (std::size_t k = 0; k < n; ++k)
      g.row_latitudes[geo::grib_point_index(g, k) / static_cast<std::size_t>(g.ni)] = lats[k];
  }
  return g;
}

/// One message to stage: where it is and what it holds.
struct Message {
  int file = 0;
  off_t offset = 0;
  int quantity = 0;           // index into quantities()
  double level_pa = 0;        // 0 for surface fields
  long long valid_s = 0;
  long member = 0;
};

std::atomic<int> g_staging_counter{0};

}  // namespace

bool is_grib_file(const std::string& path) {
  FilePtr f(std::fopen(path.c_str(), "rb"));
  if (!f) return false;
  char buffer[4096];
  const std::size_t n = std::fread(buffer, 1, sizeof buffer, f.get());
  if (n >= 4 && (std::memcmp(buffer, "CDF", 3) == 0 || std::memcmp(buffer, "\x89HDF", 4) == 0)) return false;
  for (std::size_t i = 0; i + 4 <= n; ++i)
    if (std::memcmp(buffer + i, "GRIB", 4) == 0) return true;
  return false;
}

GribStaging::GribStaging(const std::vector<std::string>& paths) {
  for (const std::string& p : paths) label_ += (label_.empty() ? "" : ", ") + p;
  const auto& wanted = quantities();

  // 1. Scan every message (keys only; one handle at a time).
  std::vector<Message> messages;
  std::vector<geo::GribGridDefinition> grids;      // per grid found
  std::vector<std::string> grid_keys;              // md5 of each grid section
  std::vector<int> message_grid;                   // per message: index into grids
  std::vector<std::string> grid_file;              // where each grid was first seen
  for (std::size_t f = 0; f < paths.size(); ++f) {
    FilePtr file(std::fopen(paths[f].c_str(), "rb"));
    if (!file) throw InputError(paths[f], "", "a readable GRIB file");
    long count = 0;
    for (;;) {
      int err = 0;
      HandlePtr h(codes_handle_new_from_file(nullptr, file.get(), PRODUCT_GRIB, &err));
      if (!h) {
        if (err != CODES_SUCCESS)
          throw InputError(paths[f], "", std::string("readable GRIB messages (message ") + std::to_string(count + 1) +
                                             ": " + codes_get_error_message(err) + ")");
        break;
      }
      ++count;
      const std::string where = paths[f] + " (message " + std::to_string(count) + ")";
      const long param = get_long(h.get(), "paramId", -1);
      const std::string level_type = get_string(h.get(), "typeOfLevel");
      const bool isobaric = level_type == "isobaricInhPa" || level_type == "isobaricInPa";
      const bool surface = level_type == "surface";
      const bool grib2 = get_long(h.get(), "edition", 2) == 2 && get_long(h.get(), "discipline", -1) == 0;
      const long category = grib2 ? get_long(h.get(), "parameterCategory", -1) : -1;
      const long number = grib2 ? get_long(h.get(), "parameterNumber", -1) : -1;
      int q = -1;
      for (std::size_t i = 0; i < wanted.size() && q < 0; ++i)
        if (wanted[i].surface ? surface : isobaric)
          if (std::find(wanted[i].param_ids.begin(), wanted[i].param_ids.end(), param) != wanted[i].param_ids.end() ||
              (grib2 && wanted[i].grib2_category == category && wanted[i].grib2_number == number))
            q = static_cast<int>(i);
      if (q < 0) continue;
      Message m;
      m.file = static_cast<int>(f);
      codes_get_message_offset(h.get(), &m.offset);
      m.quantity = q;
      if (isobaric) m.level_pa = get_double(h.get(), "level", 0.0) * (level_type == "isobaricInhPa" ? 100.0 : 1.0);
      if (isobaric && !(m.level_pa > 0)) continue;
      m.valid_s = validity_seconds(h.get());
      m.member = get_long(h.get(), "number", 0);
      std::string key = get_string(h.get(), "md5GridSection");
      if (key.empty())  // no digest of the grid section: its defining numbers
        for (const char* k : {"gridType", "Ni", "Nj", "Nx", "Ny", "latitudeOfFirstGridPointInDegrees",
                              "longitudeOfFirstGridPointInDegrees", "latitudeOfLastGridPointInDegrees",
                              "longitudeOfLastGridPointInDegrees", "scanningMode", "DxInMetres", "LoVInDegrees"})
          key += get_string(h.get(), k) + "/";
      auto at = std::find(grid_keys.begin(), grid_keys.end(), key);
      if (at == grid_keys.end()) {
        grids.push_back(grid_definition(h.get(), where));
        grid_keys.push_back(key);
        grid_file.push_back(where);
        message_grid.push_back(static_cast<int>(grids.size() - 1));
      } else {
        message_grid.push_back(static_cast<int>(at - grid_keys.begin()));
      }
      messages.push_back(m);
    }
    if (count == 0) throw InputError(paths[f], "", "at least one GRIB message");
  }

  // 2. What was found: the grid of the temperature, times, members, levels per quantity.
  auto looked_for = [&] {
    std::string text;
    for (const GribQuantity& q : wanted)
      text += (text.empty() ? "" : ", ") + std::string(q.name) +
              (q.param_ids.empty() ? " (GRIB2 0/" + std::to_string(q.grib2_category) + "/" + std::to_string(q.grib2_number)
                                   : " (paramId " + std::to_string(q.param_ids[0])) +
              (q.surface ? ", surface)" : ", isobaric)");
    return text;
  };
  auto first_of = [&](int q) {
    for (std::size_t i = 0; i < messages.size(); ++i)
      if (messages[i].quantity == q) return static_cast<int>(i);
    return -1;
  };
  const int first_t = first_of(0);
  if (first_t < 0)
    throw InputError(label_, "t", "air temperature on isobaric levels (GRIB paramId 130, typeOfLevel isobaricInhPa "
                                  "or isobaricInPa); looked for " + looked_for());
  const int grid_index = message_grid[first_t];
  const geo::GribGridDefinition& grid = grids[grid_index];
  const geo::GribGeometry geometry = geo::grib_geometry(grid, grid_file[grid_index]);
  std::set<long long> time_set;
  std::set<long> member_set;
  for (const Message& m : messages)
    if (m.quantity == 0) {
      time_set.insert(m.valid_s);
      member_set.insert(m.member);
    }
  const std::vector<long long> times(time_set.begin(), time_set.end());
  const std::vector<long> members(member_set.begin(), member_set.end());

  struct Staged {
    std::vector<double> levels_pa;  // sorted, highest pressure first (3-D), empty for surface fields
    bool static_field = false;      // one time only although the input has several: broadcast
    std::map<std::tuple<long long, long, double>, int> at;  // (time, member, level) -> message
    int level_dim = -1, var = -1;
  };
  std::map<int, Staged> staged;  // by quantity
  for (std::size_t i = 0; i < messages.size(); ++i) {
    const Message& m = messages[i];
    if (message_grid[i] != grid_index) {
      if (m.quantity == 0)
        throw InputError(paths[m.file], "t", "every air temperature on one grid (two grids found)");
      continue;  // another grid: not for this analysis
    }
    Staged& s = staged[m.quantity];
    const auto key = std::make_tuple(m.valid_s, m.member, m.level_pa);
    if (!s.at.emplace(key, static_cast<int>(i)).second)
      throw InputError(paths[m.file], wanted[m.quantity].name,
                       "one message per level, validity time and member (two for " +
                           (m.level_pa > 0 ? hpa_text(m.level_pa) + ", " : std::string()) + iso_time(m.valid_s) +
                           ", member " + std::to_string(m.member) + ")");
  }
  for (auto& [q, s] : staged) {
    std::set<double> levels;
    std::set<long long> own_times;
    for (const auto& [key, index] : s.at) {
      if (std::get<2>(key) > 0) levels.insert(std::get<2>(key));
      own_times.insert(std::get<0>(key));
    }
    s.levels_pa.assign(levels.rbegin(), levels.rend());
    s.static_field = wanted[q].surface && own_times.size() == 1 && times.size() > 1;
    // Every (time, member, level) present.
    for (long long t : s.static_field ? std::vector<long long>{*own_times.begin()} : times)
      for (long member : members)
        for (double p : wanted[q].surface ? std::vector<double>{0.0} : s.levels_pa)
          if (!s.at.count(std::make_tuple(t, member, p)))
            throw InputError(label_, wanted[q].name, std::string("a message for every level, validity time and "
                                                                 "member like air temperature (missing: ") +
                                                         (p > 0 ? hpa_text(p) + ", " : std::string()) + iso_time(t) +
                                                         ", member " + std::to_string(member) + ")");
  }

  // 3. The staged NetCDF file: time, [member], pressure levels per level set, y, x.
  namespace fs = std::filesystem;
  staged_ = std::make_unique<ScratchFile>((fs::temp_directory_path() / ("latentlift-grib-" + std::to_string(::getpid()) +
                                                                        "-" + std::to_string(g_staging_counter++) + ".nc"))
                                               .string());
  const std::string& staged_path = staged_->path();
  int ncid = -1;
  check(nc_create(staged_path.c_str(), NC_CLOBBER | NC_64BIT_DATA, &ncid), staged_path, "creating the staged GRIB input");
  struct NcCloser {
    int id;
    ~NcCloser() {
      if (id >= 0) nc_close(id);
    }
  } closer{ncid};
  try {
    const std::string& out = staged_path;
    auto text = [&](int var, const char* name, const std::string& value) {
      check(nc_put_att_text(ncid, var, name, value.size(), value.c_str()), out, name);
    };
    int time_dim = -1, member_dim = -1, y_dim = -1, x_dim = -1, time_var = -1, member_var = -1, y_var = -1, x_var = -1;
    check(nc_def_dim(ncid, "time", times.size(), &time_dim), out, "time");
    check(nc_def_var(ncid, "time", NC_DOUBLE, 1, &time_dim, &time_var), out, "time");
    text(time_var, "units", "seconds since 1970-01-01 00:00:00");
    text(time_var, "calendar", "standard");
    text(time_var, "standard_name", "time");
    text(time_var, "long_name", "validity time");
    text(time_var, "axis", "T");
    if (members.size() > 1) {
      check(nc_def_dim(ncid, "member", members.size(), &member_dim), out, "member");
      check(nc_def_var(ncid, "member", NC_INT, 1, &member_dim, &member_var), out, "member");
      text(member_var, "standard_name", "realization");
      text(member_var, "long_name", "ensemble member (GRIB perturbation number)");
    }
    std::vector<std::vector<double>> level_sets;
    std::vector<int> level_dims, level_vars;
    for (auto& [q, s] : staged) {
      if (s.levels_pa.empty()) continue;
      auto found = std::find(level_sets.begin(), level_sets.end(), s.levels_pa);
      if (found != level_sets.end()) {
        s.level_dim = level_dims[found - level_sets.begin()];
        continue;
      }
      const std::string name = level_sets.empty() ? "plev" : "plev_" + std::to_string(level_sets.size() + 1);
      int dim = -1, var = -1;
      check(nc_def_dim(ncid, name.c_str(), s.levels_pa.size(), &dim), out, name);
      check(nc_def_var(ncid, name.c_str(), NC_DOUBLE, 1, &dim, &var), out, name);
      text(var, "units", "Pa");
      text(var, "standard_name", "air_pressure");
      text(var, "positive", "down");
      text(var, "axis", "Z");
      level_sets.push_back(s.levels_pa);
      level_dims.push_back(dim);
      level_vars.push_back(var);
      s.level_dim = dim;
    }
    check(nc_def_dim(ncid, geometry.y_name.c_str(), geometry.y.size(), &y_dim), out, geometry.y_name);
    check(nc_def_dim(ncid, geometry.x_name.c_str(), geometry.x.size(), &x_dim), out, geometry.x_name);
    check(nc_def_var(ncid, geometry.y_name.c_str(), NC_DOUBLE, 1, &y_dim, &y_var), out, geometry.y_name);
    check(nc_def_var(ncid, geometry.x_name.c_str(), NC_DOUBLE, 1, &x_dim, &x_var), out, geometry.x_name);
    text(y_var, "standard_name", geometry.y_standard_name);
    text(x_var, "standard_name", geometry.x_standard_name);
    text(y_var, "units", geometry.y_units);
    text(x_var, "units", geometry.x_units);
    text(y_var, "axis", "Y");
    text(x_var, "axis", "X");
    const bool with_mapping = true;  // the earth figure of the GRIB grid, also for lat/lon grids
    int crs_var = -1;
    if (with_mapping) {
      check(nc_def_var(ncid, "crs", NC_INT, 0, nullptr, &crs_var), out, "crs");
      for (const geo::Attribute& a : geometry.grid_mapping) {
        if (const auto* s = std::get_if<std::string>(&a.value)) {
          text(crs_var, a.name.c_str(), *s);
        } else {
          const auto& numbers = std::get<std::vector<double>>(a.value);
          check(nc_put_att_double(ncid, crs_var, a.name.c_str(), NC_DOUBLE, numbers.size(), numbers.data()), out,
                a.name);
        }
      }
    }
    for (auto& [q, s] : staged) {
      const GribQuantity& quantity = wanted[q];
      std::vector<int> dims;
      if (!s.static_field) dims.push_back(time_dim);
      if (member_dim >= 0) dims.push_back(member_dim);
      if (s.level_dim >= 0) dims.push_back(s.level_dim);
      dims.push_back(y_dim);
      dims.push_back(x_dim);
      check(nc_def_var(ncid, quantity.name, NC_FLOAT, static_cast<int>(dims.size()), dims.data(), &s.var), out,
            quantity.name);
      const float fill = NC_FILL_FLOAT;
      check(nc_put_att_float(ncid, s.var, "_FillValue", NC_FLOAT, 1, &fill), out, "_FillValue");
      text(s.var, "standard_name", quantity.standard_name);
      text(s.var, "units", quantity.units);
      if (with_mapping) text(s.var, "grid_mapping", "crs");
    }
    text(NC_GLOBAL, "Conventions", "CF-1.8");
    text(NC_GLOBAL, "source", "GRIB messages of " + label_ + " (decoded with ecCodes)");
    check(nc_enddef(ncid), out, "leaving define mode");

    std::vector<double> time_values(times.begin(), times.end());
    check(nc_put_var_double(ncid, time_var, time_values.data()), out, "time");
    if (member_var >= 0) {
      std::vector<int> m(members.begin(), members.end());
      check(nc_put_var_int(ncid, member_var, m.data()), out, "member");
    }
    for (std::size_t i = 0; i < level_sets.size(); ++i)
      check(nc_put_var_double(ncid, level_vars[i], level_sets[i].data()), out, "levels");
    check(nc_put_var_double(ncid, y_var, geometry.y.data()), out, geometry.y_name);
    check(nc_put_var_double(ncid, x_var, geometry.x.data()), out, geometry.x_name);

    // 4. The values, one message at a time, in file order, reordered to rows of the scanning order.
    struct Target {
      int file;
      off_t offset;
      int quantity;
      std::size_t t, m, k;
    };
    std::vector<Target> targets;
    for (auto& [q, s] : staged)
      for (const auto& [key, index] : s.at) {
        const auto& [t, member, p] = key;
        const std::size_t ti = std::find(times.begin(), times.end(), t) - times.begin();
        if (!s.static_field && ti >= times.size()) continue;  // a time without air temperature
        const std::size_t mi = std::find(members.begin(), members.end(), member) - members.begin();
        if (mi >= members.size()) continue;
        const std::size_t ki = p > 0 ? std::find(s.levels_pa.begin(), s.levels_pa.end(), p) - s.levels_pa.begin() : 0;
        targets.push_back({messages[index].file, messages[index].offset, q, s.static_field ? 0 : ti, mi, ki});
      }
    std::sort(targets.begin(), targets.end(),
              [](const Target& a, const Target& b) { return std::tie(a.file, a.offset) < std::tie(b.file, b.offset); });
    const std::size_t n_points = geometry.y.size() * geometry.x.size();
    std::vector<double> values;
    std::vector<float> grid_values(n_points);
    constexpr double kMissing = 1.0e37;  // ecCodes writes this where the bitmap says missing
    FilePtr file;
    int open_file = -1;
    for (const Target& target : targets) {
      if (target.file != open_file) {
        file.reset(std::fopen(paths[target.file].c_str(), "rb"));
        if (!file) throw InputError(paths[target.file], "", "a readable GRIB file");
        open_file = target.file;
      }
      if (fseeko(file.get(), target.offset, SEEK_SET) != 0)
        throw InputError(paths[target.file], "", "a readable GRIB file (seek failed)");
      int err = 0;
      HandlePtr h(codes_handle_new_from_file(nullptr, file.get(), PRODUCT_GRIB, &err));
      if (!h) throw InputError(paths[target.file], wanted[target.quantity].name, "a readable GRIB message");
      codes_set_double(h.get(), "missingValue", kMissing);
      size_t size = 0;
      codes_get_size(h.get(), "values", &size);
      if (size != n_points)
        throw InputError(paths[target.file], wanted[target.quantity].name,
                         std::to_string(n_points) + " values like the grid of air temperature (found " +
                             std::to_string(size) + ")");
      values.resize(size);
      err = codes_get_double_array(h.get(), "values", values.data(), &size);
      if (err != CODES_SUCCESS)
        throw InputError(paths[target.file], wanted[target.quantity].name,
                         std::string("decodable values (") + codes_get_error_message(err) + ")");
      for (std::size_t k = 0; k < size; ++k)
        grid_values[geo::grib_point_index(grid, k)] =
            values[k] >= 0.5 * kMissing ? NC_FILL_FLOAT : static_cast<float>(values[k]);
      const Staged& s = staged[target.quantity];
      std::vector<size_t> start, count;
      if (!s.static_field) start.push_back(target.t), count.push_back(1);
      if (member_dim >= 0) start.push_back(target.m), count.push_back(1);
      if (s.level_dim >= 0) start.push_back(target.k), count.push_back(1);
      start.push_back(0), count.push_back(geometry.y.size());
      start.push_back(0), count.push_back(geometry.x.size());
      check(nc_put_vara_float(ncid, s.var, start.data(), count.data(), grid_values.data()), out, "staging values");
    }
    closer.id = -1;
    check(nc_close(ncid), out, "closing the staged GRIB input");
  } catch (...) {
    if (closer.id >= 0) nc_close(closer.id);
    closer.id = -1;
    staged_.reset();
    throw;
  }
}

GribStaging::~GribStaging() = default;

const std::string& GribStaging::path() const { return staged_->path(); }

}  // namespace latentlift::io::detail
