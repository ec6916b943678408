// latentlift quicklook: the PNG decodes, its colours map back to the field, missing and not
// applicable cells are told apart, the automatic range follows robust percentiles (NumPy),
// coastlines pass through published coastal landmarks and graticule lines lie where PROJ's cs2cs
// puts them, the layout never reaches the image edge, and no world file is written.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <map>
#include <regex>
#include <string>

#include "maps/colour_scale.hpp"
#include "io/netcdf_file.hpp"
#include "maps/png_image.hpp"
#include "support/grid_test_helpers.hpp"

namespace latentlift::test {
namespace {

namespace fs = std::filesystem;
using io::detail::NcFile;
using maps::detail::Rgb;
using maps::detail::RgbImage;

// What `latentlift quicklook` reports: image size, colour bins, and where the map lies.
struct Drawn {
  CommandResult result;
  int width = 0, height = 0, map_x = 0, map_y = 0, s = 1;
  double west = 0, north = 0, dx = 1, dy = 1;
  double low = 0, high = 0, step = 0, graticule_deg = 0;
  int bins = 0;
  // Pixel (column, row) of a point in the grid's own coordinates.
  std::pair<double, double> pixel(double x, double y) const {
    return {map_x + (x - west) / dx * s, map_y + (north - y) / dy * s};
  }
};

Drawn quicklook(const std::string& input, const std::string& png, const std::string& options) {
  Drawn d;
  d.result = run_command(binary() + " quicklook " + input + " -o " + png + " --overwrite " + options);
  EXPECT_EQ(d.result.exit_code, 0) << d.result.output;
  const std::string& out = d.result.output;
  std::smatch m;
  if (std::regex_search(out, m, std::regex(R"(\((\d+) x (\d+) px\))"))) d.width = std::stoi(m[1]), d.height = std::stoi(m[2]);
  if (std::regex_search(out, m, std::regex(R"(map at \((\d+), (\d+)\), \d+ x \d+ px, (\d+) px per cell)")))
    d.map_x = std::stoi(m[1]), d.map_y = std::stoi(m[2]), d.s = std::stoi(m[3]);
  if (std::regex_search(out, m, std::regex(R"(west (\S+) north (\S+), cell (\S+) x (\S+))")))
    d.west = std::stod(m[1]), d.north = std::stod(m[2]), d.dx = std::stod(m[3]), d.dy = std::stod(m[4]);
  if (std::regex_search(out, m, std::regex(R"(colour steps: (\d+) from (\S+) to (\S+) \(step ([^)]+)\))")))
    d.bins = std::stoi(m[1]), d.low = std::stod(m[2]), d.high = std::stod(m[3]), d.step = std::stod(m[4]);
  if (std::regex_search(out, m, std::regex(R"(graticule every (\S+) degrees)"))) d.graticule_deg = std::stod(m[1]);
  return d;
}

// The colour most pixels of a cell's block have (lines drawn over the map cover only a few).
Rgb cell_colour(const RgbImage& image, const Drawn& d, double x, double y) {
  auto [cx, cy] = d.pixel(x, y);
  std::map<Rgb, int> votes;
  for (int py = static_cast<int>(cy) - d.s / 2; py < static_cast<int>(cy) + (d.s + 1) / 2; ++py)
    for (int px = static_cast<int>(cx) - d.s / 2; px < static_cast<int>(cx) + (d.s + 1) / 2; ++px) ++votes[image.get(px, py)];
  return std::max_element(votes.begin(), votes.end(), [](auto& a, auto& b) { return a.second < b.second; })->first;
}

double brightness(Rgb c) { return (c[0] + c[1] + c[2]) / 3.0; }

// Whether a pixel within one pixel of (x, y) is darker (sign -1) or lighter (+1) than the
// background by at least 30 of 255.
bool line_within_one_pixel(const RgbImage& image, double x, double y, Rgb background, int sign) {
  int cx = static_cast<int>(std::lround(x)), cy = static_cast<int>(std::lround(y));
  for (int py = cy - 1; py <= cy + 1; ++py)
    for (int px = cx - 1; px <= cx + 1; ++px)
      if (sign * (brightness(image.get(px, py)) - brightness(background)) >= 30) return true;
  return false;
}

struct Grid {
  std::vector<double> x, y, values;
  double fill;
};

Grid read_grid(const std::string& path, const std::string& field, const std::string& xname, const std::string& yname) {
  NcFile file = NcFile::open_read(path);
  Grid g;
  g.x = io::detail::read_doubles(file, *io::detail::find_variable(file, xname));
  g.y = io::detail::read_doubles(file, *io::detail::find_variable(file, yname));
  auto var = *io::detail::find_variable(file, field);
  g.values = io::detail::read_doubles(file, var);
  g.fill = io::detail::number_attribute(file, var.id, "_FillValue")->front();
  return g;
}

// x/y of lon/lat points in a PROJ CRS, by PROJ's cs2cs (the reference, outside latentlift).
std::vector<std::pair<double, double>> cs2cs(const std::string& crs, const std::vector<std::pair<double, double>>& lonlat) {
  std::string points;
  for (auto [lon, lat] : lonlat) points += std::to_string(lon) + " " + std::to_string(lat) + "\\n";
  auto r = run_command("printf -- '" + points + "' | cs2cs -f %.6f +proj=longlat +R=6371229 +no_defs +to " + crs);
  EXPECT_EQ(r.exit_code, 0) << r.output;
  auto numbers = numbers_of(r.output);
  std::vector<std::pair<double, double>> out;
  for (std::size_t k = 0; k + 2 < numbers.size() + 1 && out.size() < lonlat.size(); k += 3) out.push_back({numbers[k], numbers[k + 1]});
  return out;
}

const std::string kLambert = "+proj=lcc +lat_1=30 +lat_2=60 +lat_0=45 +lon_0=10 +x_0=0 +y_0=0 +R=6371229 +no_defs";  // make_cf_grid.py

TEST(Quicklook, PngDecodesWithTheStatedSize) {
  std::string dir = scratch_dir("maps_quicklook_size");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  RgbImage image = maps::detail::read_png(dir + "/map.png");
  EXPECT_GT(d.width, 0);
  EXPECT_EQ(image.width, d.width);
  EXPECT_EQ(image.height, d.height);
}

TEST(Quicklook, NoWorldFileBesideTheDecoratedPng) {
  // The PNG has a title and legend around the map: a world file would place them on the globe too.
  std::string dir = scratch_dir("maps_quicklook_no_world_file");
  std::string in = make_cf_grid(dir, "none");
  quicklook(in, dir + "/map.png", "--field mu_cape");
  ASSERT_TRUE(fs::exists(dir + "/map.png"));
  for (const char* sidecar : {"/map.pgw", "/map.prj", "/map.png.aux.xml", "/map.wld"}) EXPECT_FALSE(fs::exists(dir + sidecar)) << sidecar;
}

TEST(Quicklook, ColoursMapBackToTheFieldWithinOneColourStep) {
  std::string dir = scratch_dir("maps_quicklook_colours");
  std::string in = make_cf_grid(dir, "none");  // regular lat/lon, EPSG:4326
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape --time 1 --range 400,1600");
  ASSERT_GT(d.bins, 1) << d.result.output;
  auto image = maps::detail::read_png(dir + "/map.png");
  Grid g = read_grid(in, "mu_cape", "lon", "lat");
  std::vector<Rgb> steps = maps::detail::sequential_steps(d.bins);
  std::size_t plane = g.x.size() * g.y.size();
  for (std::size_t j = 0; j < g.y.size(); ++j)
    for (std::size_t i = 0; i < g.x.size(); ++i) {
      double v = g.values[plane + j * g.x.size() + i];  // time index 1
      Rgb colour = cell_colour(image, d, g.x[i], g.y[j]);
      auto k = std::find(steps.begin(), steps.end(), colour) - steps.begin();
      ASSERT_LT(k, static_cast<long>(steps.size())) << "cell colour not on the scale at cell " << i << "," << j;
      double centre = d.low + (k + 0.5) * d.step;
      EXPECT_LE(std::fabs(v - centre), d.step) << "cell " << i << "," << j;
    }
}

TEST(Quicklook, MissingIsHatchedGreyAndNotApplicableIsSand) {
  // latent_layer_depth is missing in cells i < 2 and j < 2; latent_class is missing only in cell
  // (0, 0): that column was not analysed (missing), the other three were (not applicable).
  std::string dir = scratch_dir("maps_quicklook_not_applicable");
  std::string in = make_cf_grid(dir, "none", "--class-missing-corner");
  Drawn d = quicklook(in, dir + "/map.png", "--field latent_layer_depth");
  EXPECT_NE(d.result.output.find("missing cells 1, not applicable cells 3"), std::string::npos) << d.result.output;
  auto image = maps::detail::read_png(dir + "/map.png");
  Grid g = read_grid(in, "latent_layer_depth", "lon", "lat");
  Rgb missing = cell_colour(image, d, g.x[0], g.y[0]);
  EXPECT_TRUE(missing[0] == missing[1] && missing[1] == missing[2]) << "missing is not grey";
  for (auto [i, j] : std::vector<std::pair<int, int>>{{1, 0}, {0, 1}, {1, 1}})
    EXPECT_EQ(cell_colour(image, d, g.x[i], g.y[j]), maps::detail::not_applicable_colour()) << i << "," << j;
}

TEST(Quicklook, ClassFieldUsesTheCategoricalColoursOfItsFlagValues) {
  std::string dir = scratch_dir("maps_quicklook_classes");
  std::string in = make_cf_grid(dir, "none");
  Drawn d = quicklook(in, dir + "/map.png", "--field latent_class");
  EXPECT_EQ(d.bins, 0) << "a class field has a legend, not a colour bar";
  auto image = maps::detail::read_png(dir + "/map.png");
  Grid g = read_grid(in, "latent_class", "lon", "lat");
  for (std::size_t j = 0; j < g.y.size(); ++j)
    for (std::size_t i = 0; i < g.x.size(); ++i) {
      int value = static_cast<int>(g.values[j * g.x.size() + i]);  // flag_values 0, 1, 2: index = value
      EXPECT_EQ(cell_colour(image, d, g.x[i], g.y[j]), maps::detail::category_colour(value)) << i << "," << j;
    }
}

TEST(Quicklook, AutomaticRangeIsTheRounded2ndTo98thPercentileWithAPointedEnd) {
  // One outlier of 100000 J/kg: the bar ends at round numbers next to NumPy's 2nd and 98th
  // percentiles (numpy.percentile, linear), and says that values lie above it.
  std::string dir = scratch_dir("maps_quicklook_percentiles");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic", "--outlier 100000");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  EXPECT_NE(d.result.output.find("values above (pointed end)"), std::string::npos) << d.result.output;
  auto r = run_command(python() + " -c \"import netCDF4, numpy as np; v = netCDF4.Dataset('" + in +
                       "')['mu_cape'][0].compressed(); print(*np.percentile(v, [2, 98]))\"");
  auto p = numbers_of(r.output);
  ASSERT_EQ(p.size(), 2u) << r.output;
  EXPECT_LE(d.low, p[0]);
  EXPECT_GT(d.low + d.step, p[0]);
  EXPECT_GE(d.high, p[1]);
  EXPECT_LT(d.high - d.step, p[1]);
}

TEST(Quicklook, TitleGivesTheValidTime) {
  // time = 6 hours since 2031-07-14 00:00:00 at index 1 (make_cf_grid.py).
  std::string dir = scratch_dir("maps_quicklook_time");
  std::string in = make_cf_grid(dir, "mercator");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape --time 1");
  EXPECT_NE(d.result.output.find("valid 2031-07-14 06:00 UTC"), std::string::npos) << d.result.output;
}

TEST(Quicklook, ClimatologyGroupIsChosenByItsName) {
  // make_cf_grid.py --groups: DJF MAM JJA SON with mu_cape_mean = 100, 200, 300, 400.
  std::string dir = scratch_dir("maps_quicklook_group");
  std::string in = make_cf_grid(dir, "latitude_longitude", "--groups");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape_mean --group jja");
  EXPECT_NE(d.result.output.find("group JJA"), std::string::npos) << d.result.output;
  EXPECT_LT(d.low, 300.0);
  EXPECT_GT(d.high, 300.0);
  EXPECT_GT(d.low, 200.0);
  Drawn by_index = quicklook(in, dir + "/map3.png", "--field mu_cape_mean --group 3");
  EXPECT_NE(by_index.result.output.find("group SON"), std::string::npos) << by_index.result.output;
}

TEST(Quicklook, UnknownGroupIsAUsageErrorNamingTheGroups) {
  std::string dir = scratch_dir("maps_quicklook_bad_group");
  std::string in = make_cf_grid(dir, "latitude_longitude", "--groups");
  auto result = run_command(binary() + " quicklook " + in + " --field mu_cape_mean --group Jan -o " + dir + "/m.png");
  EXPECT_EQ(result.exit_code, 2) << result.output;
  EXPECT_NE(result.output.find("DJF, MAM, JJA, SON"), std::string::npos) << result.output;
}

TEST(Quicklook, UnstructuredGridIsDrawnOnALatLonGrid) {
  std::string dir = scratch_dir("maps_quicklook_unstructured");
  std::string in = make_cf_grid(dir, "unstructured");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  EXPECT_GT(d.s, 0);
  EXPECT_EQ(maps::detail::read_png(dir + "/map.png").width, d.width);
}

TEST(Quicklook, NothingReachesTheImageEdgeOnANarrowMap) {
  // A map 6 cells wide and 60 tall (Mercator): title, labels, colour bar, caption and legend are laid
  // out from measured text, so a white margin remains on every side.
  std::string dir = scratch_dir("maps_quicklook_narrow");
  std::string in = make_cf_grid(dir, "mercator", "--nx 6 --ny 60");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  auto image = maps::detail::read_png(dir + "/map.png");
  const Rgb white{255, 255, 255};
  for (int margin = 0; margin < 6; ++margin) {
    for (int x = 0; x < image.width; ++x) {
      ASSERT_EQ(image.get(x, margin), white) << "top, x " << x;
      ASSERT_EQ(image.get(x, image.height - 1 - margin), white) << "bottom, x " << x;
    }
    for (int y = 0; y < image.height; ++y) {
      ASSERT_EQ(image.get(margin, y), white) << "left, y " << y;
      ASSERT_EQ(image.get(image.width - 1 - margin, y), white) << "right, y " << y;
    }
  }
}

TEST(Quicklook, CoastlinePassesWithinOnePixelOfCapesOnALatLonMap) {
  // Southern Africa at 0.1 degree (5.5 km pixels). Cape Agulhas 34 50 S 20 00 E: IHO Special
  // Publication 23 "Limits of Oceans and Seas" (1953), the Atlantic/Indian Ocean limit. Cape of Good
  // Hope 34 21.4 S 18 28.4 E: from memory (commonly published gazetteer value).
  std::string dir = scratch_dir("maps_quicklook_coast_latlon");
  std::string in = make_cf_grid(dir, "latitude_longitude", "--grid 0.05 0.1 -39.95 0.1 --nx 360 --ny 240 --times 1 --constant 500");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  auto image = maps::detail::read_png(dir + "/map.png");
  Rgb sea = cell_colour(image, d, 10.0, -38.0);  // open ocean, far from any coast or graticule line
  for (auto [lon, lat] : std::vector<std::pair<double, double>>{{20.0, -(34 + 50 / 60.0)}, {18 + 28.4 / 60, -(34 + 21.4 / 60)}}) {
    auto [px, py] = d.pixel(lon, lat);
    EXPECT_TRUE(line_within_one_pixel(image, px, py, sea, -1)) << "no coastline within a pixel of " << lon << ", " << lat;
  }
  // and none in the open ocean
  auto [px, py] = d.pixel(10.3, -37.7);
  EXPECT_FALSE(line_within_one_pixel(image, px, py, sea, -1));
}

TEST(Quicklook, CoastlinePassesWithinOnePixelOfCapesOnALambertMap) {
  // Lambert conformal (make_cf_grid.py, 25 km cells, 6.25 km pixels). Cabo Ortegal 43 46 N 7 52 W
  // and Penmarc'h Point 47 48 N 4 22 W bound the Bay of Biscay in IHO Special Publication 23 (1953)
  // (from memory). Their x/y from PROJ's cs2cs.
  std::string dir = scratch_dir("maps_quicklook_coast_lambert");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic",
                                "--grid -1987500 25000 -1187500 25000 --nx 160 --ny 100 --times 1 --constant 500");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  auto image = maps::detail::read_png(dir + "/map.png");
  auto xy = cs2cs(kLambert, {{-(7 + 52 / 60.0), 43 + 46 / 60.0}, {-(4 + 22 / 60.0), 47 + 48 / 60.0}, {-15.0, 42.0}});
  ASSERT_EQ(xy.size(), 3u);
  Rgb sea = cell_colour(image, d, xy[2].first, xy[2].second);  // the open Atlantic
  for (int k = 0; k < 2; ++k) {
    auto [px, py] = d.pixel(xy[k].first, xy[k].second);
    EXPECT_TRUE(line_within_one_pixel(image, px, py, sea, -1)) << "landmark " << k << " at pixel " << px << ", " << py;
  }
}

TEST(Quicklook, GraticuleLinesCrossWherePROJPutsTheirNodes) {
  // On the Lambert map the graticule nodes (lon, lat multiples of its spacing) over the sea lie, within
  // one pixel, on a line lighter than the field; positions from PROJ's cs2cs.
  std::string dir = scratch_dir("maps_quicklook_graticule");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic",
                                "--grid -1987500 25000 -1187500 25000 --nx 160 --ny 100 --times 1 --constant 500");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  ASSERT_EQ(d.graticule_deg, 10.0) << d.result.output;
  auto image = maps::detail::read_png(dir + "/map.png");
  auto xy = cs2cs(kLambert, {{-10.0, 50.0}, {0.0, 40.0}, {-15.0, 42.0}});
  ASSERT_EQ(xy.size(), 3u);
  Rgb sea = cell_colour(image, d, xy[2].first, xy[2].second);
  for (int k = 0; k < 2; ++k) {
    auto [px, py] = d.pixel(xy[k].first, xy[k].second);
    EXPECT_TRUE(line_within_one_pixel(image, px, py, sea, +1)) << "node " << k << " at pixel " << px << ", " << py;
  }
}

TEST(Quicklook, TimeIndexBeyondTheFileIsAUsageError) {
  std::string dir = scratch_dir("maps_quicklook_bad_time");
  std::string in = make_cf_grid(dir, "none");
  auto result = run_command(binary() + " quicklook " + in + " --field mu_cape --time 5 -o " + dir + "/m.png");
  EXPECT_EQ(result.exit_code, 2) << result.output;
  EXPECT_FALSE(fs::exists(dir + "/m.png"));
}

TEST(Quicklook, UnknownFieldIsAnInputError) {
  std::string dir = scratch_dir("maps_quicklook_bad_field");
  std::string in = make_cf_grid(dir, "none");
  auto result = run_command(binary() + " quicklook " + in + " --field no_such_field -o " + dir + "/m.png");
  EXPECT_EQ(result.exit_code, 2) << result.output;
  EXPECT_NE(result.output.find("no_such_field"), std::string::npos) << result.output;
}

}  // namespace
}  // namespace latentlift::test
