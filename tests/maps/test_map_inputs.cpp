// Inputs of quicklook and reproject are validated like model inputs (src/maps/source_grid.cpp):
// a class field carries only its flag_values, infinite values are refused, latitudes stay within
// -90..90, dimensions have cells, packing attributes are well formed. Each exits 2 naming the file.
#include <gtest/gtest.h>

#include <limits>
#include <string>

#include "io/nc_builder.hpp"
#include "support/test_support.hpp"

namespace latentlift::test {
namespace {

/// A small lat/lon map file: 3 x 4 cells, a class field (flag_values 0, 1, 2) and a real field.
struct MapFile {
  Dims dims = {{"lat", 3}, {"lon", 4}};
  std::vector<double> lat = {10, 11, 12}, lon = {20, 21, 22, 23};
  std::vector<double> classes = {0, 1, 2, 0, 1, 2, 0, 1, 2, 0, 1, 2};
  std::vector<double> cape = {0, 10, 20, 30, 40, 50, 60, 70, 80, 90, 100, 110};
  std::vector<Att> cape_atts = {{"units", "J kg-1"}};
  void write(const std::string& path) const {
    write_nc(path, dims,
             {{"lat", NC_DOUBLE, {"lat"}, {{"units", "degrees_north"}, {"standard_name", "latitude"}}, lat},
              {"lon", NC_DOUBLE, {"lon"}, {{"units", "degrees_east"}, {"standard_name", "longitude"}}, lon},
              {"latent_class", NC_BYTE, {"lat", "lon"},
               {{"flag_values", "", {0, 1, 2}, NC_BYTE}, {"flag_meanings", "none pseudo_latent real_latent"}},
               classes},
              {"mu_cape", NC_DOUBLE, {"lat", "lon"}, cape_atts, cape}});  // double: netCDF stores inf as is
  }
};

CommandResult quicklook(const std::string& dir, const MapFile& map, const std::string& field) {
  map.write(dir + "/in.nc");
  return run_command(binary() + " quicklook '" + dir + "/in.nc' --field " + field + " -o '" + dir + "/map.png'");
}

CommandResult reproject(const std::string& dir, const MapFile& map) {  // every field of the file
  map.write(dir + "/in.nc");
  return run_command(binary() + " reproject '" + dir + "/in.nc' -o '" + dir + "/map.nc' --crs EPSG:4326 --resolution 1");
}

std::string scratch() { return scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name()); }

TEST(MapInputs, QuicklookRefusesAClassValueOutsideTheFlagValues) {
  MapFile map;
  map.classes[5] = 77;
  CommandResult r = quicklook(scratch(), map, "latent_class");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("in.nc: variable 'latent_class': only its flag_values or the fill value (found 77)"), std::string::npos)
      << r.output;
}

TEST(MapInputs, ReprojectRefusesAClassValueOutsideTheFlagValues) {
  MapFile map;
  map.classes[5] = 77;
  CommandResult r = reproject(scratch(), map);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("(found 77)"), std::string::npos) << r.output;
}

TEST(MapInputs, QuicklookNeverDrawsInfiniteValues) {
  MapFile map;
  map.cape[3] = std::numeric_limits<double>::infinity();
  CommandResult r = quicklook(scratch(), map, "mu_cape");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("variable 'mu_cape': finite values or the fill value (found infinite values)"), std::string::npos)
      << r.output;
}

TEST(MapInputs, LatitudesBeyondNinetyDegreesAreRefused) {
  MapFile map;
  map.lat = {110, 200, 290};
  CommandResult r = quicklook(scratch(), map, "mu_cape");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("variable 'lat': latitude in 'degrees_north' ranges from 110 to 290"), std::string::npos) << r.output;
}

TEST(MapInputs, AZeroLengthDimensionIsRefusedBeforeAnythingIsDrawn) {
  MapFile map;
  map.dims = {{"lat", 3}, {"lon", 0}};
  map.lon.clear();
  map.classes.clear();
  map.cape.clear();
  CommandResult r = quicklook(scratch(), map, "mu_cape");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("dimension 'lon' has length 0"), std::string::npos) << r.output;
}

TEST(MapInputs, ATwoElementScaleFactorIsRefused) {
  MapFile map;
  map.cape_atts.push_back({"scale_factor", "", {1.0, 2.0}, NC_FLOAT});
  CommandResult r = quicklook(scratch(), map, "mu_cape");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("attribute scale_factor: expected one finite, non-zero number, found 2 values"), std::string::npos)
      << r.output;
}

}  // namespace
}  // namespace latentlift::test
