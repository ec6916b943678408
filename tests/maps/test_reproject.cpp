// latentlift reproject: GDAL reads the outputs as georeferenced rasters; values agree with the
// source; interpolation error within the analytic bound; classes stay classes.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <regex>
#include <set>
#include <string>

#include "io/netcdf_file.hpp"
#include "support/grid_test_helpers.hpp"
#include "latentlift/crs.hpp"

namespace latentlift::test {
namespace {

namespace fs = std::filesystem;
using io::detail::NcFile;

constexpr double kPi = 3.14159265358979323846;
constexpr double kFloatFill = 9.969209968386869e36;  // NC_FILL_FLOAT (netCDF-C documentation)

std::string reproject(const std::string& input, const std::string& output, const std::string& options) {
  auto result = run_command(binary() + " reproject " + input + " -o " + output + " " + options);
  EXPECT_EQ(result.exit_code, 0) << result.output;
  return result.output;
}

TEST(Reproject, GdalReadsUtmOutputWithExpectedCrsSizeAndGeotransform) {
  std::string dir = scratch_dir("gis_reproject_utm");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic");
  std::string out = dir + "/utm.nc";
  reproject(in, out, "--crs EPSG:32633 --resolution 10000 --bbox 100000,4850000,400000,5100000");
  GdalInfo info = gdal_info(out, "mu_cape", "UTM zone 33N");
  ASSERT_EQ(info.numbers.size(), 9u);
  EXPECT_EQ(info.numbers[0], 30);  // (400 - 100) km / 10 km
  EXPECT_EQ(info.numbers[1], 25);  // (5100 - 4850) km / 10 km
  const double expected[6] = {100000, 10000, 0, 5100000, 0, -10000};  // GDAL geotransform: west, dx, 0, north, 0, -dy
  for (int k = 0; k < 6; ++k) EXPECT_NEAR(info.numbers[2 + k], expected[k], 1e-6) << k;
  EXPECT_EQ(info.numbers[8], 1) << "CRS is not UTM zone 33N";
}

TEST(Reproject, GdalReadsLatLonOutputOfARotatedPoleGridAsWgs84) {
  std::string dir = scratch_dir("gis_reproject_rotated");
  std::string in = make_cf_grid(dir, "rotated_latitude_longitude");
  std::string out = dir + "/ll.nc";
  reproject(in, out, "--crs EPSG:4326 --resolution 0.25 --bbox 0,40,20,60");
  GdalInfo info = gdal_info(out, "latent_class", "ID[\\\"EPSG\\\",4326]");
  ASSERT_EQ(info.numbers.size(), 9u);
  EXPECT_EQ(info.numbers[0], 80);
  EXPECT_EQ(info.numbers[1], 80);
  const double expected[6] = {0, 0.25, 0, 60, 0, -0.25};
  for (int k = 0; k < 6; ++k) EXPECT_NEAR(info.numbers[2 + k], expected[k], 1e-9) << k;
  EXPECT_EQ(info.numbers[8], 1) << "CRS is not EPSG:4326";
}

TEST(Reproject, GdallocationinfoReturnsTheSourceValueOfTheNearestCell) {
  // Nearest-cell resampling: at target cell centres GDAL must report the value of the source cell
  // nearest (in the rotated grid) to that centre, found here independently with latentlift's CRS only.
  std::string dir = scratch_dir("gis_reproject_location");
  std::string in = make_cf_grid(dir, "rotated_latitude_longitude");
  std::string out = dir + "/ll.nc";
  const double west = 0, south = 44, cell = 0.2;
  reproject(in, out, "--crs EPSG:4326 --resolution 0.2 --bbox 0,44,14,52 --method nearest");
  Field source = read_field(in, "latent_layer_depth", "rlon", "rlat");
  NcFile file = NcFile::open_read(in);
  auto crs = geo::Crs::from_grid_mapping(
      io::detail::read_attributes(file, io::detail::find_variable(file, "crs")->id), in, "crs");
  geo::Transformer to_rotated(geo::Crs::wgs84(), crs);
  int compared = 0;
  for (auto [si, sj] : {std::pair{3, 3}, {10, 8}, {20, 15}, {5, 12}, {16, 4}, {22, 16}}) {
    // A source cell's position, moved to the centre of the target cell holding it.
    double lon = source.x[si], lat = source.y[sj];
    to_rotated.inverse(&lon, &lat, 1);
    lon = west + (std::floor((lon - west) / cell) + 0.5) * cell;
    lat = south + (std::floor((lat - south) / cell) + 0.5) * cell;
    char where[64];
    std::snprintf(where, sizeof where, "%.9f %.9f", lon, lat);
    auto result = run_command("gdallocationinfo -valonly -wgs84 NETCDF:" + out + ":latent_layer_depth " + where);
    ASSERT_EQ(result.exit_code, 0) << result.output;
    double x = lon, y = lat;
    to_rotated.forward(&x, &y, 1);
    long i = std::lround((x - source.x[0]) / (source.x[1] - source.x[0]));
    long j = std::lround((y - source.y[0]) / (source.y[1] - source.y[0]));
    ASSERT_TRUE(i >= 0 && j >= 0 && i < long(source.x.size()) && j < long(source.y.size()));
    double expected = source.values[j * source.x.size() + i];  // time 0
    if (expected == source.fill) continue;
    EXPECT_FLOAT_EQ(std::stod(result.output), expected) << where;
    ++compared;
  }
  EXPECT_GE(compared, 5);
}

// f(x, y) = 1000 + 500 sin(x / lx) cos(y / ly), as written by make_cf_grid.py (time 0), x/y in degrees.
double analytic(double lon, double lat, double lx, double ly) {
  return 1000.0 + 500.0 * std::sin(lon / lx) * std::cos(lat / ly);
}

// Bilinear interpolation of a C2 function on an hx x hy cell errs by at most
// hx^2/8 max|f_xx| + hy^2/8 max|f_yy| (linear interpolation error h^2/8 max|f''|, applied along each
// axis; common practice). Here max|f_xx| <= 500/lx^2, max|f_yy| <= 500/ly^2. Storage is float32:
// a relative 6e-8 of ~1500 adds 1e-4; 1e-3 is allowed for it.
double bilinear_bound(double h, double lx, double ly) {
  return h * h / 8.0 * 500.0 / (lx * lx) + h * h / 8.0 * 500.0 / (ly * ly) + 1e-3;
}

TEST(Reproject, BilinearErrorOfASmoothFieldIsWithinTheInterpolationBound) {
  std::string dir = scratch_dir("gis_reproject_bilinear");
  // Source: lon 0..11.5, lat 40..48.5 every 0.5 degree, no grid_mapping (EPSG:4326); lx = 4, ly = 4.5.
  std::string in = make_cf_grid(dir, "none", "--lx 4 --ly 4.5");
  std::string out = dir + "/fine.nc";
  reproject(in, out, "--crs EPSG:4326 --resolution 0.1 --bbox -1,39,13,50");
  Field f = read_field(out, "mu_cape", "lon", "lat");
  double bound = bilinear_bound(0.5, 4.0, 4.5), worst = 0;
  std::size_t inside = 0;
  for (std::size_t j = 0; j < f.y.size(); ++j)
    for (std::size_t i = 0; i < f.x.size(); ++i) {
      double v = f.values[j * f.x.size() + i];
      bool within = f.x[i] >= 0 && f.x[i] <= 11.5 && f.y[j] >= 40 && f.y[j] <= 48.5;
      if (!within) {
        EXPECT_EQ(v, f.fill) << "outside the source grid at " << f.x[i] << " " << f.y[j];
        continue;
      }
      ASSERT_NE(v, f.fill) << "missing inside the source grid at " << f.x[i] << " " << f.y[j];
      worst = std::max(worst, std::fabs(v - analytic(f.x[i], f.y[j], 4.0, 4.5)));
      ++inside;
    }
  EXPECT_GT(inside, 5000u);
  EXPECT_LE(worst, bound);
  EXPECT_GT(worst, 0.05 * bound) << "suspiciously exact: is it interpolating at all?";
}

TEST(Reproject, BilinearErrorInWebMercatorIsWithinTheInterpolationBound) {
  std::string dir = scratch_dir("gis_reproject_mercator");
  std::string in = make_cf_grid(dir, "none", "--lx 4 --ly 4.5");
  std::string out = dir + "/merc.nc";
  reproject(in, out, "--crs EPSG:3857 --resolution 5000");
  Field f = read_field(out, "mu_cape", "x", "y");
  // Spherical (Web) Mercator inverse on R = 6378137 m: lon = x / R, lat = atan(sinh(y / R))
  // (Snyder 1987, eqs. 7-10 and 7-12; EPSG Guidance Note 7-2 method 1024).
  const double R = 6378137.0, bound = bilinear_bound(0.5, 4.0, 4.5);
  double worst = 0;
  std::size_t inside = 0;
  for (std::size_t j = 0; j < f.y.size(); ++j)
    for (std::size_t i = 0; i < f.x.size(); ++i) {
      double lon = f.x[i] / R * 180.0 / kPi, lat = std::atan(std::sinh(f.y[j] / R)) * 180.0 / kPi;
      double v = f.values[j * f.x.size() + i];
      bool within = lon > 1e-9 && lon < 11.5 - 1e-9 && lat > 40 + 1e-9 && lat < 48.5 - 1e-9;
      if (!within) continue;
      ASSERT_NE(v, f.fill) << lon << " " << lat;
      worst = std::max(worst, std::fabs(v - analytic(lon, lat, 4.0, 4.5)));
      ++inside;
    }
  EXPECT_GT(inside, 1000u);
  EXPECT_LE(worst, bound);
}

TEST(Reproject, GlobalLatLonGridWrapsAcrossTheDateLine) {
  // A global 5-degree grid (lon 0..355): with lx = ly = 180/pi the field is sin(lon) cos(lat), periodic
  // in longitude, so target cells between 355 E and 0 E interpolate across the seam, within the bound.
  std::string dir = scratch_dir("gis_reproject_global");
  const double l = 180.0 / kPi;
  std::string in = make_cf_grid(dir, "none", "--grid 0 5 -87.5 5 --nx 72 --ny 36 --lx " + std::to_string(l) +
                                                 " --ly " + std::to_string(l));
  std::string out = dir + "/ll.nc";
  reproject(in, out, "--crs EPSG:4326 --resolution 1 --bbox -180,-87,180,87");
  Field f = read_field(out, "mu_cape", "lon", "lat");
  double bound = bilinear_bound(5.0, l, l), worst = 0;
  for (std::size_t j = 0; j < f.y.size(); ++j)
    for (std::size_t i = 0; i < f.x.size(); ++i) {
      double v = f.values[j * f.x.size() + i];
      ASSERT_NE(v, f.fill) << f.x[i] << " " << f.y[j];
      worst = std::max(worst, std::fabs(v - analytic(f.x[i], f.y[j], l, l)));
    }
  EXPECT_LE(worst, bound);
}

TEST(Reproject, BilinearIsMissingNextToAMissingSourceCell) {
  // latent_layer_depth is missing at source columns i < 2 and rows j < 2 (lon <= 0.5, lat <= 40.5):
  // any target cell whose lower-left neighbour is such a cell (lon < 1, lat < 41) must be missing.
  std::string dir = scratch_dir("gis_reproject_missing");
  std::string in = make_cf_grid(dir, "none");
  std::string out = dir + "/fine.nc";
  reproject(in, out, "--crs EPSG:4326 --resolution 0.1 --bbox 0,40,3,43");
  Field f = read_field(out, "latent_layer_depth", "lon", "lat");
  for (std::size_t j = 0; j < f.y.size(); ++j)
    for (std::size_t i = 0; i < f.x.size(); ++i) {
      double v = f.values[j * f.x.size() + i];
      if (f.x[i] < 1.0 && f.y[j] < 41.0) {
        EXPECT_EQ(v, f.fill) << f.x[i] << " " << f.y[j];
      } else if (f.x[i] > 1.0 || f.y[j] > 41.0) {
        EXPECT_NE(v, f.fill) << f.x[i] << " " << f.y[j];
      }
    }
}

std::set<double> values_of(const std::string& path, const std::string& xname, const std::string& yname) {
  Field f = read_field(path, "latent_class", xname, yname);
  std::set<double> out(f.values.begin(), f.values.end());
  out.erase(f.fill);
  return out;
}

TEST(Reproject, ClassesSurviveARoundTripWithOnlyValidClassValues) {
  std::string dir = scratch_dir("gis_reproject_classes");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic");
  std::string utm = dir + "/utm.nc", back = dir + "/back.nc";
  reproject(in, utm, "--crs EPSG:32633 --resolution 7000 --method bilinear");
  reproject(utm, back, "--crs EPSG:4326 --resolution 0.05");
  for (const auto& [path, x, y] : {std::tuple{utm, "x", "y"}, std::tuple{back, "lon", "lat"}}) {
    std::set<double> values = values_of(path, x, y);
    EXPECT_EQ(values, (std::set<double>{0, 1, 2})) << path;
    NcFile file = NcFile::open_read(path);
    auto var = *io::detail::find_variable(file, "latent_class");
    EXPECT_EQ(var.type, NC_BYTE);
    EXPECT_EQ(io::detail::text_attribute(file, var.id, "flag_meanings").value_or(""),
              "none pseudo_latent real_latent");
    EXPECT_EQ(io::detail::text_attribute(file, var.id, "resampling").value_or(""), "nearest");
  }
}

TEST(Reproject, UnstructuredGridUsesTheNearestCellAndIsMissingFarAway) {
  std::string dir = scratch_dir("gis_reproject_unstructured");
  std::string in = make_cf_grid(dir, "unstructured");
  std::string out = dir + "/ll.nc";
  reproject(in, out, "--crs EPSG:4326 --resolution 0.25 --bbox -5,35,17,54");
  NcFile source = NcFile::open_read(in);
  auto values = io::detail::read_doubles(source, *io::detail::find_variable(source, "mu_cape"));
  std::set<float> source_values(values.begin(), values.end());
  Field f = read_field(out, "mu_cape", "lon", "lat");
  std::size_t valid = 0;
  for (std::size_t j = 0; j < f.y.size(); ++j)
    for (std::size_t i = 0; i < f.x.size(); ++i) {
      double v = f.values[j * f.x.size() + i];
      bool far = f.x[i] < -2 || f.x[i] > 14 || f.y[j] < 38 || f.y[j] > 51;
      if (far) {
        EXPECT_EQ(v, f.fill) << f.x[i] << " " << f.y[j];
      }
      if (v == f.fill) continue;
      EXPECT_TRUE(source_values.count(static_cast<float>(v))) << "not a source value: " << v;
      ++valid;
    }
  EXPECT_GT(valid, 1000u);
  auto bilinear = run_command(binary() + " reproject " + in + " -o " + dir + "/b.nc --resolution 0.25 --method bilinear");
  EXPECT_EQ(bilinear.exit_code, 2) << bilinear.output;
}

TEST(Reproject, UnknownCrsIsAUsageErrorAndLeavesNoFile) {
  std::string dir = scratch_dir("gis_reproject_bad_crs");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic");
  auto result = run_command(binary() + " reproject " + in + " -o " + dir + "/x.nc --crs EPSG:999999 --resolution 1");
  EXPECT_EQ(result.exit_code, 2) << result.output;
  EXPECT_NE(result.output.find("EPSG:999999"), std::string::npos) << result.output;
  EXPECT_FALSE(fs::exists(dir + "/x.nc"));
}

TEST(Reproject, ExistingOutputNeedsOverwrite) {
  std::string dir = scratch_dir("gis_reproject_overwrite");
  std::string in = make_cf_grid(dir, "none");
  std::string out = dir + "/ll.nc";
  reproject(in, out, "--resolution 1");
  auto again = run_command(binary() + " reproject " + in + " -o " + out + " --resolution 1");
  EXPECT_EQ(again.exit_code, 2) << again.output;
  reproject(in, out, "--resolution 1 --overwrite");
  for (const auto& entry : fs::directory_iterator(dir))
    EXPECT_EQ(entry.path().filename().string().find(".tmp"), std::string::npos) << entry.path();
}

TEST(Reproject, TargetCrsInFeetIsAUsageError) {
  // EPSG:2263 (a US state plane zone) measures x/y in US survey feet (EPSG dataset).
  std::string dir = scratch_dir("gis_reproject_feet");
  std::string in = make_cf_grid(dir, "none");
  auto result = run_command(binary() + " reproject " + in + " -o " + dir + "/x.nc --crs EPSG:2263 --resolution 1000");
  EXPECT_EQ(result.exit_code, 2) << result.output;
}

TEST(Reproject, MalformedBboxIsAUsageError) {
  std::string dir = scratch_dir("gis_reproject_bbox");
  std::string in = make_cf_grid(dir, "none");
  for (const char* bbox : {"1,2,3", "10,40,0,50", "a,b,c,d"}) {
    auto result = run_command(binary() + " reproject " + in + " -o " + dir + "/x.nc --resolution 1 --bbox " + bbox);
    EXPECT_EQ(result.exit_code, 2) << bbox << ": " << result.output;
  }
}


// --- extents (defaults without --bbox) ---

std::vector<double> extent_of(const std::string& output) {  // W S E N from the summary line
  std::smatch m;
  std::regex_search(output, m, std::regex(R"(extent W (\S+) S (\S+) E (\S+) N (\S+))"));
  if (m.size() != 5) return {};
  return {std::stod(m[1]), std::stod(m[2]), std::stod(m[3]), std::stod(m[4])};
}

TEST(ReprojectExtent, ZeroTo360GridCoversEveryLongitudeOnceInLatLon) {
  // A global 2.5 degree grid in 0..357.5 E (the layout of NCEP's GFS): all longitudes, once: -180..180.
  std::string dir = scratch_dir("maps_extent_0360");
  std::string in = make_cf_grid(dir, "none", "--grid 0 2.5 -90 2.5 --nx 144 --ny 73 --times 1");
  auto e = extent_of(reproject(in, dir + "/ll.nc", "--crs EPSG:4326 --resolution 1"));
  ASSERT_EQ(e.size(), 4u);
  EXPECT_DOUBLE_EQ(e[0], -180.0);
  EXPECT_DOUBLE_EQ(e[2], 180.0);
  EXPECT_DOUBLE_EQ(e[1], -90.0);
  EXPECT_DOUBLE_EQ(e[3], 90.0);
}

TEST(ReprojectExtent, ZeroTo360GridInWebMercatorStopsAt85Degrees) {
  // EPSG:3857 spans x and y of +-20037508.34 m, its edge at 85.0511 degrees (EPSG registry, the
  // CRS's bounds; y checked with PROJ's cs2cs). The extent is snapped outward to whole 100 km cells.
  std::string dir = scratch_dir("maps_extent_mercator");
  std::string in = make_cf_grid(dir, "none", "--grid 0 2.5 -90 2.5 --nx 144 --ny 73 --times 1");
  auto e = extent_of(reproject(in, dir + "/wm.nc", "--crs EPSG:3857 --resolution 100000"));
  ASSERT_EQ(e.size(), 4u);
  auto r = run_command("echo 85.0511287798 180 | cs2cs -f %.3f EPSG:4326 EPSG:3857");  // EPSG:4326 is lat, lon
  auto xy = numbers_of(r.output);
  ASSERT_GE(xy.size(), 2u) << r.output;
  const double edge = std::max(std::fabs(xy[0]), std::fabs(xy[1]));  // 20037508.34 m
  EXPECT_NEAR(edge, 20037508.34, 1.0);
  for (double v : e) {
    EXPECT_GE(std::fabs(v), edge - 1.0) << "the world is cut short";
    EXPECT_LT(std::fabs(v), edge + 100000.0) << "beyond Web Mercator's edge by more than a cell";
  }
}

TEST(ReprojectExtent, GridAcrossTheAntimeridianKeepsItsOwnSpan) {
  // 150 E to 150.25 W (209.75 E) at 0.5 degree: 60 degrees wide, not the whole globe.
  std::string dir = scratch_dir("maps_extent_antimeridian");
  std::string in = make_cf_grid(dir, "none", "--grid 150.25 0.5 -19.75 0.5 --nx 120 --ny 40 --times 1");
  auto e = extent_of(reproject(in, dir + "/ll.nc", "--crs EPSG:4326 --resolution 0.5"));
  ASSERT_EQ(e.size(), 4u);
  EXPECT_DOUBLE_EQ(e[0], 150.0);
  EXPECT_DOUBLE_EQ(e[2], 210.0);
  Field f = read_field(dir + "/ll.nc", "mu_cape", "lon", "lat");
  std::size_t missing = 0;
  for (double v : f.values) missing += v == f.fill;
  EXPECT_EQ(missing, 0u) << "every target cell lies on the source grid";
}

// --- Cloud-Optimized GeoTIFF layers ---

// gdalinfo -json of a GeoTIFF, reduced by a Python expression over d (the parsed JSON).
std::string gdal_json(const std::string& path, const std::string& expression) {
  auto r = run_command("gdalinfo -json " + path + " | " + python() + " -c \"import json,sys; d=json.load(sys.stdin); print(" +
                       expression + ")\"");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  return r.output;
}

TEST(ReprojectCog, GdalinfoReportsCogLayoutCrsNodataAndOverviews) {
  std::string dir = scratch_dir("maps_cog_layout");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic");
  std::string out = dir + "/cape.tif";
  reproject(in, out, "--format cog --field mu_cape --crs EPSG:32632 --resolution 1000 --bbox 300000,4800000,900000,5200000");
  EXPECT_EQ(gdal_json(out, "d['metadata']['IMAGE_STRUCTURE']['LAYOUT']"), "COG\n");
  EXPECT_NE(gdal_json(out, "d['coordinateSystem']['wkt']").find("UTM zone 32N"), std::string::npos);
  EXPECT_EQ(gdal_json(out, "d['bands'][0]['type'], d['bands'][0]['noDataValue']"), "Float32 -9999.0\n");
  EXPECT_EQ(gdal_json(out, "len(d['bands']), len(d['bands'][0]['overviews']) > 0"), "2 True\n");  // two time steps
  EXPECT_EQ(gdal_json(out, "d['geoTransform']"), "[300000.0, 1000.0, 0.0, 5200000.0, 0.0, -1000.0]\n");
}

TEST(ReprojectCog, BandsCarryValidTimeUnitsAndLongName) {
  // make_cf_grid.py: time = 0 and 6 hours since 2031-07-14 00:00.
  std::string dir = scratch_dir("maps_cog_metadata");
  std::string in = make_cf_grid(dir, "none");
  std::string out = dir + "/cape.tif";
  reproject(in, out, "--format cog --field mu_cape --crs EPSG:4326 --resolution 0.5");
  EXPECT_EQ(gdal_json(out, "d['bands'][1]['metadata']['']['valid_time'], d['bands'][1]['metadata']['']['units']"),
            "2031-07-14T06:00:00Z J kg-1\n");
  EXPECT_EQ(gdal_json(out, "d['bands'][0]['metadata']['']['long_name']"), "CAPE of the most-unstable parcel\n");
  reproject(in, dir + "/one.tif", "--format cog --field mu_cape --time 1 --crs EPSG:4326 --resolution 0.5");
  EXPECT_EQ(gdal_json(dir + "/one.tif", "len(d['bands']), d['bands'][0]['metadata']['']['valid_time']"),
            "1 2031-07-14T06:00:00Z\n");
}

TEST(ReprojectCog, GdallocationinfoReturnsTheFieldValues) {
  // The target grid is the source's own 0.5 degree lat/lon grid, so every COG cell holds its source
  // cell's value (float32); GDAL's gdallocationinfo reads them at the source cell centres.
  std::string dir = scratch_dir("maps_cog_values");
  std::string in = make_cf_grid(dir, "none");
  std::string out = dir + "/cape.tif";
  reproject(in, out, "--format cog --field mu_cape --crs EPSG:4326 --resolution 0.5 --method nearest --bbox -0.25,39.75,11.75,48.75");
  Field f = read_field(in, "mu_cape", "lon", "lat");
  std::string points;
  std::vector<double> expected;
  for (std::size_t j = 0; j < f.y.size(); j += 5)
    for (std::size_t i = 0; i < f.x.size(); i += 5) {
      points += std::to_string(f.x[i]) + " " + std::to_string(f.y[j]) + "\\n";
      expected.push_back(f.values[j * f.x.size() + i]);  // time step 0, band 1
    }
  auto r = run_command("printf -- '" + points + "' | gdallocationinfo -valonly -b 1 -geoloc " + out);
  auto values = numbers_of(r.output);
  ASSERT_EQ(values.size(), expected.size()) << r.output;
  for (std::size_t k = 0; k < values.size(); ++k) EXPECT_NEAR(values[k], expected[k], 1e-3 * std::fabs(expected[k])) << k;
}

TEST(ReprojectCog, ClassesAreBytesWithNodata255) {
  std::string dir = scratch_dir("maps_cog_classes");
  std::string in = make_cf_grid(dir, "none");
  std::string out = dir + "/class.tif";
  reproject(in, out, "--format cog --field latent_class --crs EPSG:4326 --resolution 0.5");
  EXPECT_EQ(gdal_json(out, "d['bands'][0]['type'], d['bands'][0]['noDataValue'], d['metadata']['']['flag_meanings']"),
            "Byte 255.0 none pseudo_latent real_latent\n");
}

TEST(ReprojectCog, CogNeedsExactlyOneField) {
  std::string dir = scratch_dir("maps_cog_one_field");
  std::string in = make_cf_grid(dir, "none");
  auto r = run_command(binary() + " reproject " + in + " -o " + dir + "/x.tif --crs EPSG:4326 --resolution 1");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("--field"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(dir + "/x.tif"));
}

}  // namespace
}  // namespace latentlift::test
