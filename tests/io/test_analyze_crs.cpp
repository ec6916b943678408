// GIS view of analyze outputs: the grid mapping completed by the writer hook, read by GDAL;
// GDAL's location queries agree with latentlift's column command; bad mappings are refused.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <string>

#include "io/netcdf_crs.hpp"
#include "io/netcdf_file.hpp"
#include "support/grid_test_helpers.hpp"
#include "latentlift/crs.hpp"

namespace latentlift::test {
namespace {

namespace fs = std::filesystem;
using io::detail::NcFile;

std::string sample_grid() { return test_dir() + "/../sample_grids/vessaline_coast_lcc.nc"; }

TEST(AnalyzeOutputCrs, OpensInGdalWithTheModelCrsAndGrid) {
  std::string sample = sample_grid();
  if (!fs::exists(sample)) GTEST_SKIP() << "no sample grid";
  std::string dir = scratch_dir("gis_analyze_gdal");
  std::string out = dir + "/out.nc";
  auto analyze = run_command(binary() + " analyze " + sample + " -o " + out + " --quiet");
  ASSERT_EQ(analyze.exit_code, 0) << analyze.output;
  Field f = read_field(out, "mu_cape", "x", "y");
  GdalInfo info = gdal_info(out, "mu_cape", "Lambert Conic Conformal (2SP)");
  ASSERT_EQ(info.numbers.size(), 9u);
  double dx = f.x[1] - f.x[0], dy = std::fabs(f.y[1] - f.y[0]);
  EXPECT_EQ(info.numbers[0], f.x.size());
  EXPECT_EQ(info.numbers[1], f.y.size());
  EXPECT_NEAR(info.numbers[2], f.x.front() - dx / 2, 1e-6);
  EXPECT_NEAR(info.numbers[3], dx, 1e-9);
  EXPECT_NEAR(info.numbers[5], std::max(f.y.front(), f.y.back()) + dy / 2, 1e-6);
  EXPECT_NEAR(info.numbers[7], -dy, 1e-9);
  EXPECT_EQ(info.numbers[8], 1) << "CRS is not the model's Lambert conformal conic";
}

TEST(AnalyzeOutputCrs, GdallocationinfoMatchesTheColumnCommand) {
  std::string sample = sample_grid();
  if (!fs::exists(sample)) GTEST_SKIP() << "no sample grid";
  std::string dir = scratch_dir("gis_analyze_column");
  std::string out = dir + "/out.nc";
  auto analyze = run_command(binary() + " analyze " + sample + " -o " + out + " --quiet");
  ASSERT_EQ(analyze.exit_code, 0) << analyze.output;
  NcFile file = NcFile::open_read(out);
  auto mapping_var = io::detail::text_attribute(file, io::detail::find_variable(file, "mu_cape")->id, "grid_mapping");
  auto mapping = io::detail::read_attributes(file, io::detail::find_variable(file, *mapping_var)->id);
  Field f = read_field(out, "mu_cape", "x", "y");
  int compared = 0;
  for (auto [i, j] : {std::pair{20, 15}, {40, 33}, {61, 50}, {70, 10}}) {
    // Cell centre in lat/lon (the model's sphere; -wgs84 passes lat/lon through unchanged).
    auto ll = geo::latlon_of_projected(mapping, {f.x[i]}, {f.y[j]});
    char where[96];
    std::snprintf(where, sizeof where, "%.9f %.9f", ll.longitude_deg[0], ll.latitude_deg[0]);
    auto gdal = run_command("gdallocationinfo -valonly -wgs84 NETCDF:" + out + ":mu_cape " + where);
    ASSERT_EQ(gdal.exit_code, 0) << gdal.output;
    std::snprintf(where, sizeof where, "--lat %.9f --lon %.9f", ll.latitude_deg[0], ll.longitude_deg[0]);
    auto column = run_command(binary() + " column " + sample + " " + where + " --format json");
    ASSERT_EQ(column.exit_code, 0) << column.output;
    auto key = column.output.find("\"mu_cape\":");
    ASSERT_NE(key, std::string::npos) << column.output;
    std::string text = column.output.substr(key + 10, column.output.find_first_of(",\n", key) - key - 10);
    double stored = f.values[j * f.x.size() + i];
    if (text.find("null") != std::string::npos) {
      EXPECT_EQ(stored, f.fill);
      continue;
    }
    EXPECT_FLOAT_EQ(std::stod(gdal.output), stored) << "GDAL located another cell than " << i << "," << j;
    EXPECT_NEAR(std::stod(gdal.output), std::stod(text), 0.006) << "cell " << i << "," << j;  // column prints 2 decimals
    ++compared;
  }
  EXPECT_GE(compared, 2);
}

TEST(AnalyzeOutputCrs, UnknownGridMappingIsRefusedWithExitCode2AndNoOutput) {
  if (!fs::exists(sample_grid())) GTEST_SKIP() << "no sample grid";
  std::string dir = scratch_dir("gis_analyze_bad_mapping");
  std::string bad = dir + "/bad.nc";
  fs::copy_file(sample_grid(), bad);
  auto edit = run_command(python() + " -c \"import netCDF4; d = netCDF4.Dataset('" + bad +
                          "', 'a'); d['lambert_conformal'].grid_mapping_name = 'lambert_conformal'; d.close()\"");
  ASSERT_EQ(edit.exit_code, 0) << edit.output;
  auto analyze = run_command(binary() + " analyze " + bad + " -o " + dir + "/out.nc --quiet");
  EXPECT_EQ(analyze.exit_code, 2) << analyze.output;
  EXPECT_NE(analyze.output.find("grid_mapping_name"), std::string::npos) << analyze.output;
  EXPECT_FALSE(fs::exists(dir + "/out.nc"));
}

TEST(AnalyzeOutputCrs, LatLonAddedToAProjectedGridAgreeWithProjAndKeepGdalOnTheGrid) {
  // The writer helpers for projected inputs without 2-D lat/lon: the variables hold PROJ's lat/lon of
  // each cell centre, and GDAL still reads the file on its projected grid (not as geolocation arrays).
  std::string dir = scratch_dir("gis_latlon_added");
  std::string in = make_cf_grid(dir, "polar_stereographic");
  std::string out = dir + "/with_latlon.nc";
  fs::copy_file(in, out);
  int ncid = -1, varid = -1;
  ASSERT_EQ(nc_open(out.c_str(), NC_WRITE, &ncid), NC_NOERR);
  ASSERT_EQ(nc_redef(ncid), NC_NOERR);
  auto ids = io::detail::define_latlon_variables(ncid, "y", "x", out);
  ASSERT_EQ(nc_inq_varid(ncid, "mu_cape", &varid), NC_NOERR);
  ASSERT_EQ(nc_put_att_text(ncid, varid, "coordinates", 7, "lat lon"), NC_NOERR);
  ASSERT_EQ(nc_enddef(ncid), NC_NOERR);
  io::detail::write_latlon_variables(ncid, "x", "y", "crs", ncid, ids, out);
  ASSERT_EQ(nc_close(ncid), NC_NOERR);

  Field f = read_field(out, "mu_cape", "x", "y");
  Field lat = read_field(out, "lat", "x", "y"), lon = read_field(out, "lon", "x", "y");
  auto file = NcFile::open_read(out);
  auto expected = geo::latlon_of_projected(
      io::detail::read_attributes(file, io::detail::find_variable(file, "crs")->id), f.x, f.y);
  for (std::size_t k = 0; k < expected.latitude_deg.size(); ++k) {
    EXPECT_DOUBLE_EQ(lat.values[k], expected.latitude_deg[k]);
    EXPECT_DOUBLE_EQ(lon.values[k], expected.longitude_deg[k]);
  }
  GdalInfo info = gdal_info(out, "mu_cape", "Polar Stereographic");
  ASSERT_EQ(info.numbers.size(), 9u);
  EXPECT_NEAR(info.numbers[2], f.x.front() - (f.x[1] - f.x[0]) / 2, 1e-6);
  EXPECT_EQ(info.numbers[8], 1);
}

}  // namespace
}  // namespace latentlift::test
