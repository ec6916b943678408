// Test helper: write small NetCDF files with netCDF-C (dimensions, variables, attributes, data).
#pragma once

#include <netcdf.h>

#include <functional>
#include <map>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

namespace latentlift::test {

struct Att {
  Att(std::string n, std::string t) : name(std::move(n)), text(std::move(t)) {}
  Att(std::string n, std::string t, std::vector<double> values, nc_type value_type = NC_NAT)
      : name(std::move(n)), text(std::move(t)), numbers(std::move(values)), type(value_type) {}
  std::string name;
  std::string text;             // used when numbers is empty
  std::vector<double> numbers;  // written with `type` (NC_NAT: the variable's type)
  nc_type type = NC_NAT;
};

struct Var {
  Var(std::string n, nc_type t, std::vector<std::string> d, std::vector<Att> a, std::vector<double> values = {})
      : name(std::move(n)), type(t), dims(std::move(d)), atts(std::move(a)), data(std::move(values)) {}
  std::string name;
  nc_type type = NC_FLOAT;
  std::vector<std::string> dims;
  std::vector<Att> atts;
  std::vector<double> data;     // in the variable's dimension order (empty: leave unwritten)
  std::vector<size_t> chunks;   // NetCDF-4 chunk sizes (empty: library default)
  int deflate_level = 0;        // NetCDF-4 deflate level (0: none)
  bool shuffle = true;          // with deflate_level > 0: the shuffle filter too
  bool fletcher32 = false;      // NetCDF-4 Fletcher-32 checksums
};

using Dims = std::vector<std::pair<std::string, std::size_t>>;
using Index = std::map<std::string, std::size_t>;

inline void nc_ok(int status, const std::string& what) {
  if (status != NC_NOERR) throw std::runtime_error(what + ": " + nc_strerror(status));
}

/// Values of f over every index of dims (row-major in the given order).
inline std::vector<double> fill(const Dims& all, const std::vector<std::string>& dims,
                                std::function<double(const Index&)> f) {
  std::vector<std::size_t> lengths;
  for (const std::string& name : dims)
    for (const auto& [n, l] : all)
      if (n == name) lengths.push_back(l);
  std::size_t total = 1;
  for (std::size_t l : lengths) total *= l;
  std::vector<double> out(total);
  Index index;
  for (std::size_t k = 0; k < total; ++k) {
    std::size_t rest = k;
    for (std::size_t d = dims.size(); d-- > 0;) {
      index[dims[d]] = rest % lengths[d];
      rest /= lengths[d];
    }
    out[k] = f(index);
  }
  return out;
}

inline void write_nc(const std::string& path, const Dims& dims, const std::vector<Var>& vars,
                     int mode = NC_CLOBBER | NC_NETCDF4, const std::vector<Att>& global = {}) {
  int ncid = -1;
  nc_ok(nc_create(path.c_str(), mode, &ncid), "create " + path);
  std::map<std::string, int> dim_id;
  for (const auto& [name, length] : dims) {
    int id = -1;
    nc_ok(nc_def_dim(ncid, name.c_str(), length, &id), "dim " + name);
    dim_id[name] = id;
  }
  std::vector<int> var_ids;
  for (const Var& v : vars) {
    std::vector<int> ids;
    for (const std::string& d : v.dims) ids.push_back(dim_id.at(d));
    int id = -1;
    nc_ok(nc_def_var(ncid, v.name.c_str(), v.type, static_cast<int>(ids.size()), ids.data(), &id), "var " + v.name);
    if (!v.chunks.empty()) nc_ok(nc_def_var_chunking(ncid, id, NC_CHUNKED, v.chunks.data()), "chunking " + v.name);
    if (v.deflate_level > 0)
      nc_ok(nc_def_var_deflate(ncid, id, v.shuffle ? 1 : 0, 1, v.deflate_level), "deflate " + v.name);
    if (v.fletcher32) nc_ok(nc_def_var_fletcher32(ncid, id, NC_FLETCHER32), "fletcher32 " + v.name);
    for (const Att& a : v.atts) {
      if (a.numbers.empty())
        nc_ok(nc_put_att_text(ncid, id, a.name.c_str(), a.text.size(), a.text.c_str()), "att " + a.name);
      else
        nc_ok(nc_put_att_double(ncid, id, a.name.c_str(), a.type == NC_NAT ? v.type : a.type, a.numbers.size(), a.numbers.data()), "att " + a.name);
    }
    var_ids.push_back(id);
  }
  for (const Att& a : global)
    nc_ok(nc_put_att_text(ncid, NC_GLOBAL, a.name.c_str(), a.text.size(), a.text.c_str()), "global " + a.name);
  nc_ok(nc_enddef(ncid), "enddef");
  for (std::size_t i = 0; i < vars.size(); ++i)
    if (!vars[i].data.empty()) nc_ok(nc_put_var_double(ncid, var_ids[i], vars[i].data.data()), "put " + vars[i].name);
  nc_ok(nc_close(ncid), "close");
}

/// A small regular lat/lon grid on pressure levels: time 2, level 4 (hPa), lat 3, lon 4.
/// Temperature (K), specific humidity (kg/kg) and geopotential height (m) follow simple
/// formulas of the indices (below), so tests can predict every value.
struct SmallGrid {
  Dims dims = {{"time", 2}, {"level", 4}, {"lat", 3}, {"lon", 4}};
  std::vector<double> levels_hpa = {1000, 850, 700, 500};
  static double temp_k(const Index& i) { return 295.0 - 10.0 * i.at("level") + i.at("lat") + 0.1 * i.at("lon") + 0.5 * i.at("time"); }
  static double q(const Index& i) { return 0.012 - 0.003 * i.at("level") + 0.0001 * i.at("lon"); }
  static double z_m(const Index& i) { return 100.0 + 1400.0 * i.at("level") + 3.0 * i.at("lat") + i.at("lon"); }
  /// Heights that agree with temp_k by the hypsometric equation within a few per cent (for inputs
  /// that must pass the plausibility checks): 1000 hPa at 100 m, then layer thicknesses
  /// Rd/g T ln(p1/p2) at about the layers' mean temperatures (Rd = 287.04 J kg-1 K-1, Bolton 1980;
  /// g = 9.80665 m s-2): 1380, 1590 and 2650 m.
  static double hypsometric_z_m(const Index& i) {
    static const double z[] = {100.0, 1480.0, 3070.0, 5720.0};
    return z[i.at("level")] + i.at("lat") + 0.1 * i.at("lon");
  }

  std::vector<Var> coordinates(const std::string& level_units = "hPa") const {
    return {
        {"time", NC_DOUBLE, {"time"}, {{"units", "hours since 2030-01-01 00:00:00"}, {"standard_name", "time"}}, {0, 6}},
        {"level", NC_DOUBLE, {"level"}, {{"units", level_units}}, levels_hpa},
        {"lat", NC_DOUBLE, {"lat"}, {{"units", "degrees_north"}, {"standard_name", "latitude"}}, {10, 11, 12}},
        {"lon", NC_DOUBLE, {"lon"}, {{"units", "degrees_east"}, {"standard_name", "longitude"}}, {20, 21, 22, 23}},
    };
  }
  Var var(const std::string& name, const std::string& standard_name, const std::string& units,
          std::function<double(const Index&)> f, std::vector<std::string> order = {"time", "level", "lat", "lon"}) const {
    Var v{name, NC_FLOAT, order, {{"units", units}}, fill(dims, order, f)};
    if (!standard_name.empty()) v.atts.push_back({"standard_name", standard_name, {}});
    return v;
  }
  std::vector<Var> standard() const {
    std::vector<Var> vars = coordinates();
    vars.push_back(var("temp", "air_temperature", "K", temp_k));
    vars.push_back(var("hum", "specific_humidity", "kg kg-1", q));
    vars.push_back(var("height", "geopotential_height", "m", z_m));
    return vars;
  }
};

}  // namespace latentlift::test
