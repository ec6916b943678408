// CF grid mappings -> PROJ CRSs. Reference: GDAL's own reading of the same CF
// attributes (gdalsrsinfo) and PROJ's cs2cs, both independent of latentlift's translation.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <string>

#include "io/netcdf_crs.hpp"
#include "io/netcdf_file.hpp"
#include "support/grid_test_helpers.hpp"
#include "latentlift/crs.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::test {
namespace {

using geo::AttributeList;
using geo::Crs;

constexpr double kPi = 3.14159265358979323846;
constexpr double kMetresPerDegree = 6371000.0 * kPi / 180.0;  // for comparing positions in metres

struct NativeGrid {
  AttributeList mapping;
  std::vector<double> x, y;
};

NativeGrid read_native_grid(const std::string& path, const std::string& xname, const std::string& yname) {
  auto file = io::detail::NcFile::open_read(path);
  NativeGrid grid;
  grid.mapping = io::detail::read_attributes(file, io::detail::find_variable(file, "crs")->id);
  grid.x = io::detail::read_doubles(file, *io::detail::find_variable(file, xname));
  grid.y = io::detail::read_doubles(file, *io::detail::find_variable(file, yname));
  return grid;
}

// The lon/lat CRS on the same figure as a PROJ string (the +R/+a/+rf/+ellps/+datum/+pm tokens).
std::string geographic_of(const std::string& proj) {
  std::istringstream in(proj);
  std::string token, out = "+proj=longlat";
  while (in >> token)
    for (const char* key : {"+R=", "+a=", "+b=", "+rf=", "+ellps=", "+datum=", "+pm="})
      if (token.rfind(key, 0) == 0) out += " " + token;
  return out + " +no_defs";
}

// Every 5th grid point: latentlift's lat/lon vs cs2cs's with GDAL's reading of the mapping.
void expect_latlon_agrees_with_cs2cs(const std::string& mapping, const std::string& xname,
                                     const std::string& yname, const std::string& extra = "") {
  std::string dir = scratch_dir(std::string("gis_crs_") + ::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string path = make_cf_grid(dir, mapping, extra);
  NativeGrid grid = read_native_grid(path, xname, yname);
  geo::LatLonGrid ours = geo::latlon_of_projected(grid.mapping, grid.x, grid.y, path, "crs");

  auto srs = run_command("gdalsrsinfo -o proj4 NETCDF:" + path + ":mu_cape");
  ASSERT_EQ(srs.exit_code, 0) << srs.output;
  std::string proj = srs.output.substr(srs.output.find('+'));
  proj = proj.substr(0, proj.find('\n'));

  std::ofstream points(dir + "/points.txt");
  std::vector<std::size_t> picked;
  for (std::size_t k = 0; k < grid.x.size() * grid.y.size(); k += 5) {
    picked.push_back(k);
    points.precision(17);
    points << grid.x[k % grid.x.size()] << " " << grid.y[k / grid.x.size()] << "\n";
  }
  points.close();
  auto cs2cs = run_command("cs2cs -f %.12f " + proj + " +to " + geographic_of(proj) + " < " + dir + "/points.txt");
  ASSERT_EQ(cs2cs.exit_code, 0) << cs2cs.output;
  std::vector<double> values = numbers_of(cs2cs.output);
  ASSERT_EQ(values.size(), 3 * picked.size()) << cs2cs.output;
  for (std::size_t n = 0; n < picked.size(); ++n) {
    double lon = values[3 * n], lat = values[3 * n + 1];
    double dlat_m = (ours.latitude_deg[picked[n]] - lat) * kMetresPerDegree;
    double dlon_m = std::remainder(ours.longitude_deg[picked[n]] - lon, 360.0) * kMetresPerDegree *
                    std::cos(lat * kPi / 180.0);
    EXPECT_LT(std::hypot(dlat_m, dlon_m), 1e-3) << mapping << " point " << picked[n] << " (" << proj << ")";
  }
}

TEST(CfGridMapping, LambertConformalConicMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs("lambert_conformal_conic", "x", "y");
}

TEST(CfGridMapping, LambertConformalConicWithOneStandardParallelMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs("lambert_conformal_conic", "x", "y",
                                  "--attrs '{\"standard_parallel\": 50.0, \"latitude_of_projection_origin\": 50.0}'");
}

TEST(CfGridMapping, PolarStereographicMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs("polar_stereographic", "x", "y");
}

TEST(CfGridMapping, PolarStereographicWithScaleFactorMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs(
      "polar_stereographic", "x", "y",
      "--attrs '{\"standard_parallel\": null, \"scale_factor_at_projection_origin\": 0.97}'");
}

TEST(CfGridMapping, RotatedPoleMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs("rotated_latitude_longitude", "rlon", "rlat");
}

TEST(CfGridMapping, MercatorMatchesCs2csWithin1mm) { expect_latlon_agrees_with_cs2cs("mercator", "x", "y"); }

TEST(CfGridMapping, MercatorWithScaleFactorMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs("mercator", "x", "y",
                                  "--attrs '{\"standard_parallel\": null, \"scale_factor_at_projection_origin\": 0.99}'");
}

TEST(CfGridMapping, TransverseMercatorMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs("transverse_mercator", "x", "y");
}

TEST(CfGridMapping, LambertAzimuthalEqualAreaMatchesCs2csWithin1mm) {
  expect_latlon_agrees_with_cs2cs("lambert_azimuthal_equal_area", "x", "y");
}

TEST(CfGridMapping, LatitudeLongitudeIsTheIdentity) {
  expect_latlon_agrees_with_cs2cs("latitude_longitude", "lon", "lat");
}

TEST(CfGridMapping, CrsWktAloneMatchesCs2csWithin1mm) {
  // UTM zone 33N (EPSG:32633) given only as crs_wkt; cs2cs gives lat, lon (EPSG axis order).
  auto wkt = run_command("projinfo -o WKT2_2019 --single-line -q EPSG:32633");
  ASSERT_EQ(wkt.exit_code, 0);
  std::string text = wkt.output.substr(0, wkt.output.find('\n'));
  AttributeList mapping = {{"crs_wkt", text}};
  std::vector<double> x = {300000.0, 500000.0, 712345.678}, y = {4000000.0, 5555555.5};
  auto ours = geo::latlon_of_projected(mapping, x, y);
  std::string dir = scratch_dir("gis_crs_wkt_alone");
  std::ofstream points(dir + "/points.txt");
  points.precision(17);
  for (double yv : y)
    for (double xv : x) points << xv << " " << yv << "\n";
  points.close();
  auto cs2cs = run_command("cs2cs -f %.12f EPSG:32633 EPSG:4326 < " + dir + "/points.txt");
  std::vector<double> values = numbers_of(cs2cs.output);
  ASSERT_EQ(values.size(), 3 * x.size() * y.size()) << cs2cs.output;
  for (std::size_t k = 0; k < x.size() * y.size(); ++k) {
    double lat = values[3 * k], lon = values[3 * k + 1];
    double d = std::hypot((ours.latitude_deg[k] - lat) * kMetresPerDegree,
                          (ours.longitude_deg[k] - lon) * kMetresPerDegree * std::cos(lat * kPi / 180.0));
    EXPECT_LT(d, 1e-3);
  }
}

// The completed grid mapping (crs_wkt added by the writer hook) must be read by GDAL as the same CRS
// GDAL reads from the CF parameters alone: cs2cs between GDAL's two readings is the identity.
void expect_completed_mapping_reads_as_the_same_crs(const std::string& mapping, const std::string& xname,
                                                    const std::string& yname, double tolerance) {
  std::string dir = scratch_dir("gis_complete_" + mapping);
  std::string cf_only = make_cf_grid(dir, mapping);
  std::string completed = dir + "/completed.nc";
  std::filesystem::copy_file(cf_only, completed);
  int ncid = -1, varid = -1;
  ASSERT_EQ(nc_open(completed.c_str(), NC_WRITE, &ncid), NC_NOERR);
  ASSERT_EQ(nc_redef(ncid), NC_NOERR);
  ASSERT_EQ(nc_inq_varid(ncid, "crs", &varid), NC_NOERR);
  io::detail::complete_grid_mapping_variable(ncid, varid, ncid, varid, completed, "crs");
  ASSERT_EQ(nc_close(ncid), NC_NOERR);

  auto proj_of = [](const std::string& path) {
    auto srs = run_command("gdalsrsinfo -o proj4 NETCDF:" + path + ":mu_cape");
    EXPECT_EQ(srs.exit_code, 0) << srs.output;
    std::string proj = srs.output.substr(srs.output.find('+'));
    return proj.substr(0, proj.find('\n'));
  };
  auto wkt = run_command("gdalsrsinfo -o wkt2 NETCDF:" + completed + ":mu_cape");
  EXPECT_EQ(wkt.exit_code, 0) << wkt.output;
  NativeGrid grid = read_native_grid(cf_only, xname, yname);
  std::ofstream points(dir + "/points.txt");
  points.precision(17);
  for (std::size_t k = 0; k < grid.x.size(); k += 7) points << grid.x[k] << " " << grid.y[k % grid.y.size()] << "\n";
  points.close();
  auto cs2cs = run_command("cs2cs -f %.10f " + proj_of(cf_only) + " +to " + proj_of(completed) + " < " + dir +
                           "/points.txt");
  ASSERT_EQ(cs2cs.exit_code, 0) << cs2cs.output;
  std::vector<double> values = numbers_of(cs2cs.output);
  std::size_t n = 0;
  for (std::size_t k = 0; k < grid.x.size(); k += 7, ++n) {
    ASSERT_LT(3 * n + 1, values.size()) << cs2cs.output;
    EXPECT_NEAR(values[3 * n], grid.x[k], tolerance) << mapping;
    EXPECT_NEAR(values[3 * n + 1], grid.y[k % grid.y.size()], tolerance) << mapping;
  }
}

TEST(CompletedGridMapping, EveryMappingIsReadByGdalAsTheSameCrs) {
  for (const char* mapping : {"lambert_conformal_conic", "polar_stereographic", "mercator", "transverse_mercator",
                              "lambert_azimuthal_equal_area"})
    expect_completed_mapping_reads_as_the_same_crs(mapping, "x", "y", 1e-3);  // metres
  expect_completed_mapping_reads_as_the_same_crs("rotated_latitude_longitude", "rlon", "rlat", 1e-8);  // degrees
  expect_completed_mapping_reads_as_the_same_crs("latitude_longitude", "lon", "lat", 1e-8);
}

AttributeList lcc() {
  return {{"grid_mapping_name", std::string("lambert_conformal_conic")},
          {"standard_parallel", std::vector<double>{30.0, 60.0}},
          {"longitude_of_central_meridian", std::vector<double>{10.0}},
          {"latitude_of_projection_origin", std::vector<double>{45.0}},
          {"earth_radius", std::vector<double>{6371229.0}}};
}

TEST(CfGridMapping, UnknownMappingNameIsAnInputError) {
  AttributeList mapping = {{"grid_mapping_name", std::string("space_oblique_mercator")}};
  EXPECT_THROW(Crs::from_grid_mapping(mapping, "in.nc", "crs"), InputError);
}

TEST(CfGridMapping, MissingParameterIsAnInputErrorNamingIt) {
  AttributeList mapping = lcc();
  mapping.erase(mapping.begin() + 2);  // longitude_of_central_meridian
  try {
    Crs::from_grid_mapping(mapping, "in.nc", "crs");
    FAIL() << "expected InputError";
  } catch (const InputError& e) {
    EXPECT_NE(std::string(e.what()).find("longitude_of_central_meridian"), std::string::npos) << e.what();
    EXPECT_EQ(e.file(), "in.nc");
    EXPECT_EQ(e.variable(), "crs");
  }
}

TEST(CfGridMapping, CrsWktContradictingTheParametersIsAnInputError) {
  AttributeList mapping = lcc();
  AttributeList other = lcc();
  geo::set_attribute(other, "longitude_of_central_meridian", std::vector<double>{12.0});
  mapping.push_back({"crs_wkt", Crs::from_grid_mapping(other, "in.nc", "crs").wkt()});
  EXPECT_THROW(Crs::from_grid_mapping(mapping, "in.nc", "crs"), InputError);
}

TEST(CfGridMapping, CrsWktAgreeingWithTheParametersIsAccepted) {
  AttributeList mapping = lcc();
  mapping.push_back({"crs_wkt", Crs::from_grid_mapping(lcc(), "in.nc", "crs").wkt()});
  EXPECT_NO_THROW(Crs::from_grid_mapping(mapping, "in.nc", "crs"));
}

TEST(CfGridMapping, PolarStereographicWithBothStandardParallelAndScaleIsAnInputError) {
  AttributeList mapping = {{"grid_mapping_name", std::string("polar_stereographic")},
                           {"straight_vertical_longitude_from_pole", std::vector<double>{0.0}},
                           {"latitude_of_projection_origin", std::vector<double>{90.0}},
                           {"standard_parallel", std::vector<double>{60.0}},
                           {"scale_factor_at_projection_origin", std::vector<double>{0.97}}};
  EXPECT_THROW(Crs::from_grid_mapping(mapping, "in.nc", "crs"), InputError);
}

TEST(CfGridMapping, PolarStereographicAwayFromAPoleIsAnInputError) {
  AttributeList mapping = {{"grid_mapping_name", std::string("polar_stereographic")},
                           {"straight_vertical_longitude_from_pole", std::vector<double>{0.0}},
                           {"latitude_of_projection_origin", std::vector<double>{60.0}},
                           {"standard_parallel", std::vector<double>{60.0}}};
  EXPECT_THROW(Crs::from_grid_mapping(mapping, "in.nc", "crs"), InputError);
}

TEST(CfGridMapping, ContradictoryEarthFigureIsAnInputError) {
  AttributeList mapping = lcc();
  mapping.push_back({"semi_major_axis", std::vector<double>{6378137.0}});
  EXPECT_THROW(Crs::from_grid_mapping(mapping, "in.nc", "crs"), InputError);
}

TEST(CfGridMapping, CompletedMappingKeepsTheInputAndAddsCrsWkt) {
  AttributeList completed = geo::complete_grid_mapping(lcc(), "in.nc", "crs");
  for (const auto& attribute : lcc()) EXPECT_NE(geo::find_attribute(completed, attribute.name), nullptr);
  const auto* wkt = geo::find_attribute(completed, "crs_wkt");
  ASSERT_NE(wkt, nullptr);
  EXPECT_NE(std::get<std::string>(wkt->value).find("Lambert Conic Conformal"), std::string::npos);
}

TEST(CfGridMapping, CrsWktAloneIsCompletedWithCfParameters) {
  AttributeList completed = geo::complete_grid_mapping({{"crs_wkt", Crs::from_user_text("EPSG:32633").wkt()}},
                                                       "in.nc", "crs");
  const auto* name = geo::find_attribute(completed, "grid_mapping_name");
  ASSERT_NE(name, nullptr);
  EXPECT_EQ(std::get<std::string>(name->value), "transverse_mercator");
  // UTM zone 33: central meridian 15 E, scale 0.9996, false easting 500 km (EPSG dataset).
  EXPECT_DOUBLE_EQ(std::get<std::vector<double>>(geo::find_attribute(completed, "longitude_of_central_meridian")->value)[0], 15.0);
  EXPECT_DOUBLE_EQ(std::get<std::vector<double>>(geo::find_attribute(completed, "scale_factor_at_central_meridian")->value)[0], 0.9996);
  EXPECT_DOUBLE_EQ(std::get<std::vector<double>>(geo::find_attribute(completed, "false_easting")->value)[0], 500000.0);
}

TEST(CfGridMapping, UserCrsTextIsReadByProj) {
  EXPECT_TRUE(Crs::from_user_text("EPSG:4326").is_geographic());
  EXPECT_FALSE(Crs::from_user_text("+proj=utm +zone=33 +datum=WGS84").is_geographic());
  EXPECT_THROW(Crs::from_user_text("EPSG:999999"), UsageError);
}

TEST(Transformer, RoundTripIsExact) {
  geo::Transformer t(Crs::wgs84(), Crs::from_user_text("EPSG:3857"));
  double x = 12.5, y = 47.25;
  t.forward(&x, &y, 1);
  t.inverse(&x, &y, 1);
  EXPECT_NEAR(x, 12.5, 1e-9);
  EXPECT_NEAR(y, 47.25, 1e-9);
}

}  // namespace
}  // namespace latentlift::test
