// Helpers of the end-to-end CLI tests: generate inputs with make_shapes.py, read NetCDF
// output with netCDF-C, and run the column kernel on the columns a shape encodes.
#pragma once

#include <netcdf.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <stdexcept>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "latentlift/column.hpp"
#include "support/test_support.hpp"

namespace latentlift::test::cli {

inline void check_nc(int status, const std::string& what) {
  if (status != NC_NOERR) throw std::runtime_error(what + ": " + nc_strerror(status));
}

/// Owns an open NetCDF file (read-only).
class NcFile {
 public:
  explicit NcFile(const std::string& path) : path_(path) { check_nc(nc_open(path.c_str(), NC_NOWRITE, &id_), "open " + path); }
  ~NcFile() { nc_close(id_); }
  NcFile(const NcFile&) = delete;
  NcFile& operator=(const NcFile&) = delete;
  int id() const { return id_; }
  const std::string& path() const { return path_; }

  bool has_var(const std::string& name) const {
    int v;
    return nc_inq_varid(id_, name.c_str(), &v) == NC_NOERR;
  }
  int var(const std::string& name) const {
    int v;
    check_nc(nc_inq_varid(id_, name.c_str(), &v), path_ + ": variable " + name);
    return v;
  }
  std::vector<std::string> var_names() const {
    int n;
    check_nc(nc_inq_nvars(id_, &n), "nvars");
    std::vector<std::string> names;
    for (int v = 0; v < n; ++v) {
      char buf[NC_MAX_NAME + 1];
      check_nc(nc_inq_varname(id_, v, buf), "varname");
      names.emplace_back(buf);
    }
    return names;
  }
  std::string text_att(const std::string& var_name, const std::string& att) const {
    int v = var_name.empty() ? NC_GLOBAL : var(var_name);
    size_t len;
    if (nc_inq_attlen(id_, v, att.c_str(), &len) != NC_NOERR) return "";
    std::string s(len, '\0');
    check_nc(nc_get_att_text(id_, v, att.c_str(), s.data()), "att " + att);
    return s;
  }
  bool double_att(const std::string& var_name, const std::string& att, double& value) const {
    int v = var_name.empty() ? NC_GLOBAL : var(var_name);
    return nc_get_att_double(id_, v, att.c_str(), &value) == NC_NOERR;
  }

 private:
  std::string path_;
  int id_ = -1;
};

/// A variable read as doubles, unpacked, with its dimensions; missing values are NaN.
struct Field {
  std::vector<std::string> dims;
  std::vector<size_t> lens;
  std::vector<double> values;
  size_t size() const { return values.size(); }
  /// Flat index from a per-dimension index (row-major in the variable's own order).
  size_t flat(const std::vector<size_t>& index) const {
    size_t k = 0;
    for (size_t d = 0; d < lens.size(); ++d) k = k * lens[d] + index[d];
    return k;
  }
};

inline Field read_field(const NcFile& f, const std::string& name) {
  int v = f.var(name);
  int ndims;
  check_nc(nc_inq_varndims(f.id(), v, &ndims), "ndims");
  std::vector<int> dimids(ndims);
  check_nc(nc_inq_vardimid(f.id(), v, dimids.data()), "dimids");
  Field out;
  size_t total = 1;
  for (int d : dimids) {
    char buf[NC_MAX_NAME + 1];
    size_t len;
    check_nc(nc_inq_dim(f.id(), d, buf, &len), "dim");
    out.dims.emplace_back(buf);
    out.lens.push_back(len);
    total *= len;
  }
  out.values.resize(total);
  check_nc(nc_get_var_double(f.id(), v, out.values.data()), f.path() + ": read " + name);
  double fill, missing, scale = 1.0, offset = 0.0;
  bool has_fill = f.double_att(name, "_FillValue", fill);
  bool has_missing = f.double_att(name, "missing_value", missing);
  f.double_att(name, "scale_factor", scale);
  f.double_att(name, "add_offset", offset);
  for (double& x : out.values) {
    if ((has_fill && x == fill) || (has_missing && x == missing)) x = std::nan("");
    else x = x * scale + offset;
  }
  return out;
}

/// The raw bytes of a variable as stored.
inline std::vector<unsigned char> read_raw(const NcFile& f, const std::string& name) {
  int v = f.var(name);
  nc_type type;
  int ndims;
  check_nc(nc_inq_var(f.id(), v, nullptr, &type, &ndims, nullptr, nullptr), "inq_var");
  std::vector<int> dimids(ndims);
  check_nc(nc_inq_vardimid(f.id(), v, dimids.data()), "dimids");
  size_t total = 1, type_size;
  for (int d : dimids) {
    size_t len;
    check_nc(nc_inq_dimlen(f.id(), d, &len), "dimlen");
    total *= len;
  }
  check_nc(nc_inq_type(f.id(), type, nullptr, &type_size), "type size");
  std::vector<unsigned char> bytes(total * type_size);
  if (total > 0) check_nc(nc_get_var(f.id(), v, bytes.data()), "read raw " + name);
  return bytes;
}

/// The columns of one shape as the kernel must see them (expected_<shape>.nc of make_shapes.py).
struct ExpectedColumns {
  int n_columns = 0, n_levels = 0;
  HumidityKind kind = HumidityKind::specific_humidity;
  std::vector<double> pressure_pa, temp_k, humidity, height_m, surface_pressure_pa;
  std::vector<std::string> index_dims;            // e.g. time, lat, lon
  std::vector<std::vector<int>> index;            // [dim][column]

  ColumnInput column(int c) const {
    ColumnInput in;
    in.n_levels = n_levels;
    in.pressure_pa = pressure_pa.data();
    in.temp_k = temp_k.data() + static_cast<size_t>(c) * n_levels;
    in.humidity = humidity.data() + static_cast<size_t>(c) * n_levels;
    in.humidity_kind = kind;
    in.height_m = height_m.data() + static_cast<size_t>(c) * n_levels;
    in.surface_pressure_pa = surface_pressure_pa[c];
    return in;
  }
  /// Where column c sits in an output field, by the field's own dimension names.
  size_t where(const Field& field, int c) const {
    std::vector<size_t> idx;
    for (size_t d = 0; d < field.dims.size(); ++d) {
      auto it = std::find(index_dims.begin(), index_dims.end(), field.dims[d]);
      if (it != index_dims.end()) idx.push_back(index[it - index_dims.begin()][c]);
      else if (field.lens[d] == 1) idx.push_back(0);
      else throw std::runtime_error("output dimension '" + field.dims[d] + "' is not one of the input's");
    }
    return field.flat(idx);
  }
};

inline ExpectedColumns read_expected(const std::string& path) {
  NcFile f(path);
  ExpectedColumns e;
  std::string kind = f.text_att("", "humidity_kind");
  if (kind == "relative_humidity") e.kind = HumidityKind::relative_humidity;
  else if (kind == "dew_point") e.kind = HumidityKind::dew_point;
  else if (kind == "mixing_ratio") e.kind = HumidityKind::mixing_ratio;
  Field p = read_field(f, "pressure_pa"), t = read_field(f, "temp_k"), h = read_field(f, "humidity"),
        z = read_field(f, "height_m"), sp = read_field(f, "surface_pressure_pa");
  e.n_columns = static_cast<int>(t.lens[0]);
  e.n_levels = static_cast<int>(t.lens[1]);
  e.pressure_pa = p.values;
  e.temp_k = t.values;
  e.humidity = h.values;
  e.height_m = z.values;
  e.surface_pressure_pa = sp.values;
  for (const char* d : {"time", "lat", "lon", "y", "x", "cell"}) {
    std::string name = std::string("index_") + d;
    if (!f.has_var(name)) continue;
    Field ix = read_field(f, name);
    e.index_dims.emplace_back(d);
    e.index.emplace_back(ix.values.begin(), ix.values.end());
  }
  return e;
}

/// A fresh folder for the running test, named after it.
inline std::string test_scratch() {
  const auto* info = ::testing::UnitTest::GetInstance()->current_test_info();
  return scratch_dir(std::string("cli_") + info->test_suite_name() + "_" + info->name());
}

/// Write the named inputs of make_shapes.py (shape names and/or "errors") into dir.
inline void make_shapes(const std::string& dir, const std::string& names) {
  std::string cmd = python() + " " + test_dir() + "/cli/make_shapes.py " + dir + " " + names;
  CommandResult r = run_command(cmd);
  if (r.exit_code != 0) throw std::runtime_error("make_shapes.py failed: " + r.output);
}

inline std::string quote(const std::string& s) { return "'" + s + "'"; }

/// Files in a folder (names only).
inline std::vector<std::string> files_in(const std::string& dir) {
  std::vector<std::string> names;
  for (const auto& entry : std::filesystem::directory_iterator(dir)) names.push_back(entry.path().filename().string());
  std::sort(names.begin(), names.end());
  return names;
}

inline bool contains_nocase(std::string text, std::string word) {
  auto lower = [](std::string s) {
    std::transform(s.begin(), s.end(), s.begin(), [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
    return s;
  };
  return lower(std::move(text)).find(lower(std::move(word))) != std::string::npos;
}

}  // namespace latentlift::test::cli
