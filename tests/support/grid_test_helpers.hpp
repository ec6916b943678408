// Helpers of the grid tests (geo, io, maps): test grids written by make_cf_grid.py, reading fields back, gdalinfo.
#pragma once

#include <gtest/gtest.h>

#include <cmath>
#include <sstream>
#include <string>
#include <vector>

#include "io/netcdf_file.hpp"
#include "support/test_support.hpp"

namespace latentlift::test {

/// Writes a grid laid out like an analyze output (tests/support/make_cf_grid.py) and returns its path.
inline std::string make_cf_grid(const std::string& dir, const std::string& mapping, const std::string& extra = "") {
  std::string path = dir + "/" + mapping + ".nc";
  auto result = run_command(python() + " " + test_dir() + "/support/make_cf_grid.py --mapping " + mapping +
                            " --out " + path + " " + extra);
  if (result.exit_code != 0) throw std::runtime_error("make_cf_grid.py failed: " + result.output);
  return path;
}

/// Whitespace-separated numbers of a text.
inline std::vector<double> numbers_of(const std::string& text) {
  std::istringstream in(text);
  std::vector<double> out;
  std::string token;
  while (in >> token) {
    try {
      std::size_t used = 0;
      double value = std::stod(token, &used);
      if (used == token.size()) out.push_back(value);
    } catch (...) {
    }
  }
  return out;
}

/// A field as stored ([time][y][x]) with its 1-D coordinates and _FillValue.
struct Field {
  std::vector<double> x, y, values;  // values [time][y][x] as stored
  double fill = 0;
};

inline Field read_field(const std::string& path, const std::string& name, const std::string& xname,
                        const std::string& yname) {
  auto file = io::detail::NcFile::open_read(path);
  Field f;
  f.x = io::detail::read_doubles(file, *io::detail::find_variable(file, xname));
  f.y = io::detail::read_doubles(file, *io::detail::find_variable(file, yname));
  auto var = *io::detail::find_variable(file, name);
  f.values = io::detail::read_doubles(file, var);
  auto fill = io::detail::number_attribute(file, var.id, "_FillValue");
  f.fill = fill ? fill->front() : std::nan("");
  return f;
}

// gdalinfo -json of one variable: size, geotransform and whether the CRS WKT contains `crs_text`
// (double quotes in crs_text escaped for the shell).
struct GdalInfo {
  std::vector<double> numbers;  // width height gt0..gt5 has_crs
};
inline GdalInfo gdal_info(const std::string& path, const std::string& variable, const std::string& crs_text) {
  auto result = run_command("gdalinfo -json NETCDF:" + path + ":" + variable + " | " + python() + " -c \"" +
                            "import json,sys; d=json.load(sys.stdin); print(*d['size'], *d['geoTransform'], int('" +
                            crs_text + "' in d['coordinateSystem']['wkt']))\"");
  EXPECT_EQ(result.exit_code, 0) << result.output;
  return {numbers_of(result.output)};
}


}  // namespace latentlift::test
